//! Command-line definition (clap derive) and the step that turns raw options into typed
//! settings before any work starts.

use std::path::PathBuf;

use anyhow::{bail, Context, Result};
use clap::{Args, Parser, Subcommand, ValueEnum};

use kickscan::capture::{RawKind, ReadOptions};
use kickscan::measure::{CurrentThrough, MeasureOptions, PolarityChoice};
use kickscan::pipeline::Settings;
use kickscan::units::parse_si;

pub mod parasitics;
pub mod simulate;

/// Writes `value` as indented JSON and a newline through one buffer: standard output
/// flushes at every line end, which made a large document one write per line (a folder
/// of a thousand captures spent a tenth of its run there).
pub fn print_json<T: serde::Serialize + ?Sized>(
    out: &mut impl std::io::Write,
    value: &T,
) -> anyhow::Result<()> {
    use std::io::Write;
    let mut buf = std::io::BufWriter::with_capacity(1 << 16, out);
    serde_json::to_writer_pretty(&mut buf, value)?;
    writeln!(buf)?;
    buf.flush()?;
    Ok(())
}

#[derive(Parser, Debug)]
#[command(
    name = "kickscan",
    version,
    about = "Measure inductive turn-off spikes in oscilloscope captures",
    long_about = "kickscan reads oscilloscope exports of inductive turn-off events (relay, \
solenoid, contactor and motor coils switched by a transistor), finds every switching edge, \
measures each flyback spike, and reports worst cases and margins over many switchings.\n\n\
Exit codes: 0 all good, 1 some input failed, 2 usage error, 3 a --fail-* limit was crossed.",
    after_help = "Examples:\n  kickscan demo\n  kickscan inspect capture.csv\n  kickscan measure captures/ --supply 24V --rating 60V\n  kickscan measure run7.wav --signal CH1 --current i_coil --json"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

// Clap builds the command once per run; the size of its variants does not matter.
#[allow(clippy::large_enum_variant)]
#[derive(Subcommand, Debug)]
pub enum Command {
    /// Show what the readers understood of each file (format, columns, units, interval).
    #[command(
        after_help = "Examples:\n  kickscan inspect scope.csv\n  kickscan inspect run7.wav --json"
    )]
    Inspect {
        /// Files to read.
        #[arg(required = true)]
        inputs: Vec<PathBuf>,
        /// Print the kickscan.inspect/1 JSON document instead of text.
        #[arg(long)]
        json: bool,
        #[command(flatten)]
        read: ReadArgs,
    },
    /// Find and measure every turn-off event in files or folders.
    #[command(
        after_help = "Examples:\n  kickscan measure bench/valve1/ --supply 24V --rating 60V\n  kickscan measure scope.csv --signal CH1 --current CH2 --json\n  kickscan measure runs/ --fail-above 48V   # exit 3 if any spike exceeds 48 V\n  kickscan measure --from-table benchA/events.parquet benchB/events.parquet --rating 60V"
    )]
    Measure {
        /// Capture files or folders (searched recursively).
        #[arg(required = true)]
        inputs: Vec<PathBuf>,
        /// The inputs are event tables (events.parquet from earlier --out reports, or
        /// folders holding them): summarise their events together, e.g. from many machines.
        /// Only --rating, --block, --lifetime and the --fail-* limits apply; options that act
        /// on samples (or label them) are refused. Needs a kickscan built with the `parquet`
        /// feature.
        #[arg(long)]
        from_table: bool,
        /// Print the kickscan.measure/1 JSON document on stdout.
        #[arg(long)]
        json: bool,
        /// Write the report folder (HTML, CSV, JSON, plots) here.
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Replace an existing --out folder that kickscan did not write.
        #[arg(long, requires = "out")]
        force: bool,
        #[command(flatten)]
        read: ReadArgs,
        #[command(flatten)]
        analysis: AnalysisArgs,
    },
    /// Compare builds side by side: LABEL=INPUT for each variant (files or folders).
    #[command(
        after_help = "Examples:\n  kickscan compare none=bench/none diode=bench/diode zener=bench/zener\n  kickscan compare old=rev1/ new=rev2/ --supply 24V --json\n\nRepeat a label to give a variant several inputs (zener=a.csv zener=b.csv)."
    )]
    Compare {
        /// Variants as LABEL=INPUT (two or more labels).
        #[arg(required = true, value_name = "LABEL=INPUT")]
        variants: Vec<String>,
        /// The variant the others are compared with (default: the first).
        #[arg(long, value_name = "LABEL")]
        baseline: Option<String>,
        /// Print the kickscan.compare/1 JSON document on stdout.
        #[arg(long)]
        json: bool,
        /// Write the report folder here.
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
        /// Replace an existing --out folder that kickscan did not write.
        #[arg(long, requires = "out")]
        force: bool,
        #[command(flatten)]
        read: ReadArgs,
        #[command(flatten)]
        analysis: AnalysisArgs,
    },
    /// Run the whole job on the bundled sample captures and write a report to open.
    #[command(after_help = "Examples:\n  kickscan demo\n  kickscan demo --out /tmp/demo-report")]
    Demo {
        /// Report folder (replaced if kickscan wrote it before).
        #[arg(long, value_name = "DIR", default_value = "kickscan-report")]
        out: PathBuf,
        /// Folder of sample captures (default: sample-captures/ here or beside the sources).
        #[arg(long, value_name = "DIR")]
        captures: Option<PathBuf>,
        /// Replace an existing --out folder that kickscan did not write.
        #[arg(long)]
        force: bool,
    },
    /// Synthesize captures of a coil switched off with a chosen clamp.
    Simulate(simulate::SimulateArgs),
    /// Node capacitance and loop inductance from a bare and a loaded capture; snubber advice.
    Parasitics(parasitics::ParasiticsArgs),
}

