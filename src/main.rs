//! The `burstbook` command: parse arguments, call the library, report errors.

mod cli;

use std::io::Write;
use std::process::ExitCode;

fn main() -> ExitCode {
    let args = cli::Cli::parse_args();
    match cli::run(args) {
        Ok(()) => ExitCode::SUCCESS,
        // A reader that stopped early (`| head`) is not an error of ours.
        Err(e) if is_broken_pipe(&e) => ExitCode::SUCCESS,
        Err(e) => {
            // One line: the outermost context, then each cause not already quoted
            // by the one before (library errors embed their I/O cause).
            let mut line = e.to_string();
            for cause in e.chain().skip(1).map(|c| c.to_string()) {
                if !line.contains(&cause) {
                    line = format!("{line}: {cause}");
                }
            }
            // Nowhere left to report a closed standard error; the exit code still tells.
            let _ = writeln!(std::io::stderr(), "burstbook: error: {line}");
            ExitCode::FAILURE
        }
    }
}

fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}
