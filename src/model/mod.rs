//! The damped RLC model of the switch node: fit of the ringing, parasitic extraction,
//! clipped-peak reconstruction and suppression advice.
//!
//! Everything here is maths on slices returning plain serialisable structs. The per-event
//! entry points are [`fit_event`] and [`apply_fit`]; [`measure_ring`] measures the main ring
//! of a single-event capture on its own (for `kickscan parasitics`); [`parasitics`] and
//! [`advice`] turn frequencies and a coil into capacitances, inductances and snubber or
//! clamp choices.

pub mod advice;
pub mod clipped;
pub mod event_fit;
pub mod extraction;
pub mod lm;
pub mod parasitics;
mod recurrence;
pub mod ringfit;

pub use clipped::PeakEstimate;
pub use event_fit::{apply_fit, fit_event, measure_ring, EventFit, FitCurve, RingMeasurement};
pub use extraction::{parasitics_doc, ParasiticsDoc, ParasiticsInputs};
pub use ringfit::{DampedSineFit, ExponentialFit, RingEstimate, RingStart};

use crate::capture::AdcRange;

/// What the model stage knows beyond the event itself.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct ModelContext {
    /// Coil inductance (`--inductance`), for the node capacitance 1 / (omega_0^2 L).
    pub inductance_h: Option<f64>,
    /// Digitiser range of the voltage channel: samples at a rail are left out of fits.
    pub adc: Option<AdcRange>,
    /// Level at which something clips the ringing on the side opposite the spike (the
    /// switch's body diode, about -0.7 V for a low-side switch; a clamp). Samples at or
    /// beyond it are left out of fits. The caller supplies it; the model does not guess it.
    pub clip_level_v: Option<f64>,
    /// How far past the switch's rail its body diode holds the node, for a caller that
    /// knows the switch but not which way the spike points ([`measure_ring`] on a capture
    /// of its own): the model then places the clip level past the on level, on the side
    /// away from the spike. `clip_level_v`, when given, wins.
    pub body_diode_v: Option<f64>,
}

/// Why a model could not be fitted or evaluated.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    #[error("{n} usable samples; the fit needs at least {min}")]
    TooFewSamples { n: usize, min: usize },
    #[error("no starting value for the {0}")]
    NoStart(String),
    #[error("the signal does not ring")]
    NoRing,
    #[error("the fitted curve does not decay")]
    NotDecaying,
    #[error("invalid input: {0}")]
    Invalid(String),
    #[error("least-squares fit: {0}")]
    Fit(#[from] lm::LmError),
}

/// True for a finite, strictly positive number (false for NaN).
pub fn is_pos(x: f64) -> bool {
    x > 0.0 && x.is_finite()
}