/// Groups `LABEL=INPUT` arguments by label, keeping the order labels first appear in.
pub fn parse_variants(items: &[String]) -> Result<Vec<kickscan::compare::Variant>> {
    let mut out: Vec<kickscan::compare::Variant> = Vec::new();
    for item in items {
        let Some((label, input)) = item.split_once('=') else {
            bail!("{item}: expected LABEL=INPUT, e.g. zener=captures/zener/");
        };
        let (label, input) = (label.trim(), input.trim());
        if label.is_empty() || input.is_empty() {
            bail!("{item}: expected LABEL=INPUT with both parts, e.g. zener=captures/zener/");
        }
        match out.iter_mut().find(|v| v.label == label) {
            Some(v) => v.inputs.push(PathBuf::from(input)),
            None => out.push(kickscan::compare::Variant {
                label: label.to_string(),
                inputs: vec![PathBuf::from(input)],
            }),
        }
    }
    if out.len() < 2 {
        bail!("compare needs at least two variants (LABEL=INPUT with two different labels)");
    }
    Ok(out)
}

/// `--baseline` must name one of the variants (falling back to the first would compare
/// against a build the user did not ask for), and `--label` has no place in `compare`,
/// where each variant's LABEL names it.
pub fn check_compare_labels(
    variants: &[kickscan::compare::Variant],
    baseline: Option<&str>,
    analysis: &AnalysisArgs,
) -> Result<()> {
    if let Some(b) = baseline {
        if !variants.iter().any(|v| v.label == b) {
            let labels: Vec<&str> = variants.iter().map(|v| v.label.as_str()).collect();
            bail!(
                "--baseline {b}: no variant has that label (the labels given are {})",
                labels.join(", ")
            );
        }
    }
    if let Some(l) = &analysis.label {
        bail!("--label {l}: compare names each variant by the LABEL of its LABEL=INPUT instead");
    }
    Ok(())
}

