//! One function per subcommand: call the library, print, pick the exit code.

use std::io::Write;
use std::process::ExitCode;

use anyhow::{Context, Result};

use crate::cli::{Cli, Command};
use kickscan::pipeline;

/// Exit codes (DESIGN.md): 0 all good, 1 some input failed, 2 usage, 3 a limit crossed.
pub const EXIT_INPUT_FAILED: u8 = 1;
pub const EXIT_USAGE: u8 = 2;
pub const EXIT_LIMIT: u8 = 3;

pub fn run(cli: Cli) -> Result<ExitCode> {
    match cli.command {
        Command::Inspect { inputs, json, read } => {
            let read = read.to_options()?;
            let doc = pipeline::inspect_inputs(&inputs, &read);
            let mut out = std::io::stdout().lock();
            if json {
                serde_json::to_writer_pretty(&mut out, &doc)?;
                writeln!(out)?;
            } else {
                out.write_all(kickscan::report::inspect_text(&doc).as_bytes())?;
            }
            report_errors(&doc.errors);
            Ok(exit_for(!doc.errors.is_empty(), false))
        }
        Command::Measure {
            inputs,
            json,
            out,
            read,
            analysis,
        } => {
            let settings = analysis.to_settings(read.to_options()?)?;
            let quiet = analysis.quiet || json;
            let doc = crate::progress::with_bar(quiet, "measuring", |tick| {
                pipeline::measure_inputs(&inputs, &settings, tick)
            });
            let mut stdout = std::io::stdout().lock();
            if json {
                serde_json::to_writer_pretty(&mut stdout, &doc)?;
                writeln!(stdout)?;
            } else {
                stdout.write_all(kickscan::report::measure_text(&doc).as_bytes())?;
            }
            if let Some(dir) = out {
                kickscan::report::write_report(&dir, &doc, &settings)
                    .with_context(|| format!("writing the report to {}", dir.display()))?;
                writeln!(
                    stdout,
                    "report written to {}",
                    dir.join("report.html").display()
                )?;
            }
            report_errors(&doc.errors);
            let crossed = pipeline::limit_crossed(&doc, &settings);
            if let Some(reason) = &crossed {
                eprintln!("FAIL: {reason}");
            }
            Ok(exit_for(!doc.errors.is_empty(), crossed.is_some()))
        }
        Command::Simulate(args) => crate::cli::simulate::run(args),
        Command::Parasitics(args) => crate::cli::parasitics::run(args),
    }
}

fn report_errors(errors: &[kickscan::document::FileError]) {
    for e in errors {
        eprintln!("error: {}", e.error);
    }
}

fn exit_for(input_failed: bool, limit_crossed: bool) -> ExitCode {
    if limit_crossed {
        ExitCode::from(EXIT_LIMIT)
    } else if input_failed {
        ExitCode::from(EXIT_INPUT_FAILED)
    } else {
        ExitCode::SUCCESS
    }
}
