//! The `burstbook` command: parse arguments, call the library, report errors.

mod cli;

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let args = cli::Cli::parse();
    match cli::run(args) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // One line: the outermost context, then each cause not already quoted
            // by the one before (library errors embed their I/O cause).
            let mut line = e.to_string();
            for cause in e.chain().skip(1).map(|c| c.to_string()) {
                if !line.contains(&cause) {
                    line = format!("{line}: {cause}");
                }
            }
            eprintln!("burstbook: error: {line}");
            ExitCode::FAILURE
        }
    }
}
