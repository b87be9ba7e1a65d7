//! `brink compare`: its arguments, the help under `brink compare --help`, and the run: the scan
//! settings a WAV capture is measured with, both inputs read, compared, printed and drawn. The
//! comparison itself is in [`crate::compare`].

use std::io::{self, Write};
use std::path::PathBuf;

use clap::Args;

use super::common::{configured, plan_from};
use crate::compare::{compare, load, write_json, write_text, CompareError, Input, MIN_TABLE_ORDER};
use crate::plot::{compare_svg, Pair};

/// How `compare` reads its inputs and what it prints; shown under `brink compare --help`.
pub const COMPARE_AFTER_HELP: &str = "\
Inputs, recognised from their content:
  WAV capture     a RIFF file, measured as `brink scan` would with its defaults (and the user
                  configuration file); --channel picks the channel (default 1)
  snapshot        a channel report saved by the dashboard (key s: snapshot-a.json)
  scan report     one line of `brink scan --json` (format brink-scan-1); --channel picks the channel
  sweep           a `brink sweep --json` document (format brink-sweep-1)
Two fingerprints (WAV, snapshot, scan report, in any mix) or two sweeps of one kind compare;
a sweep against a fingerprint is refused.
Fingerprints: H2..H10 (and higher orders when measured) of A and B in dBc with B-A, THD,
  THD+N, odd/even balance and fall-off, then plain words: each one's character line, which is
  more even-rich (balances within 6 dB and of one family alike), which falls off faster
  (within 3 dB/octave alike), which has more THD (within 1 dB alike), and each one's strongest
  harmonic.
Sweeps: THD against drive side by side (steps within 0.05 dB of drive aligned; frequency
  sweeps against frequency), onset and knee of each, and which clips earlier (by how many dB
  of drive and of returned level; onsets within 0.3 dB alike) and which more abruptly
  (steepest THD rise, dB per dB of drive; within 1 dB/dB alike).
--json prints one document (format brink-compare-1); --svg FILE draws harmonic bars of A
beside B (odd orders marked with circles, even with triangles; B hatched), or both sweeps'
THD curves.
Exit status: 0 compared, 1 an input could not be read or holds nothing to compare (no tone),
2 a wrong command line (a sweep against a fingerprint, a channel the file does not have).";

/// Arguments of `brink compare`.
#[derive(Debug, Args)]
pub struct CompareArgs {
    /// A: a WAV capture, a saved snapshot, one `brink scan --json` line or a `brink sweep --json`
    /// document.
    pub a: PathBuf,
    /// B: the same kinds; two fingerprints or two sweeps compare.
    pub b: PathBuf,
    /// Channel of a WAV capture or scan report to compare (from 1).
    #[arg(long, value_name = "N", default_value_t = 1, value_parser = clap::value_parser!(u16).range(1..))]
    pub channel: u16,
    /// Channel of B when it differs from A's [default: --channel].
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
    pub channel_b: Option<u16>,
    /// Print one JSON document (format "brink-compare-1") instead of the tables.
    #[arg(long)]
    pub json: bool,
    /// Also draw the comparison as an SVG figure into FILE.
    #[arg(long, value_name = "FILE")]
    pub svg: Option<PathBuf>,
}

/// `brink compare`: read both inputs, compare, print; the exit status.
pub fn run<W: Write, E: Write>(args: &CompareArgs, out: &mut W, err: &mut E) -> u8 {
    let settings = match configured(None)
        .and_then(|c| plan_from(&c))
        .map(|p| p.settings)
        .map_err(CompareError::Settings)
    {
        Ok(s) => s,
        Err(e) => {
            let _ = writeln!(err, "brink compare: {e}");
            return e.exit_code();
        }
    };
    let ch_a = usize::from(args.channel);
    let ch_b = usize::from(args.channel_b.unwrap_or(args.channel));
    let a = load(&args.a, ch_a, &settings);
    let b = load(&args.b, ch_b, &settings);
    let (a, b) = match (a, b) {
        (Ok(a), Ok(b)) => (a, b),
        (a, b) => {
            let mut code = crate::EXIT_OK;
            for e in [a.err(), b.err()].into_iter().flatten() {
                let _ = writeln!(err, "brink compare: {e}");
                code = code.max(e.exit_code());
            }
            return code;
        }
    };
    let c = match compare(&a, &b) {
        Ok(c) => c,
        Err(e) => {
            let _ = writeln!(err, "brink compare: {e}");
            return e.exit_code();
        }
    };
    let written = if args.json {
        write_json(out, &c)
    } else {
        write_text(out, &c)
    };
    match written.and_then(|()| out.flush()) {
        Ok(()) => {}
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => return crate::EXIT_OK,
        Err(e) => {
            let _ = writeln!(err, "brink compare: cannot write output: {e}");
            return crate::EXIT_FILE_ERROR;
        }
    }
    if let Some(svg) = &args.svg {
        let drawn = match (&a, &b) {
            (Input::Fingerprint(fa), Input::Fingerprint(fb)) => compare_svg(
                &Pair::Fingerprints {
                    sides: [(&fa.label, &fa.distortion), (&fb.label, &fb.distortion)],
                    min_top_order: MIN_TABLE_ORDER,
                },
                svg,
            ),
            (Input::Sweep(sa), Input::Sweep(sb)) => compare_svg(
                &Pair::Sweeps([(&sa.label(), &sa.report), (&sb.label(), &sb.report)]),
                svg,
            ),
            // `compare` refused the mix above.
            _ => Ok(()),
        };
        if let Err(e) = drawn {
            let _ = writeln!(err, "brink compare: {e}");
            return crate::EXIT_FILE_ERROR;
        }
    }
    crate::EXIT_OK
}
