//! Synthetic switch-node records for the benchmarks: repeated turn-off events of a coil
//! with a node capacitance, each the natural response of a series RLC loop (textbook
//! underdamped solution), cut off where the switch's body diode conducts, with
//! deterministic noise and an 8-bit ADC grid. Invented demo data.

#![allow(dead_code)]

use std::io::Write;
use std::path::Path;

/// Sample interval of the benchmark records, seconds.
pub const DT_S: f64 = 20e-9;

/// `n` samples holding `events` turn-off events.
pub fn switch_node(n: usize, events: usize) -> Vec<f64> {
    let (vs, vsat, l_h, c_f, r_ohm): (f64, f64, f64, f64, f64) = (24.0, 0.15, 50e-3, 1e-9, 2000.0);
    let alpha = r_ohm / (2.0 * l_h);
    let w0 = 1.0 / (l_h * c_f).sqrt();
    let wd = (w0 * w0 - alpha * alpha).sqrt();
    let period = (n / events.max(1)).max(1);
    let on_len = period / 5;
    let mut seed = 0x2545_f491_4f6c_dd1du64;
    let mut noise = move || {
        // xorshift64, summed to an approximately Gaussian value
        let mut s = 0.0;
        for _ in 0..4 {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            s += (seed >> 11) as f64 / (1u64 << 53) as f64;
        }
        (s - 2.0) * 0.7
    };
    let (lo, hi) = (-50.0, 500.0);
    (0..n)
        .map(|k| {
            let j = k % period;
            let event = k / period;
            let i0 = vs / 600.0 * (0.9 + 0.2 * ((event * 7919) % 100) as f64 / 100.0);
            let v = if j < on_len {
                vsat
            } else {
                let t = (j - on_len) as f64 * DT_S;
                let a = vsat - vs;
                let b = (i0 / c_f + alpha * a) / wd;
                (vs + (-alpha * t).exp() * (a * (wd * t).cos() + b * (wd * t).sin())).max(-0.7)
            };
            let code = (((v + noise() - lo) / (hi - lo) * 255.0).round()).clamp(0.0, 255.0);
            lo + code * (hi - lo) / 255.0
        })
        .collect()
}

/// Writes `time_s,v_sw` rows.
pub fn write_csv(path: &Path, v: &[f64]) {
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).expect("create csv"));
    writeln!(f, "time_s,v_sw").expect("write");
    for (k, x) in v.iter().enumerate() {
        writeln!(f, "{:.9e},{:.4}", k as f64 * DT_S, x).expect("write");
    }
}

/// Writes a 16-bit mono WAV with full scale at 500 V and a sidecar giving that scale.
pub fn write_wav(path: &Path, v: &[f64]) {
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: (1.0 / DT_S).round() as u32,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).expect("create wav");
    for x in v {
        let code = (x / 500.0 * 32768.0).round().clamp(-32768.0, 32767.0) as i16;
        w.write_sample(code).expect("write");
    }
    w.finalize().expect("finish wav");
    let sidecar = path.with_extension("json");
    std::fs::write(
        sidecar,
        r#"{"channels": [{"name": "v_sw", "volts_per_full_scale": 500.0, "unit": "V"}]}"#,
    )
    .expect("write sidecar");
}
