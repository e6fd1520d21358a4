//! Suppression advice in words a designer uses: the clamp choices with their predicted
//! peak and release time, the RC that absorbs the coil's energy, and the RC that damps a
//! fast ring.

use crate::model::advice::{Advice, Clamp};

use super::format::eng;

/// One line per piece of advice.
pub fn advice_lines(a: &Advice) -> Vec<String> {
    let mut out = Vec::new();
    for c in &a.clamps {
        let what = match c.clamp {
            Clamp::Diode { vf_v } => format!("diode across the coil ({} drop)", eng(vf_v, "V")),
            Clamp::DiodeZener { vz_v, vf_v } => format!(
                "diode + {} zener across the coil ({} held)",
                eng(vz_v, "V"),
                eng(vz_v + vf_v, "V")
            ),
            Clamp::AcrossSwitch { v_clamp_v } => {
                format!("clamp across the switch at {}", eng(v_clamp_v, "V"))
            }
        };
        let mut line = format!(
            "advice: {what}: switch peak {}, coil current gone after {}",
            eng(c.switch_peak_v, "V"),
            eng(c.decay_time_s, "s")
        );
        if !c.comment.is_empty() {
            line.push_str(&format!(" ({})", c.comment));
        }
        out.push(line);
    }
    if let Some(e) = &a.energy_absorber {
        let mut line = format!(
            "advice: RC across the switch to hold it under {}: C at least {}, R at most {} (coil energy {})",
            eng(e.peak_limit_v, "V"),
            eng(e.c_min_f, "F"),
            eng(e.r_max_ohm, "Ω"),
            eng(e.coil_energy_j, "J")
        );
        if let Some(p) = e.power_min_w {
            line.push_str(&format!(", dissipating at least {}", eng(p, "W")));
        }
        out.push(line);
    }
    if let Some(d) = &a.ring_damper {
        let mut line = format!(
            "advice: to damp the ring, {} in series with {} (at least {}) across the node",
            eng(d.r_ohm, "Ω"),
            eng(d.c_f, "F"),
            eng(d.c_min_f, "F")
        );
        if let Some(p) = d.power_w {
            line.push_str(&format!(", dissipating {}", eng(p, "W")));
        }
        out.push(line);
    }
    out.extend(a.notes.iter().map(|n| format!("advice: {n}")));
    out
}
