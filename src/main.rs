//! The `burstbook` command: parse arguments, call the library, report errors.

mod cli;

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let args = cli::Cli::parse();
    match cli::run(args) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // One line: the outermost context, then each cause.
            eprintln!("burstbook: error: {e:#}");
            ExitCode::FAILURE
        }
    }
}