/// How to read the files.
#[derive(Args, Debug, Clone, Default)]
pub struct ReadArgs {
    /// Sample interval when the file has no time base (e.g. 2ns, 1e-8).
    #[arg(long, value_name = "S", allow_hyphen_values = true)]
    pub dt: Option<String>,
    /// Sample rate when the file has no time base (e.g. 500M, 1GHz).
    #[arg(
        long,
        value_name = "HZ",
        allow_hyphen_values = true,
        conflicts_with = "dt"
    )]
    pub sample_rate: Option<String>,
    /// Read files as raw little-endian sample dumps of this type.
    #[arg(long, value_enum)]
    pub raw: Option<RawArg>,
    /// Multiply a channel by a factor (probe attenuation, shunt): NAME=FACTOR, repeatable.
    #[arg(long, value_name = "NAME=FACTOR")]
    pub scale: Vec<String>,
    /// Correct a channel's probe and cable delay: NAME=S, repeatable. S > 0 means the
    /// channel lags, so its samples move earlier by S (linear interpolation).
    /// Example: --skew i_coil=12ns.
    #[arg(long, value_name = "NAME=S")]
    pub skew: Vec<String>,
    /// CSV delimiter, when sniffing guesses wrong: comma, semicolon, tab.
    #[arg(long, value_enum)]
    pub delimiter: Option<DelimiterArg>,
    /// CSV decimal mark, when sniffing guesses wrong.
    #[arg(long, value_enum)]
    pub decimal: Option<DecimalArg>,
}

#[derive(ValueEnum, Debug, Clone, Copy)]
pub enum RawArg {
    I8,
    I16,
    I32,
    F32,
    F64,
}

#[derive(ValueEnum, Debug, Clone, Copy)]
pub enum DelimiterArg {
    Comma,
    Semicolon,
    Tab,
}

#[derive(ValueEnum, Debug, Clone, Copy)]
pub enum DecimalArg {
    Point,
    Comma,
}

#[derive(ValueEnum, Debug, Clone, Copy, Default)]
pub enum PolarityArg {
    #[default]
    Auto,
    Up,
    Down,
}

#[derive(ValueEnum, Debug, Clone, Copy, Default)]
pub enum ThroughArg {
    #[default]
    Switch,
    Coil,
}

/// What to measure and against what.
#[derive(Args, Debug, Clone, Default)]
pub struct AnalysisArgs {
    /// Switch-node voltage channel: header name, number (data columns from 1), or A-B.
    #[arg(long, value_name = "NAME|N")]
    pub signal: Option<String>,
    /// Coil or switch current channel (amperes): header name or number.
    #[arg(long, value_name = "NAME|N")]
    pub current: Option<String>,
    /// Where the current probe sits; decides which energies are reported.
    #[arg(long, value_enum, default_value_t = ThroughArg::Switch)]
    pub current_through: ThroughArg,
    /// Spike direction: up for a low-side switch, down for a high-side switch, auto to
    /// judge each capture by its levels [default: auto].
    #[arg(long, value_enum)]
    pub polarity: Option<PolarityArg>,
    /// Supply voltage (e.g. 24V).
    #[arg(long, value_name = "V", allow_hyphen_values = true)]
    pub supply: Option<String>,
    /// Switch voltage rating (e.g. 60V): margins, derating and warnings.
    #[arg(long, value_name = "V", allow_hyphen_values = true)]
    pub rating: Option<String>,
    /// Coil inductance (e.g. 200mH): node capacitance and coil energy.
    #[arg(long, value_name = "H", allow_hyphen_values = true)]
    pub inductance: Option<String>,
    /// Coil current at turn-off when there is no current channel (e.g. 75mA).
    #[arg(long, value_name = "A", allow_hyphen_values = true)]
    pub coil_current: Option<String>,
    /// Switching rate, for snubber dissipation (e.g. 20kHz).
    #[arg(long, value_name = "HZ", allow_hyphen_values = true)]
    pub switching_rate: Option<String>,
    /// Longest event window kept (e.g. 5ms); longer events are marked truncated.
    #[arg(long, value_name = "S", allow_hyphen_values = true)]
    pub max_window: Option<String>,
    /// Settle band in percent of the step (e.g. 2 or 2%) [default: 5].
    #[arg(long, value_name = "PCT")]
    pub settle_band: Option<String>,
    /// On-state dwell before an edge counts (derived from the data by default).
    #[arg(long, value_name = "S", allow_hyphen_values = true)]
    pub min_on_time: Option<String>,
    /// Label for this set of captures in reports (measure; compare takes LABEL=INPUT).
    #[arg(long)]
    pub label: Option<String>,
    /// Exit with code 3 if any event's switch stress exceeds this (e.g. 48V).
    #[arg(long, value_name = "V", allow_hyphen_values = true)]
    pub fail_above: Option<String>,
    /// Exit with code 3 if any event's switch energy exceeds this (e.g. 2mJ).
    #[arg(long, value_name = "J", allow_hyphen_values = true)]
    pub fail_energy: Option<String>,
    /// Events per block for the worst-case projection (default: one capture per block).
    #[arg(long, value_name = "N")]
    pub block: Option<usize>,
    /// Number of switchings to project the worst case to; repeatable (default 1e6).
    #[arg(long, value_name = "N")]
    pub lifetime: Vec<String>,
    /// Skip the model fit (faster). The fit also gives the ring frequency and damping
    /// ratio when the ring's zero crossings alone cannot (a ring after a clamp lets go):
    /// without it those stay empty there.
    #[arg(long)]
    pub no_fit: bool,
    /// Print no progress bar.
    #[arg(long, short)]
    pub quiet: bool,
}

