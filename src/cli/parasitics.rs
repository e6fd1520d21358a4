//! `kickscan parasitics`: the added-capacitance method on a bare and a loaded capture, with
//! every other estimate the options allow and the suppression advice.

use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{bail, Context, Result};
use clap::Args;

use kickscan::model::{self, ParasiticsDoc, ParasiticsInputs};
use kickscan::units::parse_si;

use super::{opt_positive, opt_si, ReadArgs};

/// Extract the node capacitance and loop inductance behind the ringing, and size a snubber.
#[derive(Args, Debug, Clone)]
#[command(
    after_help = "Examples:\n  kickscan parasitics --bare run1.csv --loaded run1_220p.csv --added 220p\n  kickscan parasitics --bare a.wav --loaded b.wav --added 1n --inductance 10mH \\\n      --supply 24V --switching-rate 100Hz --json"
)]
pub struct ParasiticsArgs {
    /// Capture of one turn-off event without the added capacitor.
    #[arg(long, value_name = "FILE")]
    pub bare: PathBuf,
    /// Capture of the same event with the known capacitor across the node.
    #[arg(long, value_name = "FILE")]
    pub loaded: PathBuf,
    /// Value of the added capacitor (e.g. 220p, 1nF).
    #[arg(long, value_name = "CAP")]
    pub added: String,
    /// Coil inductance (e.g. 10mH): capacitance from the ring, and clamp predictions.
    #[arg(long, value_name = "H", allow_hyphen_values = true)]
    pub inductance: Option<String>,
    /// Supply voltage (e.g. 24V): snubber dissipation and clamp predictions.
    #[arg(long, value_name = "V", allow_hyphen_values = true)]
    pub supply: Option<String>,
    /// Switching rate (e.g. 20kHz): snubber dissipation.
    #[arg(long, value_name = "HZ", allow_hyphen_values = true)]
    pub switching_rate: Option<String>,
    /// Coil current at turn-off (e.g. 75mA): energy absorber and clamp predictions.
    #[arg(long, value_name = "A", allow_hyphen_values = true)]
    pub coil_current: Option<String>,
    /// Highest voltage the switch may see (e.g. 60V): sizes the RC absorber and clamps.
    #[arg(long, value_name = "V", allow_hyphen_values = true)]
    pub peak_limit: Option<String>,
    /// Switch-node voltage channel: header name or number (data columns from 1).
    #[arg(long, value_name = "NAME|N")]
    pub signal: Option<String>,
    /// Print the kickscan.parasitics/1 JSON document instead of text.
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub read: ReadArgs,
}

/// Typed inputs from the options, checked before any file is read.
fn inputs_from(args: &ParasiticsArgs) -> Result<ParasiticsInputs> {
    let c_add_f = parse_si(&args.added, Some("F")).context("--added")?;
    if !kickscan::model::is_pos(c_add_f) {
        bail!("--added: the added capacitance must be positive");
    }
    Ok(ParasiticsInputs {
        c_add_f,
        inductance_h: opt_positive("inductance", &args.inductance, "H")?,
        supply_v: opt_si("supply", &args.supply, "V")?,
        switching_rate_hz: opt_positive("switching-rate", &args.switching_rate, "Hz")?,
        coil_current_a: opt_positive("coil-current", &args.coil_current, "A")?,
        peak_limit_v: opt_positive("peak-limit", &args.peak_limit, "V")?,
        c_slope_f: None,
    })
}

/// Runs `kickscan parasitics`.
pub fn run(args: ParasiticsArgs) -> Result<ExitCode> {
    let inputs = inputs_from(&args)?;
    let read = args.read.to_options()?;
    // A file that cannot be read or measured is an input failure (exit 1), as in
    // `measure`; only the options above are usage errors.
    let doc = match kickscan::pipeline::parasitics_of_files(
        &args.bare,
        &args.loaded,
        &read,
        args.signal.as_deref(),
        &inputs,
    ) {
        Ok(doc) => doc,
        Err(e) => {
            eprintln!("error: {e}");
            return Ok(ExitCode::from(crate::commands::EXIT_INPUT_FAILED));
        }
    };
    let mut out = std::io::stdout().lock();
    use std::io::Write;
    if args.json {
        super::print_json(&mut out, &doc)?;
    } else {
        out.write_all(text(&doc).as_bytes())?;
    }
    Ok(ExitCode::SUCCESS)
}

