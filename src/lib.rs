//! kickscan: measure inductive turn-off (flyback) events in oscilloscope captures.
//!
//! The pipeline flows one way, one module per stage:
//!
//! ```text
//! capture ──► levels ──► events ──► measure ──► model ──► stats ──► report
//! ```
//!
//! `simulate` stands beside the pipeline and feeds it captures. `pipeline` strings the
//! stages together for the commands; `document` holds the serialisable results that form
//! the JSON contract.

mod avx2;
pub mod capture;
pub mod compare;
pub mod demo;
pub mod document;
pub mod events;
pub mod levels;
pub mod measure;
pub mod model;
pub mod pipeline;
pub mod report;
pub mod simulate;
pub mod stats;
pub mod units;
