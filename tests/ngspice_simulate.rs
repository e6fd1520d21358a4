//! The simulator against ngspice on the same circuits: unclamped, freewheel diode, diode
//! plus zener, RC snubber. Peak within 2 %, ring frequency within 0.5 %, settle time within
//! 5 % of ngspice's, each computed here by the same simple code on both waveforms.
//! Skips with a notice when the `ngspice` binary is absent.

use std::path::Path;
use std::process::Command;

use kickscan::simulate::{simulate, Clamp, Junction, Scenario};

const T_OFF_S: f64 = 10e-6;

fn scenario(clamp: Clamp, parallel_ohm: Option<f64>) -> Scenario {
    Scenario {
        parallel_ohm,
        clamp,
        events: 1,
        on_time_s: T_OFF_S,
        off_time_s: 1.19e-3,
        dt_s: 50e-9,
        ..Scenario::default()
    }
}

fn model_card(name: &str, j: &Junction) -> String {
    format!(
        ".model {name} D(IS={:e} N={:e} RS={:e})\n",
        j.saturation_a, j.emission, j.series_ohm
    )
}

/// The same circuit as an ngspice netlist. The switch is a behavioural current source
/// whose conductance follows the simulator's schedule (log-resistance along a smoothstep).
fn netlist(sc: &Scenario, out: &Path) -> String {
    let x = format!("min(max((time-{:e})/{:e},0),1)", T_OFF_S, sc.turn_off_s);
    let s = format!("({x})*({x})*(3-2*({x}))");
    let (ln_on, ln_off) = (sc.r_on_ohm.ln(), sc.r_off_ohm.ln());
    let mut n = String::from("* kickscan simulator cross-check\n");
    n += &format!("V1 vdd 0 DC {:e}\n", sc.supply_v);
    n += &format!("L1 vdd n1 {:e}\n", sc.inductance_h);
    n += &format!("R1 n1 sw {:e}\n", sc.resistance_ohm);
    n += &format!("C1 sw 0 {:e}\n", sc.capacitance_f);
    if let Some(rp) = sc.parallel_ohm {
        n += &format!("Rp vdd sw {rp:e}\n");
    }
    n += &format!("B1 sw 0 I=V(sw)*exp(-({ln_on:e}+{s}*({ln_off:e}-({ln_on:e}))))\n");
    n += "Dbody 0 sw dcl\n";
    n += &model_card("dcl", &sc.diode);
    match sc.clamp {
        Clamp::None => {}
        Clamp::Diode => n += "Dfw sw vdd dcl\n",
        Clamp::DiodeZener { zener_v, zener_ohm } => {
            // Zener in breakdown: a knee junction behind a source of the zener voltage,
            // as the simulator's breakdown element.
            n += "Dz1 sw a dcl\n";
            n += &format!("Vz a b DC {zener_v:e}\n");
            n += "Dz2 b vdd dzk\n";
            n += &model_card("dzk", &Junction::breakdown(zener_v, zener_ohm));
        }
        Clamp::Snubber { r_ohm, c_f } => {
            n += &format!("Rs sw c1 {r_ohm:e}\nCs c1 0 {c_f:e}\n");
        }
        _ => unreachable!("not cross-checked"),
    }
    let t_stop = T_OFF_S + sc.off_time_s;
    n += ".options method=gear reltol=1e-5\n.control\n";
    n += &format!("tran {:e} {:e} 0 {:e}\n", sc.dt_s, t_stop, sc.dt_s / 5.0);
    n += "linearize v(sw)\nset wr_singlescale\n";
    n += &format!("wrdata {} v(sw)\nquit\n.endc\n.end\n", out.display());
    n
}

/// Runs ngspice; `None` when it is not installed.
fn ngspice(sc: &Scenario) -> Option<Vec<f64>> {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out.txt");
    let cir = dir.path().join("case.cir");
    std::fs::write(&cir, netlist(sc, &out)).unwrap();
    let run = match Command::new("ngspice").arg("-b").arg(&cir).output() {
        Ok(r) => r,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            eprintln!("NOTICE: ngspice not found; skipping the ngspice cross-check");
            return None;
        }
        Err(e) => panic!("ngspice: {e}"),
    };
    let text = std::fs::read_to_string(&out).unwrap_or_else(|_| {
        panic!(
            "ngspice wrote no data:\n{}\n{}",
            String::from_utf8_lossy(&run.stdout),
            String::from_utf8_lossy(&run.stderr)
        )
    });
    Some(
        text.lines()
            .filter_map(|l| l.split_whitespace().nth(1)?.parse().ok())
            .collect(),
    )
}