/// `--settle-band` when not given, in percent of the step.
const SETTLE_BAND_DEFAULT_PCT: f64 = 5.0;

pub(crate) fn opt_si(name: &str, v: &Option<String>, unit: &str) -> Result<Option<f64>> {
    v.as_deref()
        .map(|s| parse_si(s, Some(unit)).with_context(|| format!("--{name}")))
        .transpose()
}

/// [`opt_si`] for a quantity that only makes sense above zero (a rating, a limit, an
/// inductance, a time): a negative or zero value is a slip of the keyboard, and taking it
/// would fail every event against `--rating 0V` or pass every run against `--fail-above -1V`.
pub(crate) fn opt_positive(name: &str, v: &Option<String>, unit: &str) -> Result<Option<f64>> {
    let x = opt_si(name, v, unit)?;
    if let (Some(x), Some(text)) = (x, v) {
        if !(x > 0.0 && x.is_finite()) {
            bail!(
                "--{name} {text}: expected a positive value (e.g. --{name} {})",
                example(name)
            );
        }
    }
    Ok(x)
}

/// An example value for an option's error message.
fn example(name: &str) -> &'static str {
    match name {
        "rating" | "fail-above" | "peak-limit" => "60V",
        "inductance" => "200mH",
        "coil-current" => "75mA",
        "switching-rate" | "sample-rate" => "20kHz",
        "max-window" | "min-on-time" => "5ms",
        "fail-energy" => "2mJ",
        "dt" => "2ns",
        _ => "1",
    }
}

fn pairs(name: &str, items: &[String], unit: Option<&str>) -> Result<Vec<(String, f64)>> {
    items
        .iter()
        .map(|item| {
            let Some((k, v)) = item.rsplit_once('=') else {
                bail!("--{name} {item}: expected NAME=VALUE");
            };
            let value = parse_si(v, unit).with_context(|| format!("--{name} {item}"))?;
            Ok((k.trim().to_string(), value))
        })
        .collect()
}

impl ReadArgs {
    pub fn to_options(&self) -> Result<ReadOptions> {
        // Each checked before the rate is inverted: 1 / 0 would pass as an interval.
        let dt_s = match (&self.dt, &self.sample_rate) {
            (Some(_), _) => opt_positive("dt", &self.dt, "s")?,
            (None, Some(_)) => {
                opt_positive("sample-rate", &self.sample_rate, "Hz")?.map(|f| 1.0 / f)
            }
            _ => None,
        };
        if let Some(dt) = dt_s {
            if !(dt > 0.0 && dt.is_finite()) {
                bail!("--dt/--sample-rate: the sample interval must be positive and finite");
            }
        }
        Ok(ReadOptions {
            dt_s,
            raw: self.raw.map(|r| match r {
                RawArg::I8 => RawKind::I8,
                RawArg::I16 => RawKind::I16,
                RawArg::I32 => RawKind::I32,
                RawArg::F32 => RawKind::F32,
                RawArg::F64 => RawKind::F64,
            }),
            scale: pairs("scale", &self.scale, None)?,
            skew: pairs("skew", &self.skew, Some("s"))?,
            delimiter: self.delimiter.map(|d| match d {
                DelimiterArg::Comma => b',',
                DelimiterArg::Semicolon => b';',
                DelimiterArg::Tab => b'\t',
            }),
            decimal_comma: self.decimal.map(|d| matches!(d, DecimalArg::Comma)),
        })
    }
}

