//! The bundled demo tones rendered in memory: each line of `demo-tones/recipes.txt` (a file name,
//! the `brink gen` options and one recipe per channel) read into a [`Signal`] and rendered, the
//! same signals as the WAV files in `demo-tones/` before they were quantised to 24 bits.

use std::time::Duration;

use super::{render_channels, Signal};
use crate::parse::parse_duration;

/// The recipes the demo tones are made from (the same text `make.sh` reads).
pub const RECIPES: &str = include_str!("../../demo-tones/recipes.txt");

/// The signal one recipes line describes: `FILE [--rate HZ] [--bits B] [--length D] [--seed N]
/// [--dither] RECIPE...`, with `brink gen`'s defaults for what it leaves out. The sample format
/// and dither only matter to a file, so they are checked for a value and otherwise left out.
pub fn signal_of_line(line: &str) -> Result<Signal, String> {
    let mut words = line.split_whitespace();
    words.next().ok_or("an empty recipe line")?;
    let mut signal = Signal {
        recipes: Vec::new(),
        rate: 48000,
        length: Duration::from_secs(2),
        seed: 1,
    };
    while let Some(word) = words.next() {
        let Some(option) = word.strip_prefix("--") else {
            signal.recipes.push(word.to_string());
            continue;
        };
        if option == "dither" {
            continue;
        }
        let (name, value) = match option.split_once('=') {
            Some((n, v)) => (n, v.to_string()),
            None => (
                option,
                words
                    .next()
                    .ok_or_else(|| format!("--{option} needs a value"))?
                    .to_string(),
            ),
        };
        let bad = |e: &dyn std::fmt::Display| format!("--{name} '{value}': {e}");
        match name {
            "rate" => signal.rate = value.parse().map_err(|e| bad(&e))?,
            "length" => signal.length = parse_duration(&value).map_err(|e| bad(&e))?,
            "seed" => signal.seed = value.parse().map_err(|e| bad(&e))?,
            "bits" => {
                value.parse::<super::SampleFormat>().map_err(|e| bad(&e))?;
            }
            _ => return Err(format!("unknown option --{name}")),
        }
    }
    if signal.recipes.is_empty() {
        return Err("no recipe".into());
    }
    Ok(signal)
}

/// Render a demo tone from the bundled recipes: (rate, channels, interleaved samples), the
/// same signals as the WAV files in demo-tones/ before they were quantised to 24 bits.
pub fn render_scene(file: &str) -> Result<(u32, usize, Vec<f32>), String> {
    let line = RECIPES
        .lines()
        .find(|l| l.split_whitespace().next() == Some(file))
        .ok_or_else(|| format!("no recipe for {file}"))?;
    let signal = signal_of_line(line).map_err(|e| format!("demo recipe for {file}: {e}"))?;
    let channels = render_channels(&signal).map_err(|e| e.to_string())?;
    let frames = channels.first().map_or(0, Vec::len);
    let mut out = Vec::with_capacity(frames * channels.len());
    for i in 0..frames {
        for c in &channels {
            // Full scale as the 24-bit file has it: clamped at ±1.
            out.push(c[i].clamp(-1.0, 1.0) as f32);
        }
    }
    Ok((signal.rate, channels.len(), out))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_line_reads_as_brink_gen_would() {
        let s = signal_of_line("x.wav --rate 96000 --bits 24 --length 3s --seed 7 sine noise@-60")
            .unwrap();
        assert_eq!(s.rate, 96000);
        assert_eq!(s.length, Duration::from_secs(3));
        assert_eq!(s.seed, 7);
        assert_eq!(s.recipes, ["sine", "noise@-60"]);
        // `brink gen`'s defaults for what a line leaves out.
        let s = signal_of_line("x.wav sine").unwrap();
        assert_eq!(
            (s.rate, s.length, s.seed),
            (48000, Duration::from_secs(2), 1)
        );
        assert!(signal_of_line("x.wav --rate").is_err());
        assert!(signal_of_line("x.wav --colour 3 sine").is_err());
        assert!(signal_of_line("x.wav --length 2 sine").is_err());
        assert!(signal_of_line("x.wav --rate 48000").is_err());
    }

    #[test]
    fn every_bundled_line_renders() {
        for line in RECIPES
            .lines()
            .filter(|l| !l.trim().is_empty() && !l.starts_with('#'))
        {
            let file = line.split_whitespace().next().unwrap();
            let (rate, channels, samples) = render_scene(file).unwrap();
            let s = signal_of_line(line).unwrap();
            assert_eq!(rate, s.rate);
            assert_eq!(channels, s.recipes.len());
            let frames = (s.length.as_secs_f64() * f64::from(rate)).round() as usize;
            assert_eq!(samples.len(), frames * channels, "{file}");
        }
    }
}
