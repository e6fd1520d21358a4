//! Turn-off edges: 50 % reference-level crossings after an on-state dwell.
