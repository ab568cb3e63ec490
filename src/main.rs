//! The `linegrid` command: parses arguments, dispatches to the library, reports.

mod cli;

fn main() -> std::process::ExitCode {
    cli::run()
}
