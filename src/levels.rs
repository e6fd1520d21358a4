//! State levels (IEEE Std 181-2011 histogram method, made robust to spikes) and reference
//! levels.
