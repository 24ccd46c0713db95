//! The `exobound` command: a thin layer that parses arguments and calls the library.

mod cli;

fn main() -> std::process::ExitCode {
    cli::run(std::env::args_os())
}
