//! The `brink` binary: everything lives in the library.

fn main() -> std::process::ExitCode {
    brink::run(std::env::args_os())
}