impl AnalysisArgs {
    /// The options given that act on samples (reading them, finding and measuring events,
    /// the fit, the clamp advice) or label captures: event tables were measured when they
    /// were written, so `--from-table` refuses these rather than leave them unused.
    pub fn measuring_options_given(&self, read: &ReadArgs) -> Vec<&'static str> {
        let r = read;
        let a = self;
        [
            ("--dt", r.dt.is_some()),
            ("--sample-rate", r.sample_rate.is_some()),
            ("--raw", r.raw.is_some()),
            ("--scale", !r.scale.is_empty()),
            ("--skew", !r.skew.is_empty()),
            ("--delimiter", r.delimiter.is_some()),
            ("--decimal", r.decimal.is_some()),
            ("--signal", a.signal.is_some()),
            ("--current", a.current.is_some()),
            (
                "--current-through",
                !matches!(a.current_through, ThroughArg::Switch),
            ),
            ("--polarity", a.polarity.is_some()),
            ("--supply", a.supply.is_some()),
            ("--inductance", a.inductance.is_some()),
            ("--coil-current", a.coil_current.is_some()),
            ("--switching-rate", a.switching_rate.is_some()),
            ("--max-window", a.max_window.is_some()),
            ("--settle-band", a.settle_band.is_some()),
            ("--min-on-time", a.min_on_time.is_some()),
            ("--label", a.label.is_some()),
            ("--no-fit", a.no_fit),
        ]
        .into_iter()
        .filter_map(|(name, given)| given.then_some(name))
        .collect()
    }

    pub fn to_settings(&self, read: ReadOptions) -> Result<Settings> {
        let settle_band_pct = match &self.settle_band {
            None => SETTLE_BAND_DEFAULT_PCT,
            Some(band) => parse_si(band, Some("%"))
                .or_else(|_| parse_si(band.trim_end_matches('%'), None))
                .context("--settle-band")?,
        };
        if !(settle_band_pct > 0.0 && settle_band_pct < 100.0) {
            bail!("--settle-band: expected a percentage between 0 and 100");
        }
        let measure = MeasureOptions {
            polarity: match self.polarity.unwrap_or(PolarityArg::Auto) {
                PolarityArg::Auto => PolarityChoice::Auto,
                PolarityArg::Up => PolarityChoice::Up,
                PolarityArg::Down => PolarityChoice::Down,
            },
            supply_v: opt_si("supply", &self.supply, "V")?,
            rating_v: opt_positive("rating", &self.rating, "V")?,
            inductance_h: opt_positive("inductance", &self.inductance, "H")?,
            coil_current_a: opt_positive("coil-current", &self.coil_current, "A")?,
            current_through: match self.current_through {
                ThroughArg::Switch => CurrentThrough::Switch,
                ThroughArg::Coil => CurrentThrough::Coil,
            },
            max_window_s: opt_positive("max-window", &self.max_window, "s")?,
            settle_band_pct,
            min_on_time_s: opt_positive("min-on-time", &self.min_on_time, "s")?,
        };
        Ok(Settings {
            read,
            measure,
            signal: self.signal.clone(),
            current: self.current.clone(),
            label: self.label.clone(),
            switching_rate_hz: opt_positive("switching-rate", &self.switching_rate, "Hz")?,
            fail_above_v: opt_positive("fail-above", &self.fail_above, "V")?,
            fail_energy_j: opt_positive("fail-energy", &self.fail_energy, "J")?,
            no_fit: self.no_fit,
            block: match self.block {
                Some(0) => bail!("--block: expected at least 1 event per block"),
                b => b,
            },
            lifetimes: self
                .lifetime
                .iter()
                .map(|l| {
                    let n = parse_si(l, None).with_context(|| format!("--lifetime {l}"))?;
                    if n < 1.0 {
                        bail!("--lifetime {l}: expected a number of switchings of at least 1");
                    }
                    Ok(n)
                })
                .collect::<Result<_>>()?,
            stop: None,
            stream_above: None,
        })
    }
}
