//! The kickscan binary: parse arguments, dispatch to the library, choose the exit code.

use std::io::Write;
use std::process::ExitCode;

use clap::Parser;

mod cli;
mod commands;
mod progress;

fn main() -> ExitCode {
    let cli = match cli::Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            // clap prints help and version to stdout with success; usage errors exit 2.
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match commands::run(cli) {
        Ok(code) => code,
        Err(e) => {
            if is_broken_pipe(&e) {
                return ExitCode::SUCCESS;
            }
            let _ = writeln!(std::io::stderr(), "error: {e:#}");
            ExitCode::from(commands::EXIT_USAGE)
        }
    }
}

/// `kickscan ... | head` closes the pipe early; that is not a failure.
fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}
