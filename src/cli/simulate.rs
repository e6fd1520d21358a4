//! `kickscan simulate` options.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{bail, Context, Result};
use clap::{Args, ValueEnum};

use kickscan::simulate::{
    simulate, write_capture, Adc, Clamp, OutputFormat, Scenario, Side, TimeUnit, Variation,
};
use kickscan::units::parse_si;

#[derive(ValueEnum, Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum ClampArg {
    /// Nothing: the node capacitance alone takes the coil current.
    #[default]
    None,
    /// Freewheel diode across the coil.
    Diode,
    /// Diode in series with a zener across the coil (--zener-v).
    Zener,
    /// TVS across the switch (--tvs-v).
    Tvs,
    /// RC snubber across the switch (--snubber-r, --snubber-c).
    Rc,
    /// The switch's own avalanche breakdown (--avalanche-v).
    Avalanche,
}

#[derive(ValueEnum, Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum TimeUnitArg {
    #[default]
    S,
    Ms,
    Us,
    Ns,
}

/// Synthesize captures of a coil switched off with a chosen clamp.
#[derive(Args, Debug, Clone)]
#[command(after_help = "Examples:
  kickscan simulate -o bare.csv
  kickscan simulate -o zener.csv --clamp zener --zener-v 33V --with-current
  kickscan simulate -o run.wav --format wav24 --events 50 --noise 50mV --adc-min -20 --adc-max 200
  kickscan simulate -o valve.csv --supply 24V --inductance 150mH --resistance 68 --capacitance 1nF \\
      --clamp avalanche --avalanche-v 60V --turn-off-spread 20 --seed 7
  kickscan simulate -o hs.csv --high-side --clamp tvs --tvs-v 36V --format csv-semicolon

The output format follows the extension (.csv, .tsv/.txt tab-separated, .wav 16-bit, .raw/.bin
32-bit float) unless --format names one. WAV and raw files get a JSON sidecar of the same stem
with each channel's scale. Channels: v_sw [V], and with --with-current i_coil [A],
with --with-switch-current i_switch [A].")]
pub struct SimulateArgs {
    /// Output file.
    #[arg(long, short)]
    pub out: PathBuf,
    /// Output format: csv, csv-semicolon (decimal comma), csv-tab, csv-values (no time
    /// column), wav8, wav16, wav24, wav32, wavf32, raw-i8, raw-i16, raw-i32, raw-f32,
    /// raw-f64.
    #[arg(long, value_name = "NAME")]
    pub format: Option<String>,

    /// Supply voltage.
    #[arg(long, value_name = "V", default_value = "12V")]
    pub supply: String,
    /// Coil inductance.
    #[arg(long, value_name = "H", default_value = "20mH")]
    pub inductance: String,
    /// Coil series (winding) resistance.
    #[arg(long, value_name = "OHM", default_value = "160")]
    pub resistance: String,
    /// Switch node capacitance to ground (switch, coil winding, wiring).
    #[arg(long, value_name = "F", default_value = "330pF")]
    pub capacitance: String,
    /// Loss resistance across the coil (core losses); none by default.
    #[arg(long, value_name = "OHM")]
    pub parallel_resistance: Option<String>,
    /// Put the switch between the supply and the coil (the node flies below ground).
    #[arg(long)]
    pub high_side: bool,

    /// Suppression fitted.
    #[arg(long, value_enum, default_value_t = ClampArg::None)]
    pub clamp: ClampArg,
    /// Zener voltage of the diode plus zener clamp.
    #[arg(long, value_name = "V", default_value = "33V")]
    pub zener_v: String,
    /// Zener dynamic resistance.
    #[arg(long, value_name = "OHM", default_value = "2")]
    pub zener_r: String,
    /// TVS breakdown voltage.
    #[arg(long, value_name = "V", default_value = "40V")]
    pub tvs_v: String,
    /// TVS dynamic resistance.
    #[arg(long, value_name = "OHM", default_value = "0.5")]
    pub tvs_r: String,
    /// Snubber resistance.
    #[arg(long, value_name = "OHM", default_value = "1k")]
    pub snubber_r: String,
    /// Snubber capacitance.
    #[arg(long, value_name = "F", default_value = "4.7nF")]
    pub snubber_c: String,
    /// Switch avalanche (breakdown) voltage.
    #[arg(long, value_name = "V", default_value = "60V")]
    pub avalanche_v: String,
    /// Dynamic resistance in avalanche.
    #[arg(long, value_name = "OHM", default_value = "0.05")]
    pub avalanche_r: String,
    /// Leave out the switch's body diode.
    #[arg(long)]
    pub no_body_diode: bool,