struct Figures {
    peak_v: f64,
    ring_hz: Option<f64>,
    settle_s: f64,
}

/// Peak (max sample), ring frequency (mean period of upward crossings of the supply after
/// the peak, linearly interpolated), settle time (last sample outside `band` around the
/// supply, from the edge).
fn figures(v: &[f64], dt: f64, supply: f64, band: f64) -> Figures {
    let edge = (T_OFF_S / dt).round() as usize;
    let (k_peak, peak_v) =
        v.iter().enumerate().skip(edge).fold(
            (edge, f64::MIN),
            |m, (k, &x)| if x > m.1 { (k, x) } else { m },
        );
    let mut times = Vec::new();
    for k in k_peak..v.len().saturating_sub(1) {
        let (a, b) = (v[k] - supply, v[k + 1] - supply);
        // Crossings of a ring, not of noise-level wiggles: the swing must exceed 1 mV.
        if a < 0.0 && b >= 0.0 && b - a > 1e-3 {
            times.push((k as f64 + -a / (b - a)) * dt);
        }
    }
    let ring_hz = (times.len() >= 4).then(|| {
        let n = times.len().min(8);
        (n - 1) as f64 / (times[n - 1] - times[0])
    });
    let last_out = (edge..v.len())
        .rev()
        .find(|&k| (v[k] - supply).abs() > band)
        .unwrap_or(edge);
    Figures {
        peak_v,
        ring_hz,
        settle_s: (last_out - edge) as f64 * dt,
    }
}

fn cross_check(name: &str, clamp: Clamp, band: f64, parallel_ohm: Option<f64>) {
    let sc = scenario(clamp, parallel_ohm);
    let Some(spice) = ngspice(&sc) else {
        return;
    };
    let ours = simulate(&sc).unwrap().capture.channels[0].samples.clone();
    let a = figures(&ours, sc.dt_s, sc.supply_v, band);
    let b = figures(&spice, sc.dt_s, sc.supply_v, band);
    eprintln!(
        "{name}: peak {:.4} vs ngspice {:.4} V ({:+.2e}); ring {:?} vs {:?} Hz; settle {:.4e} vs {:.4e} s",
        a.peak_v,
        b.peak_v,
        a.peak_v / b.peak_v - 1.0,
        a.ring_hz,
        b.ring_hz,
        a.settle_s,
        b.settle_s
    );
    assert!((a.peak_v / b.peak_v - 1.0).abs() < 0.02, "{name}: peak");
    let (Some(fa), Some(fb)) = (a.ring_hz, b.ring_hz) else {
        panic!("{name}: no ring found ({:?}, {:?})", a.ring_hz, b.ring_hz);
    };
    assert!((fa / fb - 1.0).abs() < 0.005, "{name}: ring frequency");
    assert!(
        (a.settle_s / b.settle_s - 1.0).abs() < 0.05,
        "{name}: settle time"
    );
}

#[test]
fn unclamped_agrees_with_ngspice() {
    cross_check("unclamped", Clamp::None, 1.0, Some(47e3));
}

#[test]
fn diode_clamp_agrees_with_ngspice() {
    // Without core loss, so the small ring after the diode releases lasts long enough to
    // time.
    cross_check("diode", Clamp::Diode, 0.2, None);
}

#[test]
fn zener_clamp_agrees_with_ngspice() {
    cross_check(
        "diode+zener",
        Clamp::DiodeZener {
            zener_v: 33.0,
            zener_ohm: 2.0,
        },
        1.0,
        Some(47e3),
    );
}

#[test]
fn rc_snubber_agrees_with_ngspice() {
    // A light snubber that still lets the coil ring (a well damped one leaves no ring
    // frequency to compare).
    cross_check(
        "rc snubber",
        Clamp::Snubber {
            r_ohm: 100.0,
            c_f: 2.2e-9,
        },
        0.5,
        Some(47e3),
    );
}
