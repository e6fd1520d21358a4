//! One function per subcommand: call the library, print, pick the exit code.

use std::io::Write;
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Arc;

use anyhow::{Context, Result};

use crate::cli::{Cli, Command};
use kickscan::pipeline;

/// Exit codes (DESIGN.md): 0 all good, 1 some input failed, 2 usage, 3 a limit crossed.
pub const EXIT_INPUT_FAILED: u8 = 1;
pub const EXIT_USAGE: u8 = 2;
pub const EXIT_LIMIT: u8 = 3;
/// Interrupted by Ctrl-C: 128 + SIGINT, as shells report it (common practice).
pub const EXIT_INTERRUPTED: u8 = 130;

/// A flag the first Ctrl-C sets, so a batch stops starting new files; a second Ctrl-C ends
/// the process at once. `None` when the handler could not be installed (the default
/// behaviour, ending the process, then stays).
fn stop_on_ctrl_c() -> Option<Arc<AtomicBool>> {
    use signal_hook::consts::SIGINT;
    let flag = Arc::new(AtomicBool::new(false));
    // The shutdown is registered first so that it only fires once the flag is already set.
    signal_hook::flag::register_conditional_shutdown(SIGINT, EXIT_INTERRUPTED.into(), flag.clone())
        .ok()?;
    signal_hook::flag::register(SIGINT, flag.clone()).ok()?;
    Some(flag)
}

/// What an interrupted batch says (on stderr) before exiting 130: stdout and the report
/// folder are left alone, since results missing files must not pass for a run's results.
fn interrupted(inputs: &[std::path::PathBuf], measured: usize) -> ExitCode {
    let total = pipeline::collect_inputs(inputs).0.len();
    eprintln!("interrupted: {measured} of {total} files measured; no report written");
    ExitCode::from(EXIT_INTERRUPTED)
}

pub fn run(cli: Cli) -> Result<ExitCode> {
    match cli.command {
        Command::Inspect { inputs, json, read } => {
            let read = read.to_options()?;
            let doc = pipeline::inspect_inputs(&inputs, &read);
            let mut out = std::io::stdout().lock();
            if json {
                crate::cli::print_json(&mut out, &doc)?;
            } else {
                out.write_all(kickscan::report::inspect_text(&doc).as_bytes())?;
            }
            report_errors(&doc.errors);
            Ok(exit_for(!doc.errors.is_empty(), false))
        }
        Command::Measure {
            inputs,
            from_table,
            json,
            out,
            force,
            read,
            analysis,
        } => {
            let mut settings = analysis.to_settings(read.to_options()?)?;
            if from_table {
                let unused = analysis.measuring_options_given(&read);
                if !unused.is_empty() {
                    anyhow::bail!(
                        "--from-table: {} cannot apply to event tables (their events were measured when the tables were written); only --rating, --block, --lifetime and the --fail-* limits do",
                        unused.join(", ")
                    );
                }
                return measure_tables(&inputs, json, out, force, &settings);
            }
            settings.stop = stop_on_ctrl_c();
            let quiet = analysis.quiet || json;
            let measured = AtomicUsize::new(0);
            let (doc, sketches) = crate::progress::with_bar(quiet, "measuring", |tick| {
                let count = || {
                    measured.fetch_add(1, Ordering::SeqCst);
                    tick();
                };
                pipeline::measure_inputs_sketched(&inputs, &settings, out.is_some(), &count)
            });
            if settings.stopped() {
                return Ok(interrupted(&inputs, measured.into_inner()));
            }
            let advice = pipeline::suppression_advice(&doc, &settings)
                .map(|a| kickscan::report::advice::advice_lines(&a))
                .unwrap_or_default();
            let mut stdout = std::io::stdout().lock();
            if json {
                crate::cli::print_json(&mut stdout, &doc)?;
            } else {
                stdout.write_all(kickscan::report::measure_text(&doc).as_bytes())?;
                for line in &advice {
                    writeln!(stdout, "{line}")?;
                }
            }
            if let Some(dir) = out {
                let mut input = kickscan::report::ReportInput::new(&doc, &settings, &sketches);
                input.verdicts = &advice;
                input.force = force;
                write_report_and_say(&dir, &input, json, &mut stdout)?;
            }
            report_errors(&doc.errors);
            let crossed = pipeline::limit_crossed(&doc, &settings);
            if let Some(reason) = &crossed {
                eprintln!("FAIL: {reason}");
            }
            Ok(exit_for(!doc.errors.is_empty(), crossed.is_some()))
        }
        Command::Compare {
            variants,
            baseline,
            json,
            out,
            force,
            read,
            analysis,
        } => {
            let variants = crate::cli::parse_variants(&variants)?;
            crate::cli::check_compare_labels(&variants, baseline.as_deref(), &analysis)?;
            let mut settings = analysis.to_settings(read.to_options()?)?;
            settings.stop = stop_on_ctrl_c();
            let quiet = analysis.quiet || json;
            let measured = AtomicUsize::new(0);
            let run = crate::progress::with_bar(quiet, "measuring", |tick| {
                let count = || {
                    measured.fetch_add(1, Ordering::SeqCst);
                    tick();
                };
                kickscan::compare::compare(
                    &variants,
                    baseline.as_deref(),
                    &settings,
                    out.is_some(),
                    &count,
                )
            });
            if settings.stopped() {
                let inputs: Vec<_> = variants.iter().flat_map(|v| v.inputs.clone()).collect();
                return Ok(interrupted(&inputs, measured.into_inner()));
            }
            let mut stdout = std::io::stdout().lock();
            if json {
                crate::cli::print_json(&mut stdout, &run.doc)?;
            } else {
                stdout.write_all(kickscan::report::compare_text(&run.doc).as_bytes())?;
            }
            let mut projections = kickscan::compare::rating_lines(&variants, &run.docs);
            projections.extend(kickscan::compare::projection_lines(&variants, &run.docs));
            if !json {
                for line in &projections {
                    writeln!(stdout, "{line}")?;
                }
            }
            if let Some(dir) = out {
                let merged = kickscan::compare::merged_doc(&variants, &run.docs, &settings);
                let sketches = run.all_sketches();
                let variant_data = run.variant_data(&variants);
                let mut verdicts = run.doc.verdicts.clone();
                verdicts.extend(projections);
                let mut input = kickscan::report::ReportInput::new(&merged, &settings, &sketches);
                input.verdicts = &verdicts;
                input.variants = &variant_data;
                input.force = force;
                write_report_and_say(&dir, &input, json, &mut stdout)?;
            }
            let failed = run.docs.iter().any(|d| !d.errors.is_empty());
            for d in &run.docs {
                report_errors(&d.errors);
            }
            Ok(exit_for(failed, false))
        }
        Command::Demo {
            out,
            captures,
            force,
        } => {
            let dir = kickscan::demo::locate_captures(captures.as_deref())?;
            let stop = stop_on_ctrl_c();
            let outcome =
                crate::progress::with_bar(false, "measuring the sample captures", |tick| {
                    kickscan::demo::run(&dir, &out, force, stop, tick)
                });
            let outcome = match outcome {
                Err(e @ kickscan::demo::DemoError::Interrupted { .. }) => {
                    eprintln!("interrupted: {e}");
                    return Ok(ExitCode::from(EXIT_INTERRUPTED));
                }
                r => r?,
            };
            let mut stdout = std::io::stdout().lock();
            writeln!(stdout, "{}", outcome.scenario.title)?;
            writeln!(stdout, "(simulated captures in {})\n", dir.display())?;
            stdout.write_all(kickscan::report::compare_text(&outcome.compare).as_bytes())?;
            for line in outcome.projections.iter().chain(&outcome.parasitics_lines) {
                writeln!(stdout, "{line}")?;
            }
            writeln!(
                stdout,
                "\nopen the report: {}",
                outcome.report_html.display()
            )?;
            Ok(exit_for(outcome.n_errors > 0, false))
        }
        Command::Simulate(args) => crate::cli::simulate::run(args),
        Command::Parasitics(args) => crate::cli::parasitics::run(args),
    }
}