    /// Switch on-resistance.
    #[arg(long, value_name = "OHM", default_value = "0.1")]
    pub r_on: String,
    /// Switch off-state (leakage) resistance.
    #[arg(long, value_name = "OHM", default_value = "100M")]
    pub r_off: String,
    /// Turn-off time of the switch.
    #[arg(long, value_name = "S", default_value = "50ns")]
    pub turn_off: String,
    /// Turn-on time of the switch.
    #[arg(long, value_name = "S", default_value = "50ns")]
    pub turn_on: String,

    /// Number of turn-off events.
    #[arg(long, default_value_t = 4)]
    pub events: usize,
    /// On time before each turn-off.
    #[arg(long, value_name = "S", default_value = "2ms")]
    pub on_time: String,
    /// Off time after each turn-off.
    #[arg(long, value_name = "S", default_value = "3ms")]
    pub off_time: String,
    /// Per-event spread (standard deviation, percent) of the turn-off time.
    #[arg(long, value_name = "PCT", default_value = "0")]
    pub turn_off_spread: String,
    /// Supply ripple amplitude, sampled at a random phase per event.
    #[arg(long, value_name = "V", default_value = "0")]
    pub supply_ripple: String,
    /// Per-event spread (percent) of the on time.
    #[arg(long, value_name = "PCT", default_value = "0")]
    pub on_time_spread: String,
    /// Per-event spread (percent) of the coil resistance, and so of the coil current.
    #[arg(long, value_name = "PCT", default_value = "0")]
    pub current_spread: String,

    /// Gaussian noise on the voltage (standard deviation).
    #[arg(long, value_name = "V", default_value = "0")]
    pub noise: String,
    /// Gaussian noise on the current channels (standard deviation).
    #[arg(long, value_name = "A", default_value = "0")]
    pub current_noise: String,
    /// ADC resolution of the voltage channel (needs --adc-min and --adc-max).
    #[arg(long, value_name = "BITS")]
    pub adc_bits: Option<u32>,
    /// Lower rail of the voltage channel's ADC range.
    #[arg(long, value_name = "V", allow_hyphen_values = true)]
    pub adc_min: Option<String>,
    /// Upper rail of the voltage channel's ADC range.
    #[arg(long, value_name = "V", allow_hyphen_values = true)]
    pub adc_max: Option<String>,

    /// Sample interval.
    #[arg(long, value_name = "S", default_value = "100ns")]
    pub dt: String,
    /// Sample rate (instead of --dt).
    #[arg(long, value_name = "HZ", conflicts_with = "dt")]
    pub sample_rate: Option<String>,
    /// Seed of the random draws (noise and per-event variation).
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// Add the coil current channel i_coil.
    #[arg(long)]
    pub with_current: bool,
    /// Add the switch current channel i_switch.
    #[arg(long)]
    pub with_switch_current: bool,

    /// CSV: write a decimal comma (with a semicolon or tab delimiter).
    #[arg(long)]
    pub decimal_comma: bool,
    /// CSV: leave out the time column (the preamble gives the sample interval).
    #[arg(long)]
    pub no_time_column: bool,
    /// CSV: leave out the metadata lines before the header.
    #[arg(long)]
    pub no_preamble: bool,
    /// CSV: unit of the time column.
    #[arg(long, value_enum, default_value_t = TimeUnitArg::S)]
    pub time_unit: TimeUnitArg,
    /// Print nothing.
    #[arg(long, short)]
    pub quiet: bool,
}

fn si(name: &str, text: &str, unit: &str) -> Result<f64> {
    parse_si(text, Some(unit)).with_context(|| format!("--{name}"))
}

fn pct(name: &str, text: &str) -> Result<f64> {
    let v =
        parse_si(text.trim().trim_end_matches('%'), None).with_context(|| format!("--{name}"))?;
    if v < 0.0 {
        bail!("--{name}: expected a percentage of zero or more");
    }
    Ok(v / 100.0)
}

