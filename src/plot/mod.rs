//! SVG figures (`--svg FILE`): a sweep's THD and harmonics against drive, two fingerprints'
//! harmonic bars side by side (or two sweeps' THD curves), and a channel's spectrum with its
//! harmonics marked by order.
//!
//! Drawn with `plotters` on its SVG backend alone: text is written as SVG `<text>` in a generic
//! sans-serif face, so no font library is needed to draw and any browser or printer sets it.
//! For print and screen alike: white background, text at least 12 px, lines at least 2 px,
//! and nothing told by colour alone (markers, dashes, hatching and labels carry the meaning).
//!
//! [`kit`] holds what the figures share; [`sweep`], [`compare`] and [`spectrum`] are one figure
//! each.

use std::io;
use std::path::{Path, PathBuf};

pub mod compare;
pub mod kit;
pub mod spectrum;
pub mod sweep;

pub use compare::{compare_svg, compare_svg_string, Pair};
pub use spectrum::{
    scan_spectrum_svg, spectrum_svg, spectrum_svg_string, Spectrum, SPECTRUM_WINDOW,
};
pub use sweep::{sweep_svg, sweep_svg_string};

/// Everything that can go wrong while drawing a figure.
#[derive(Debug, thiserror::Error)]
pub enum PlotError {
    /// The data holds nothing a figure could show.
    #[error("nothing to draw: {0}")]
    Nothing(String),
    /// The drawing library failed.
    #[error("cannot draw the figure: {0}")]
    Draw(String),
    /// The file could not be written.
    #[error("cannot write the figure to {path}: {source}; check that the folder exists and can be written")]
    Write {
        /// The figure's path.
        path: PathBuf,
        /// Why.
        #[source]
        source: io::Error,
    },
    /// `--channel` names a channel the file does not have.
    #[error("has no channel {channel} (it has {channels}); pick one with --channel")]
    NoChannel {
        /// The WAV file.
        path: PathBuf,
        /// The channel asked for.
        channel: usize,
        /// How many it has.
        channels: usize,
    },
}

/// Where `scan --svg OUT` writes each input's figure: OUT itself for one input; for several,
/// OUT's name with each input's file stem added (`spectrum.svg` + `take1.wav` →
/// `spectrum-take1.svg`). Two inputs with the same stem are refused.
pub fn per_file_paths(out: &Path, inputs: &[PathBuf]) -> Result<Vec<PathBuf>, String> {
    if inputs.len() <= 1 {
        return Ok(vec![out.to_path_buf(); inputs.len()]);
    }
    let stem = out
        .file_stem()
        .map_or_else(|| "spectrum".into(), |s| s.to_string_lossy().into_owned());
    let ext = out
        .extension()
        .map_or_else(|| "svg".into(), |e| e.to_string_lossy().into_owned());
    let mut seen = std::collections::HashMap::new();
    let mut paths = Vec::with_capacity(inputs.len());
    for input in inputs {
        let in_stem = input
            .file_stem()
            .map_or_else(|| "input".into(), |s| s.to_string_lossy().into_owned());
        if let Some(prev) = seen.insert(in_stem.clone(), input.clone()) {
            return Err(format!(
                "--svg with several files names each figure after its file ({stem}-{in_stem}.{ext}), but {} and {} share the name '{in_stem}'; scan them one at a time",
                prev.display(),
                input.display()
            ));
        }
        paths.push(out.with_file_name(format!("{stem}-{in_stem}.{ext}")));
    }
    Ok(paths)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn several_inputs_get_their_own_figures() {
        let out = Path::new("figs/spectrum.svg");
        let one = per_file_paths(out, &[PathBuf::from("a/take.wav")]).expect("one");
        assert_eq!(one, vec![PathBuf::from("figs/spectrum.svg")]);
        let two = per_file_paths(
            out,
            &[PathBuf::from("a/take1.wav"), PathBuf::from("take2.wav")],
        )
        .expect("two");
        assert_eq!(
            two,
            vec![
                PathBuf::from("figs/spectrum-take1.svg"),
                PathBuf::from("figs/spectrum-take2.svg")
            ]
        );
        let e = per_file_paths(
            out,
            &[PathBuf::from("a/take.wav"), PathBuf::from("b/take.wav")],
        )
        .expect_err("same stem");
        assert!(e.contains("share the name 'take'"), "{e}");
    }
}
