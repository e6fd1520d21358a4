//! The physics model behind the demo data, the tests and what-if studies: a transistor
//! turning an inductive load off, with a choice of clamp.
//!
//! [`simulate`] integrates the circuit of a [`Scenario`] (coil, switch, node capacitance,
//! clamp, repeated switching with per-event variation) and digitises it into a
//! [`Capture`](crate::capture::Capture); [`writer`] saves captures in every format the
//! readers accept.

pub mod circuit;
pub mod noise;
pub mod scenario;
pub mod solver;
pub mod writer;

use thiserror::Error;

pub use circuit::Junction;
pub use noise::{Adc, Rng};
pub use scenario::{simulate, Clamp, EventTruth, Scenario, Side, Simulated, Variation};
pub use solver::{OffEnergy, SolverOptions};
pub use writer::{write_capture, CsvStyle, OutputFormat, TimeUnit, WriteError};

/// Why a simulation could not run.
#[derive(Debug, Error)]
pub enum SimError {
    #[error("simulate: --{name}: {message}")]
    Invalid { name: &'static str, message: String },
    #[error("simulate: the integrator could not converge at t = {t_s:e} s (step size collapsed)")]
    StepTooSmall { t_s: f64 },
}