impl SimulateArgs {
    /// Turns the raw options into a scenario.
    pub fn to_scenario(&self) -> Result<Scenario> {
        let dt_s = match &self.sample_rate {
            Some(r) => 1.0 / si("sample-rate", r, "Hz")?,
            None => si("dt", &self.dt, "s")?,
        };
        let clamp = match self.clamp {
            ClampArg::None => Clamp::None,
            ClampArg::Diode => Clamp::Diode,
            ClampArg::Zener => Clamp::DiodeZener {
                zener_v: si("zener-v", &self.zener_v, "V")?,
                zener_ohm: si("zener-r", &self.zener_r, "ohm")?,
            },
            ClampArg::Tvs => Clamp::Tvs {
                breakdown_v: si("tvs-v", &self.tvs_v, "V")?,
                dynamic_ohm: si("tvs-r", &self.tvs_r, "ohm")?,
            },
            ClampArg::Rc => Clamp::Snubber {
                r_ohm: si("snubber-r", &self.snubber_r, "ohm")?,
                c_f: si("snubber-c", &self.snubber_c, "F")?,
            },
            ClampArg::Avalanche => Clamp::Avalanche {
                breakdown_v: si("avalanche-v", &self.avalanche_v, "V")?,
                dynamic_ohm: si("avalanche-r", &self.avalanche_r, "ohm")?,
            },
        };
        let adc = match (self.adc_bits, &self.adc_min, &self.adc_max) {
            (_, Some(lo), Some(hi)) => Some(Adc {
                bits: self.adc_bits.unwrap_or(12),
                min_v: si("adc-min", lo, "V")?,
                max_v: si("adc-max", hi, "V")?,
            }),
            (None, None, None) => None,
            _ => bail!("--adc-bits, --adc-min, --adc-max: give both rails (bits default to 12)"),
        };
        Ok(Scenario {
            supply_v: si("supply", &self.supply, "V")?,
            inductance_h: si("inductance", &self.inductance, "H")?,
            resistance_ohm: si("resistance", &self.resistance, "ohm")?,
            capacitance_f: si("capacitance", &self.capacitance, "F")?,
            parallel_ohm: self
                .parallel_resistance
                .as_deref()
                .map(|r| si("parallel-resistance", r, "ohm"))
                .transpose()?,
            side: if self.high_side {
                Side::High
            } else {
                Side::Low
            },
            clamp,
            body_diode: !self.no_body_diode,
            r_on_ohm: si("r-on", &self.r_on, "ohm")?,
            r_off_ohm: si("r-off", &self.r_off, "ohm")?,
            turn_off_s: si("turn-off", &self.turn_off, "s")?,
            turn_on_s: si("turn-on", &self.turn_on, "s")?,
            events: self.events,
            on_time_s: si("on-time", &self.on_time, "s")?,
            off_time_s: si("off-time", &self.off_time, "s")?,
            variation: Variation {
                turn_off_spread: pct("turn-off-spread", &self.turn_off_spread)?,
                supply_ripple_v: si("supply-ripple", &self.supply_ripple, "V")?,
                on_time_spread: pct("on-time-spread", &self.on_time_spread)?,
                current_spread: pct("current-spread", &self.current_spread)?,
            },
            noise_v: si("noise", &self.noise, "V")?,
            noise_a: si("current-noise", &self.current_noise, "A")?,
            adc,
            dt_s,
            seed: self.seed,
            with_coil_current: self.with_current,
            with_switch_current: self.with_switch_current,
            ..Scenario::default()
        })
    }

    /// The output format with the CSV adjustments applied.
    pub fn to_format(&self) -> Result<OutputFormat> {
        let mut format = match &self.format {
            Some(name) => OutputFormat::from_name(name).with_context(|| {
                format!(
                    "--format {name}: unknown; expected one of {}",
                    OutputFormat::NAMES.join(", ")
                )
            })?,
            None => OutputFormat::from_path(&self.out).with_context(|| {
                format!(
                    "{}: cannot tell the format from the extension; use .csv, .tsv, .wav, \
                     .raw or --format",
                    self.out.display()
                )
            })?,
        };
        if let OutputFormat::Csv(style) = &mut format {
            if self.decimal_comma {
                style.decimal_comma = true;
                if style.delimiter == b',' {
                    style.delimiter = b';';
                }
            }
            if self.no_time_column {
                style.time_column = false;
            }
            if self.no_preamble {
                if !style.time_column {
                    bail!("--no-preamble with no time column would leave no sample interval");
                }
                style.preamble = false;
            }
            style.time_unit = match self.time_unit {
                TimeUnitArg::S => TimeUnit::S,
                TimeUnitArg::Ms => TimeUnit::Ms,
                TimeUnitArg::Us => TimeUnit::Us,
                TimeUnitArg::Ns => TimeUnit::Ns,
            };
        }
        Ok(format)
    }
}

/// Runs `kickscan simulate`.
pub fn run(args: SimulateArgs) -> Result<ExitCode> {
    let scenario = args.to_scenario()?;
    let format = args.to_format()?;
    let sim = simulate(&scenario)?;
    let files = write_capture(&sim.capture, &args.out, &format)?;
    if !args.quiet {
        let mut out = std::io::stdout().lock();
        let names: Vec<String> = files.iter().map(|f| f.display().to_string()).collect();
        writeln!(
            out,
            "wrote {} ({} samples at {:.6e} s, {} events)",
            names.join(" + "),
            sim.capture.n_samples(),
            scenario.dt_s,
            sim.events.len()
        )?;
        for (k, e) in sim.events.iter().enumerate() {
            writeln!(
                out,
                "  event {k}: t_off {:.6e} s, I0 {:.4} A, switch stress {:.2} V (noise-free)",
                e.t_off_s, e.i0_a, e.switch_stress_v
            )?;
        }
    }
    Ok(ExitCode::SUCCESS)
}
