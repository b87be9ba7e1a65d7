//! brink: clipping, true peak and harmonic distortion measurement, live or from files.
//!
//! The data's path: [`source`] (where samples come from) → [`dsp`] (pure numerics) →
//! [`analysis`] (per-channel state and reports) → [`sink`] (text, JSON). [`scan`] drives the path
//! for files; [`live`] runs it on a live input; [`ui`] draws it on a terminal; [`gen`] makes test
//! signals. The binary only calls [`run`].
#![warn(missing_docs)]

pub mod analysis;
pub mod cli;
pub mod compare;
pub mod config;
pub mod dsp;
pub mod gen;
pub mod live;
pub mod logcmd;
pub mod plot;
pub mod scan;
pub mod sink;
pub mod source;
pub mod sweep;
pub mod ui;
pub mod watch;

use std::ffi::OsString;
use std::io::{self, BufWriter, Write};
use std::process::ExitCode;

use clap::Parser;

use cli::{Cli, Command, ScanArgs};

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
        Command::Scan(args) => run_scan(&args, &mut out, &mut err),
        Command::Log(args) => {
            // Records go straight to their target, each flushed as written.
            drop(out);
            return ExitCode::from(logcmd::run_log(&args, &mut err));
        }
        Command::Watch(args) => {
            drop(out);
            return ExitCode::from(watch::run_watch(&args, &mut err));
        }
        Command::Demo(args) => {
            if args.list {
                watch::run_demo(&args, &mut out, &mut err)
            } else {
                drop(out);
                return ExitCode::from(watch::run_demo(&args, &mut io::stdout(), &mut err));
            }
        }
        Command::Sweep(args) => {
            // Steps are printed as they are measured.
            drop(out);
            let stdout = io::stdout();
            return ExitCode::from(sweep::run_sweep(&args, &mut stdout.lock(), &mut err));
        }
        Command::Devices(args) => run_devices(&args, &mut out, &mut err),
        Command::Compare(args) => compare::run(&args, &mut out, &mut err),
        Command::Gen(args) => match gen::run(&args, &mut out) {
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

/// `brink devices`: every host (or one) with its devices, as a table or JSON.
pub fn run_devices<W: Write, E: Write>(args: &cli::DevicesArgs, out: &mut W, err: &mut E) -> u8 {
    let hosts = match &args.host {
        Some(name) => match live::devices::find_host(Some(name)) {
            Ok(h) => vec![live::devices::report_host(&h, false)],
            Err(e) => {
                let _ = writeln!(err, "brink devices: {e}");
                return EXIT_USAGE;
            }
        },
        None => live::devices::list(),
    };
    let written = if args.json {
        sink::json::write_line(out, &hosts)
    } else {
        live::devices::write_table(&mut *out, &hosts)
    };
    match written {
        Ok(()) => EXIT_OK,
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => EXIT_OK,
        Err(e) => {
            let _ = writeln!(err, "brink devices: cannot write output: {e}");
            EXIT_FILE_ERROR
        }
    }
}

/// `brink scan`: each file is measured and reported on its own; a bad file is reported on
/// `err` and the rest go on.
pub fn run_scan<W: Write, E: Write>(args: &ScanArgs, out: &mut W, err: &mut E) -> u8 {
    let plan = match args.plan() {
        Ok(p) => p,
        Err(msg) => {
            let _ = writeln!(err, "brink scan: {msg}");
            return EXIT_USAGE;
        }
    };
    let settings = plan.settings;
    // `--svg`: one figure per input, named after it when there are several.
    let svg = args.svg.as_deref();
    let figures = match svg.map(|s| plot::per_file_paths(s, &args.files)) {
        Some(Err(msg)) => {
            let _ = writeln!(err, "brink scan: {msg}");
            return EXIT_USAGE;
        }
        Some(Ok(paths)) => paths,
        None => Vec::new(),
    };
    let mut code = EXIT_OK;
    for (i, path) in args.files.iter().enumerate() {
        let written = match scan::scan_file(path, &settings) {
            Ok(report) => {
                let r = if plan.json {
                    sink::json::write_line(out, &report)
                } else {
                    sink::text::write_scan(out, &report)
                };
                if let Some(fig) = figures.get(i) {
                    let channel = args.channel.map(usize::from);
                    let span = settings.tone_span_s;
                    if let Err(e) = plot::scan_spectrum_svg(path, &report, channel, span, fig) {
                        let _ = writeln!(err, "brink scan: {}: {e}", path.display());
                        code = EXIT_FILE_ERROR;
                    }
                }
                r.and_then(|()| out.flush())
            }
            Err(e) => {
                let _ = writeln!(err, "brink scan: {}: {e}", path.display());
                code = EXIT_FILE_ERROR;
                Ok(())
            }
        };
        match written {
            Ok(()) => {}
            // The reader went away (`| head`): stop quietly.
            Err(e) if e.kind() == io::ErrorKind::BrokenPipe => return code,
            Err(e) => {
                let _ = writeln!(err, "brink scan: cannot write output: {e}");
                return EXIT_FILE_ERROR;
            }
        }
    }
    code
}
