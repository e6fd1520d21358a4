//! The `kickscan parasitics` result: the added-capacitance method on a bare and a loaded
//! capture, every other estimate the inputs allow beside it, and the suppression advice.
//! Built from two [`RingMeasurement`]s so it is tested without files.

use serde::Serialize;

use super::advice::{self, AdviceInputs, ClampPrediction, EnergyAbsorber, RingDamper};
use super::parasitics::{self, AddedCapUncertainty, Agreement, KnownInductanceEstimate};
use super::{ModelError, RingMeasurement};

pub const PARASITICS_SCHEMA: &str = "kickscan.parasitics/1";

/// What the user gave besides the two captures.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct ParasiticsInputs {
    pub c_add_f: f64,
    pub inductance_h: Option<f64>,
    pub supply_v: Option<f64>,
    pub switching_rate_hz: Option<f64>,
    pub coil_current_a: Option<f64>,
    /// Highest voltage the switch may see, for sizing the energy absorber and clamps.
    pub peak_limit_v: Option<f64>,
    /// C from I0 / (dv/dt), when a measurement made one.
    pub c_slope_f: Option<f64>,
}

/// The ring of one capture, as reported.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RingSummary {
    pub v_off: f64,
    pub peak_v: f64,
    pub f_d_hz: f64,
    pub f_0_hz: f64,
    pub f_0_std_hz: Option<f64>,
    pub alpha_per_s: f64,
    pub damping_ratio: f64,
    pub q_factor: Option<f64>,
    pub fit_rms_v: f64,
}

impl From<&RingMeasurement> for RingSummary {
    fn from(r: &RingMeasurement) -> Self {
        RingSummary {
            v_off: r.fit.v_off,
            peak_v: r.peak_v,
            f_d_hz: r.fit.f_d_hz,
            f_0_hz: r.fit.f_0_hz,
            f_0_std_hz: r.fit.std_err.f_0_hz,
            alpha_per_s: r.fit.alpha_per_s,
            damping_ratio: r.fit.damping_ratio,
            q_factor: r.fit.q_factor,
            fit_rms_v: r.fit.rms_v,
        }
    }
}

/// One capacitance estimate in the side-by-side table.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CapEstimate {
    pub method: &'static str,
    pub c_par_f: f64,
    pub c_par_std_f: Option<f64>,
}

/// `kickscan parasitics --json`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ParasiticsDoc {
    pub schema: &'static str,
    /// Undamped ring frequencies of the bare and loaded captures.
    pub f_bare_hz: f64,
    pub f_loaded_hz: f64,
    pub c_add_f: f64,
    pub c_par_f: f64,
    pub l_h: f64,
    pub z0_ohm: f64,
    pub uncertainty: AddedCapUncertainty,
    pub snubber: Option<RingDamper>,
    pub bare: RingSummary,
    pub loaded: RingSummary,
    pub known_inductance: Option<KnownInductanceEstimate>,
    pub estimates: Vec<CapEstimate>,
    pub agreement: Vec<Agreement>,
    pub energy_absorber: Option<EnergyAbsorber>,
    pub clamps: Vec<ClampPrediction>,
    pub notes: Vec<String>,
}

