//! `brink devices`: its arguments and the run that lists every host (or one) with its devices.

use std::io::{self, Write};

use clap::Args;

use crate::live::devices;

/// Arguments of `brink devices`.
#[derive(Debug, Args)]
pub struct DevicesArgs {
    /// Only this host (e.g. alsa, jack).
    #[arg(long)]
    pub host: Option<String>,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// `brink devices`: every host (or one) with its devices, as a table or JSON.
pub fn run<W: Write, E: Write>(args: &DevicesArgs, out: &mut W, err: &mut E) -> u8 {
    let hosts = match &args.host {
        Some(name) => match devices::find_host(Some(name)) {
            Ok(h) => vec![devices::report_host(&h, false)],
            Err(e) => {
                let _ = writeln!(err, "brink devices: {e}");
                return crate::EXIT_USAGE;
            }
        },
        None => devices::list(),
    };
    let written = if args.json {
        crate::sink::json::write_line(out, &hosts)
    } else {
        devices::write_table(&mut *out, &hosts)
    };
    match written {
        Ok(()) => crate::EXIT_OK,
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => crate::EXIT_OK,
        Err(e) => {
            let _ = writeln!(err, "brink devices: cannot write output: {e}");
            crate::EXIT_FILE_ERROR
        }
    }
}
