//! Helpers shared by the end-to-end tests.
#![allow(dead_code)]
pub mod waveforms;