/// Builds the document from the two measured rings.
pub fn parasitics_doc(
    bare: &RingMeasurement,
    loaded: &RingMeasurement,
    inputs: &ParasiticsInputs,
) -> Result<ParasiticsDoc, ModelError> {
    let added = parasitics::added_capacitance(
        bare.fit.f_0_hz,
        bare.fit.std_err.f_0_hz,
        loaded.fit.f_0_hz,
        loaded.fit.std_err.f_0_hz,
        inputs.c_add_f,
    )?;
    let mut notes = vec![
        "frequencies are the undamped f0 = sqrt(fd^2 + (alpha / 2 pi)^2) of the damped-sine fits"
            .to_string(),
        "uncertainties are first-order, from the fits' standard errors".to_string(),
    ];
    let mut estimates = vec![CapEstimate {
        method: "added_capacitance",
        c_par_f: added.c_par_f,
        c_par_std_f: added.uncertainty.c_par_std_f,
    }];
    let known_inductance = match inputs.inductance_h.filter(|l| *l > 0.0) {
        Some(l) => {
            let k = parasitics::from_known_inductance(
                bare.fit.omega_0_rad_s,
                bare.fit.std_err.omega_0_rad_s,
                bare.fit.alpha_per_s,
                l,
            )?;
            estimates.push(CapEstimate {
                method: "known_inductance",
                c_par_f: k.c_par_f,
                c_par_std_f: k.c_par_std_f,
            });
            let dl = (added.l_h / l - 1.0) * 100.0;
            notes.push(format!(
                "the added-capacitance loop inductance differs from --inductance by {dl:+.1} %; a large difference means the ring is not the coil's (a stray inductance rings with the node)"
            ));
            Some(k)
        }
        None => None,
    };
    if let Some(c) = inputs.c_slope_f.filter(|c| *c > 0.0) {
        estimates.push(CapEstimate {
            method: "current_slope",
            c_par_f: c,
            c_par_std_f: None,
        });
    }
    let named: Vec<(&str, f64)> = estimates.iter().map(|e| (e.method, e.c_par_f)).collect();
    let agreement = parasitics::agreement(&named);
    let advice = advice::advise(&AdviceInputs {
        ring_l_h: Some(added.l_h),
        c_par_f: Some(added.c_par_f),
        coil_l_h: inputs.inductance_h.filter(|l| *l > 0.0),
        coil_current_a: inputs.coil_current_a,
        supply_v: inputs.supply_v,
        switching_rate_hz: inputs.switching_rate_hz,
        peak_limit_v: inputs.peak_limit_v,
    });
    notes.extend(advice.notes.iter().cloned());
    let (snubber, energy_absorber, clamps) =
        (advice.ring_damper, advice.energy_absorber, advice.clamps);
    Ok(ParasiticsDoc {
        schema: PARASITICS_SCHEMA,
        f_bare_hz: added.f_bare_hz,
        f_loaded_hz: added.f_loaded_hz,
        c_add_f: added.c_add_f,
        c_par_f: added.c_par_f,
        l_h: added.l_h,
        z0_ohm: added.z0_ohm,
        uncertainty: added.uncertainty,
        snubber,
        bare: bare.into(),
        loaded: loaded.into(),
        known_inductance,
        estimates,
        agreement,
        energy_absorber,
        clamps,
        notes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::ringfit::damped_sine;
    use crate::model::{measure_ring, ModelContext};

    /// A single turn-off ring of a node with L and C (analytic natural response, zeta 0.05),
    /// sampled at 1 ns, with a short on-state lead-in.
    fn capture(l_h: f64, c_f: f64) -> Vec<f64> {
        let w0 = 1.0 / (l_h * c_f).sqrt();
        let zeta = 0.05;
        let alpha = zeta * w0;
        let wd = w0 * (1.0 - zeta * zeta).sqrt();
        // I0 = 0.1 A into the node: v - Vs = I0 / (C wd) e^-at sin(wd t) (the natural
        // response with v(0) = Vs and C dv/dt(0) = I0).
        let b = 0.1 / (c_f * wd);
        (0..20000)
            .map(|i| {
                let t = (i as f64 - 100.0) * 1e-9;
                if t < 0.0 {
                    0.1
                } else {
                    damped_sine([0.0, b, alpha, wd, 24.0], t)
                }
            })
            .collect()
    }

    #[test]
    fn document_from_two_analytic_rings() {
        // L = 1 uH, C_par = 100 pF, C_add = 220 pF: the method must return the values the
        // waveforms were made from.
        let ctx = ModelContext::default();
        let bare = measure_ring(&capture(1e-6, 100e-12), 1e-9, &ctx).unwrap();
        let loaded = measure_ring(&capture(1e-6, 320e-12), 1e-9, &ctx).unwrap();
        let doc = parasitics_doc(
            &bare,
            &loaded,
            &ParasiticsInputs {
                c_add_f: 220e-12,
                inductance_h: Some(1e-6),
                supply_v: Some(24.0),
                switching_rate_hz: Some(20e3),
                coil_current_a: Some(0.1),
                peak_limit_v: Some(60.0),
                c_slope_f: None,
            },
        )
        .unwrap();
        assert!(
            (doc.c_par_f / 100e-12 - 1.0).abs() < 1e-3,
            "{}",
            doc.c_par_f
        );
        assert!((doc.l_h / 1e-6 - 1.0).abs() < 1e-3, "{}", doc.l_h);
        assert_eq!(doc.estimates.len(), 2);
        assert!(doc.agreement[0].difference_pct.abs() < 0.2);
        let s = doc.snubber.as_ref().unwrap();
        assert!((s.r_ohm / 100.0 - 1.0).abs() < 1e-3, "{}", s.r_ohm);
        assert_eq!(doc.clamps.len(), 3);
        let json = serde_json::to_value(&doc).unwrap();
        assert_eq!(json["schema"], "kickscan.parasitics/1");
        for key in [
            "f_bare_hz",
            "f_loaded_hz",
            "c_add_f",
            "c_par_f",
            "l_h",
            "z0_ohm",
        ] {
            assert!(json[key].is_number(), "{key}");
        }
        assert!(json["snubber"]["power_w"].is_number());
    }
}