/// Engineering notation with an SI prefix and four significant figures: `100.0 pF`.
fn eng(x: f64, unit: &str) -> String {
    kickscan::units::eng_sig(x, unit, 4)
}

fn pm(std: Option<f64>, unit: &str) -> String {
    std.map(|s| format!(" +- {}", eng(s, unit)))
        .unwrap_or_default()
}

/// The readable account of the document.
pub fn text(doc: &ParasiticsDoc) -> String {
    let u = &doc.uncertainty;
    let mut s = String::new();
    s.push_str("Added-capacitance method\n");
    s.push_str(&format!(
        "  bare ring      f0 {}{}  (damped {}, zeta {:.4}, fit rms {})\n",
        eng(doc.f_bare_hz, "Hz"),
        pm(u.f_bare_std_hz, "Hz"),
        eng(doc.bare.f_d_hz, "Hz"),
        doc.bare.damping_ratio,
        eng(doc.bare.fit_rms_v, "V")
    ));
    s.push_str(&format!(
        "  loaded ring    f0 {}{}  (damped {}, zeta {:.4}, fit rms {})\n",
        eng(doc.f_loaded_hz, "Hz"),
        pm(u.f_loaded_std_hz, "Hz"),
        eng(doc.loaded.f_d_hz, "Hz"),
        doc.loaded.damping_ratio,
        eng(doc.loaded.fit_rms_v, "V")
    ));
    s.push_str(&format!("  added          {}\n", eng(doc.c_add_f, "F")));
    s.push_str(&format!(
        "  node capacitance   {}{}\n",
        eng(doc.c_par_f, "F"),
        pm(u.c_par_std_f, "F")
    ));
    s.push_str(&format!(
        "  loop inductance    {}{}\n",
        eng(doc.l_h, "H"),
        pm(u.l_std_h, "H")
    ));
    s.push_str(&format!(
        "  impedance Z0       {}{}\n",
        eng(doc.z0_ohm, "ohm"),
        pm(u.z0_std_ohm, "ohm")
    ));
    if let Some(k) = &doc.known_inductance {
        s.push_str(&format!(
            "With the coil inductance {}\n  node capacitance   {}{}\n  loss as series R   {}  or as parallel R {}\n",
            eng(k.l_h, "H"),
            eng(k.c_par_f, "F"),
            pm(k.c_par_std_f, "F"),
            eng(k.r_series_ohm, "ohm"),
            eng(k.r_parallel_ohm, "ohm")
        ));
    }
    if doc.agreement.is_empty() {
        s.push_str("Only one capacitance estimate: give --inductance for a second one.\n");
    } else {
        s.push_str("Agreement\n");
        for a in &doc.agreement {
            s.push_str(&format!(
                "  {} / {}: ratio {:.4} (difference {:+.2} % of their mean)\n",
                a.a, a.b, a.ratio, a.difference_pct
            ));
        }
    }
    if let Some(d) = &doc.snubber {
        s.push_str(&format!(
            "Damping the ring (RC across the node)\n  R {}  C {} (at least {})",
            eng(d.r_ohm, "ohm"),
            eng(d.c_f, "F"),
            eng(d.c_min_f, "F")
        ));
        match d.power_w {
            Some(p) => s.push_str(&format!("  resistor dissipation {}\n", eng(p, "W"))),
            None => s.push('\n'),
        }
    }
    if let Some(a) = &doc.energy_absorber {
        s.push_str(&format!(
            "Absorbing the coil energy below {} (RC across the switch)\n  C at least {}  R at most {}  coil energy {}",
            eng(a.peak_limit_v, "V"),
            eng(a.c_min_f, "F"),
            eng(a.r_max_ohm, "ohm"),
            eng(a.coil_energy_j, "J")
        ));
        match a.power_min_w {
            Some(p) => s.push_str(&format!("  dissipation at least {}\n", eng(p, "W"))),
            None => s.push('\n'),
        }
    }
    if !doc.clamps.is_empty() {
        s.push_str("Clamp choices (switch peak, current decay time)\n");
        for c in &doc.clamps {
            let name = match c.clamp {
                model::advice::Clamp::Diode { .. } => "diode across the coil",
                model::advice::Clamp::DiodeZener { .. } => "diode + zener across the coil",
                model::advice::Clamp::AcrossSwitch { .. } => "clamp across the switch",
            };
            s.push_str(&format!(
                "  {name}: {}, {}: {}\n",
                eng(c.switch_peak_v, "V"),
                eng(c.decay_time_s, "s"),
                c.comment
            ));
        }
    }
    for n in &doc.notes {
        s.push_str(&format!("note: {n}\n"));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Wrap {
        #[command(flatten)]
        args: ParasiticsArgs,
    }

    #[test]
    fn options_become_typed_inputs() {
        let w = Wrap::try_parse_from([
            "x",
            "--bare",
            "a.csv",
            "--loaded",
            "b.csv",
            "--added",
            "220p",
            "--inductance",
            "10mH",
            "--supply",
            "24V",
            "--switching-rate",
            "20kHz",
        ])
        .unwrap();
        let i = inputs_from(&w.args).unwrap();
        assert!((i.c_add_f - 220e-12).abs() < 1e-24);
        assert_eq!(i.inductance_h, Some(0.01));
        assert_eq!(i.switching_rate_hz, Some(20e3));
        let bad =
            Wrap::try_parse_from(["x", "--bare", "a", "--loaded", "b", "--added", "0p"]).unwrap();
        assert!(inputs_from(&bad.args).is_err());
    }

    #[test]
    fn text_lists_every_estimate_and_the_advice() {
        // An analytic ring (L = 1 uH, zeta 0.05, I0 = 1 A) with and without 220 pF added.
        fn ring(c_f: f64) -> Vec<f64> {
            let w0 = 1.0 / (1e-6 * c_f).sqrt();
            let wd = w0 * (1.0f64 - 0.0025).sqrt();
            (0..20000)
                .map(|i| {
                    let t = (i as f64 - 100.0) * 1e-9;
                    if t < 0.0 {
                        0.1
                    } else {
                        kickscan::model::ringfit::damped_sine(
                            [0.0, 1.0 / (c_f * wd), 0.05 * w0, wd, 24.0],
                            t,
                        )
                    }
                })
                .collect()
        }
        let ctx = model::ModelContext::default();
        let bare = model::measure_ring(&ring(100e-12), 1e-9, &ctx).unwrap();
        let loaded = model::measure_ring(&ring(320e-12), 1e-9, &ctx).unwrap();
        let inputs = ParasiticsInputs {
            c_add_f: 220e-12,
            inductance_h: Some(1e-6),
            supply_v: Some(24.0),
            switching_rate_hz: Some(20e3),
            coil_current_a: Some(1.0),
            peak_limit_v: Some(60.0),
            c_slope_f: None,
        };
        let doc = model::parasitics_doc(&bare, &loaded, &inputs).unwrap();
        let t = text(&doc);
        for needle in [
            "node capacitance",
            "loop inductance",
            "Agreement",
            "Damping the ring",
            "Absorbing the coil energy",
            "diode across the coil",
            "releases late",
        ] {
            assert!(t.contains(needle), "missing '{needle}' in:\n{t}");
        }
    }

    #[test]
    fn engineering_notation() {
        assert_eq!(eng(100e-12, "F"), "100.0 pF");
        assert_eq!(eng(31.83, "ohm"), "31.83 ohm");
        assert_eq!(eng(1.152e-3, "W"), "1.152 mW");
    }
}
