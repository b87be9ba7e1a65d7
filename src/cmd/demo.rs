//! `brink demo`: its arguments, the list of demo scenes, and the run that plays one of them
//! (rendered from the bundled recipes) through the dashboard, looping.

use std::io::Write;
use std::sync::Arc;

use clap::Args;

use super::watch::{finish, screen_settings, ScreenArgs};
use crate::gen::demo::render_scene;
use crate::live::session::SourceSpec;
use crate::ui::terminal::live;

/// Arguments of `brink demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Which demo: stage-box (default), push-pull, single-ended or laptop-96k.
    #[arg(long, default_value = "stage-box")]
    pub scene: String,
    /// List the demos and what each shows.
    #[arg(long)]
    pub list: bool,
    #[allow(missing_docs)] // clap would print a doc comment here as help text
    #[command(flatten)]
    pub screen: ScreenArgs,
}

/// The demos: scene name, file in demo-tones/recipes.txt, what it shows.
pub const SCENES: &[(&str, &str, &str)] = &[
    (
        "stage-box",
        "stage-box-soundcheck.wav",
        "four stage inputs at soundcheck: the vocal preamp flat-tops at -4 dBFS, the bass DI hits overs, the room mic carries only noise",
    ),
    (
        "push-pull",
        "push-pull-stage-drive-steps.wav",
        "a symmetric stage driven up in six steps: odd harmonics only, rising",
    ),
    (
        "single-ended",
        "single-ended-stage-drive-steps.wav",
        "an asymmetric stage at the same steps: even harmonics lead",
    ),
    (
        "laptop-96k",
        "playback-laptop-96k-intersample.wav",
        "96 kHz playback whose left channel peaks between samples (+0.6 dBTP)",
    ),
];

/// `brink demo`; returns the exit status.
pub fn run<W: Write, E: Write>(args: &DemoArgs, out: &mut W, err: &mut E) -> u8 {
    if args.list {
        for (name, file, what) in SCENES {
            if writeln!(out, "{name:<13} {what}\n{:<13} (demo-tones/{file})", "").is_err() {
                return crate::EXIT_OK;
            }
        }
        return crate::EXIT_OK;
    }
    let result = (|| {
        let (name, file, _) = SCENES
            .iter()
            .find(|(n, _, _)| *n == args.scene)
            .ok_or_else(|| {
                let names: Vec<&str> = SCENES.iter().map(|s| s.0).collect();
                format!(
                    "no demo called '{}'; try one of: {}",
                    args.scene,
                    names.join(", ")
                )
            })?;
        let screen = screen_settings(&args.screen)?;
        let (rate, channels, samples) = render_scene(file)?;
        let spec = SourceSpec::Memory {
            name: format!("{name} (demo-tones/{file}, looping)"),
            rate,
            channels,
            samples: Arc::new(samples),
        };
        live(&spec, None, "demo", screen)
    })();
    finish(result, "demo", err)
}