/// `measure --from-table`: the per-file block from the tables' grouped query, then the
/// summary; `--json` gives the kickscan.measure/1 document with the per-file figures added
/// under `tables`.
#[cfg(feature = "parquet")]
fn measure_tables(
    inputs: &[std::path::PathBuf],
    json: bool,
    out: Option<std::path::PathBuf>,
    force: bool,
    settings: &pipeline::Settings,
) -> Result<ExitCode> {
    let run = pipeline::measure_from_tables(inputs, settings);
    let doc = &run.doc;
    let mut stdout = std::io::stdout().lock();
    if json {
        let mut value = serde_json::to_value(doc)?;
        if let Some(m) = value.as_object_mut() {
            m.insert("tables".into(), serde_json::to_value(&run.groups)?);
        }
        crate::cli::print_json(&mut stdout, &value)?;
    } else {
        stdout.write_all(kickscan::report::parquet::groups_text(&run.groups).as_bytes())?;
        writeln!(stdout)?;
        stdout.write_all(kickscan::report::measure_summary_text(doc).as_bytes())?;
    }
    if let Some(dir) = out {
        // Tables carry no samples: the report has no capture plots.
        let mut input = kickscan::report::ReportInput::new(doc, settings, &[]);
        input.force = force;
        write_report_and_say(&dir, &input, json, &mut stdout)?;
    }
    report_errors(&doc.errors);
    let crossed = pipeline::limit_crossed(doc, settings);
    if let Some(reason) = &crossed {
        eprintln!("FAIL: {reason}");
    }
    Ok(exit_for(!doc.errors.is_empty(), crossed.is_some()))
}

/// Without the `parquet` feature `--from-table` is a usage error that says how to get it.
#[cfg(not(feature = "parquet"))]
fn measure_tables(
    _inputs: &[std::path::PathBuf],
    _json: bool,
    _out: Option<std::path::PathBuf>,
    _force: bool,
    _settings: &pipeline::Settings,
) -> Result<ExitCode> {
    anyhow::bail!(
        "--from-table: this kickscan was built without the `parquet` feature, which reads \
         event tables; build one with `cargo build --release --features parquet`"
    )
}

/// Writes the report folder and says where it is: on stdout, or on stderr when stdout
/// carries the JSON document.
fn write_report_and_say(
    dir: &std::path::Path,
    input: &kickscan::report::ReportInput,
    json: bool,
    stdout: &mut impl Write,
) -> Result<()> {
    kickscan::report::write_report(dir, input)
        .with_context(|| format!("writing the report to {}", dir.display()))?;
    let line = format!("report written to {}", dir.join("report.html").display());
    if json {
        eprintln!("{line}");
    } else {
        writeln!(stdout, "{line}")?;
    }
    Ok(())
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
