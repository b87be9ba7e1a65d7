//! brink: clipping, true peak and harmonic distortion measurement, live or from files.
//!
//! The data's path: [`source`] (where samples come from) → [`dsp`] (pure numerics) →
//! [`analysis`] (per-channel state and reports) → [`sink`] (text, JSON). [`scan`] drives the path
//! for files; [`live`] runs it on a live input; [`ui`] draws it on a terminal; [`gen`] makes test
//! signals. [`cmd`] holds the command line, one module per command; [`parse`] the value
//! parsers it shares with [`config`]. The binary only calls [`run`].
#![warn(missing_docs)]

pub mod analysis;
pub mod cmd;
pub mod compare;
pub mod config;
pub mod dsp;
pub mod gen;
pub mod live;
pub mod parse;
pub mod plot;
pub mod scan;
pub mod sink;
pub mod source;
pub mod sweep;
pub mod ui;

use std::ffi::OsString;
use std::io::{self, BufWriter, Write};
use std::process::ExitCode;

use clap::Parser;

use cmd::{Cli, Command};

/// Exit status: every file was measured (clipping found or not).
pub const EXIT_OK: u8 = 0;
/// Exit status: at least one file could not be measured; the others were.
pub const EXIT_FILE_ERROR: u8 = 1;
/// Exit status: the command line was wrong.
pub const EXIT_USAGE: u8 = 2;

/// Parse `args` (program name first) and run the chosen mode; returns the process exit code.
pub fn run<I, T>(args: I) -> ExitCode
where
    I: IntoIterator<Item = T>,
    T: Into<OsString> + Clone,
{
    let cli = match Cli::try_parse_from(args) {
        Ok(c) => c,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(e.exit_code().clamp(0, 255) as u8);
        }
    };
    let stdout = io::stdout();
    let mut out = BufWriter::new(stdout.lock());
    let mut err = io::stderr();
    let code = match cli.command {
        Command::Scan(args) => cmd::scan::run(&args, &mut out, &mut err),
        Command::Log(args) => {
            // Records go straight to their target, each flushed as written.
            drop(out);
            return ExitCode::from(cmd::log::run(&args, &mut err));
        }
        Command::Watch(args) => {
            drop(out);
            return ExitCode::from(cmd::watch::run(&args, &mut err));
        }
        Command::Demo(args) => {
            if args.list {
                cmd::demo::run(&args, &mut out, &mut err)
            } else {
                drop(out);
                return ExitCode::from(cmd::demo::run(&args, &mut io::stdout(), &mut err));
            }
        }
        Command::Sweep(args) => {
            // Steps are printed as they are measured.
            drop(out);
            let stdout = io::stdout();
            return ExitCode::from(cmd::sweep::run(&args, &mut stdout.lock(), &mut err));
        }
        Command::Devices(args) => cmd::devices::run(&args, &mut out, &mut err),
        Command::Compare(args) => cmd::compare::run(&args, &mut out, &mut err),
        Command::Gen(args) => match cmd::gen::run(&args, &mut out) {
            Ok(()) => EXIT_OK,
            Err(e) => {
                let _ = writeln!(err, "brink gen: {e}");
                EXIT_FILE_ERROR
            }
        },
    };
    match out.flush() {
        Err(e) if e.kind() != io::ErrorKind::BrokenPipe => {
            let _ = writeln!(err, "brink: cannot write output: {e}");
            ExitCode::from(EXIT_FILE_ERROR)
        }
        _ => ExitCode::from(code),
    }
}
