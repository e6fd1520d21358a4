//! The sidecar JSON file that tells what a WAV file or a raw dump holds.
//!
//! It sits beside the capture with the same stem (`run7.wav` -> `run7.json`,
//! `dump.bin` -> `dump.json`). Schema (unknown fields are refused, so a misspelt field is
//! reported instead of silently ignored):
//!
//! ```json
//! {
//!   "sample_rate_hz": 1e9,
//!   "t0_s": -2e-6,
//!   "data_offset_bytes": 0,
//!   "sample_type": "i16",
//!   "channels": [
//!     {"name": "v_sw",   "unit": "V", "volts_per_full_scale": 500, "offset_v": 0},
//!     {"name": "i_coil", "unit": "A", "volts_per_full_scale": 2}
//!   ]
//! }
//! ```
//!
//! - `channels` (required): one entry per interleaved channel, in file order.
//!   - `name` (required): the channel's name, as `--signal`/`--current` use it.
//!   - `volts_per_full_scale` (required): the value, in the channel's unit, of a sample at
//!     full scale. Integer samples are fractions of full scale in [-1, 1) (code / 2^(bits-1));
//!     float samples are multiplied by it as they are (give 1 when they are already volts).
//!   - `offset_v` (optional, default 0): added after scaling, in the channel's unit.
//!   - `unit` (optional, default `V`): `V`, `A`, or any other unit (kept as written).
//! - `sample_rate_hz` (optional for WAV, where it overrides the header's rate when the true
//!   rate does not fit it; required for raw dumps unless `--dt`/`--sample-rate` is given).
//! - `t0_s` (optional, default 0): time of the first sample, negative with pre-trigger.
//! - `data_offset_bytes` (raw dumps only, optional, default 0): bytes to skip before the
//!   first sample (a header the dump tool wrote).
//! - `sample_type` (raw dumps only, optional): `i8`, `i16`, `i32`, `f32` or `f64`, the type
//!   of each little-endian sample. With it the dump reads with no `--raw` option: a file
//!   whose sidecar has this field is read as a raw dump whatever its extension. `--raw`
//!   still overrides it; when the two differ the option is used and the capture carries a
//!   warning naming both. A WAV file's sidecar must not have it (the WAV header says the
//!   sample type), and is refused if it does.

use std::io::Read;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::{CaptureError, RawKind};

/// Largest sidecar read; a description of channels is a few hundred bytes.
const MAX_SIDECAR_BYTES: u64 = 1 << 20;

/// What a sidecar says, after its values have been checked. It also serialises, so the
/// simulator can write sidecars beside the captures it makes.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct Sidecar {
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sample_rate_hz: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub t0_s: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub data_offset_bytes: Option<u64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sample_type: Option<RawKind>,
    pub channels: Vec<SidecarChannel>,
}

/// One channel of a sidecar.
#[derive(Debug, Clone, PartialEq, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct SidecarChannel {
    pub name: String,
    #[serde(default = "default_unit")]
    pub unit: String,
    pub volts_per_full_scale: f64,
    #[serde(default)]
    pub offset_v: f64,
}

fn default_unit() -> String {
    "V".to_string()
}

/// Where the sidecar of a capture would be.
pub fn sidecar_path(capture: &Path) -> PathBuf {
    capture.with_extension("json")
}

/// Whether the sidecar beside `capture` has a `sample_type`, which makes the file a raw
/// dump. Checked loosely (any JSON object with that key), so an unrelated JSON file beside
/// a text capture never stops the text from reading; the raw reader then checks the
/// sidecar in full and reports what is wrong with it.
pub(crate) fn names_sample_type(capture: &Path) -> bool {
    let path = sidecar_path(capture);
    if path == capture {
        return false;
    }
    let Ok(f) = std::fs::File::open(&path) else {
        return false;
    };
    let mut text = String::new();
    if f.take(MAX_SIDECAR_BYTES + 1)
        .read_to_string(&mut text)
        .is_err()
        || text.len() as u64 > MAX_SIDECAR_BYTES
    {
        return false;
    }
    serde_json::from_str::<serde_json::Value>(&text).is_ok_and(|v| v.get("sample_type").is_some())
}

/// Reads and checks the sidecar beside `capture`, if there is one.
pub fn read_sidecar(capture: &Path) -> Result<Option<(PathBuf, Sidecar)>, CaptureError> {
    let path = sidecar_path(capture);
    if path == capture || !path.is_file() {
        return Ok(None);
    }
    let err = |message: String| CaptureError::Sidecar {
        file: path.clone(),
        message,
    };
    let f = std::fs::File::open(&path).map_err(|source| CaptureError::Io {
        file: path.clone(),
        source,
    })?;
    let mut text = String::new();
    f.take(MAX_SIDECAR_BYTES + 1)
        .read_to_string(&mut text)
        .map_err(|e| err(format!("cannot be read as UTF-8 text: {e}")))?;
    if text.len() as u64 > MAX_SIDECAR_BYTES {
        return Err(err(format!(
            "larger than {} KiB; expected a short JSON description of the channels",
            MAX_SIDECAR_BYTES / 1024
        )));
    }
    let sc: Sidecar = serde_json::from_str(&text).map_err(|e| {
        err(format!(
            "{e}; expected {{\"sample_rate_hz\": .., \"channels\": [{{\"name\": .., \"unit\": .., \"volts_per_full_scale\": .., \"offset_v\": ..}}]}}"
        ))
    })?;
    validate(&sc).map_err(err)?;
    Ok(Some((path, sc)))
}

fn validate(sc: &Sidecar) -> Result<(), String> {
    if sc.channels.is_empty() {
        return Err("'channels' is empty; expected one entry per channel".to_string());
    }
    if let Some(r) = sc.sample_rate_hz {
        if !(r.is_finite() && r > 0.0) {
            return Err(format!(
                "'sample_rate_hz' is {r}; expected a positive number of samples per second"
            ));
        }
    }
    if let Some(t) = sc.t0_s {
        if !t.is_finite() {
            return Err("'t0_s' must be a finite number of seconds".to_string());
        }
    }
    for (k, c) in sc.channels.iter().enumerate() {
        let at = format!("channels[{k}]");
        if c.name.trim().is_empty() {
            return Err(format!("{at}: 'name' is empty; expected a channel name"));
        }
        if sc.channels[..k]
            .iter()
            .any(|o| o.name.eq_ignore_ascii_case(&c.name))
        {
            return Err(format!(
                "{at}: the name '{}' is used twice; expected distinct names",
                c.name
            ));
        }
        if !(c.volts_per_full_scale.is_finite() && c.volts_per_full_scale != 0.0) {
            return Err(format!(
                "{at} ('{}'): 'volts_per_full_scale' is {}; expected a non-zero number",
                c.name, c.volts_per_full_scale
            ));
        }
        if !c.offset_v.is_finite() {
            return Err(format!(
                "{at} ('{}'): 'offset_v' must be a finite number",
                c.name
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<Sidecar, String> {
        let sc: Sidecar = serde_json::from_str(text).map_err(|e| e.to_string())?;
        validate(&sc)?;
        Ok(sc)
    }

    #[test]
    fn a_full_sidecar_reads() {
        let sc = parse(
            r#"{"sample_rate_hz": 1e9, "channels": [
                {"name": "v_sw", "unit": "V", "volts_per_full_scale": 500, "offset_v": 0},
                {"name": "i_coil", "unit": "A", "volts_per_full_scale": 2}]}"#,
        )
        .unwrap();
        assert_eq!(sc.sample_rate_hz, Some(1e9));
        assert_eq!(sc.channels[1].unit, "A");
        assert_eq!(sc.channels[1].offset_v, 0.0);
        // What serialises reads back the same.
        let text = serde_json::to_string(&sc).unwrap();
        assert_eq!(parse(&text).unwrap(), sc);
        assert!(!text.contains("t0_s"), "{text}");
    }

    #[test]
    fn missing_misspelt_and_wrong_fields_are_refused() {
        let e = parse(r#"{"channels": [{"name": "a"}]}"#).unwrap_err();
        assert!(e.contains("missing field `volts_per_full_scale`"), "{e}");
        let e = parse(r#"{"channels": [{"name": "a", "volts_per_fullscale": 1}]}"#).unwrap_err();
        assert!(e.contains("unknown field `volts_per_fullscale`"), "{e}");
        let e =
            parse(r#"{"channels": [{"name": "a", "volts_per_full_scale": "10"}]}"#).unwrap_err();
        assert!(e.contains("invalid type"), "{e}");
        let e = parse(r#"{"channels": [{"name": "a", "volts_per_full_scale": 0}]}"#).unwrap_err();
        assert!(e.contains("non-zero"), "{e}");
        let e = parse(
            r#"{"sample_rate_hz": -5, "channels": [{"name": "a", "volts_per_full_scale": 1}]}"#,
        )
        .unwrap_err();
        assert!(e.contains("sample_rate_hz"), "{e}");
        // A sample type outside the five raw kinds, and a misspelt key, are both named.
        let e = parse(
            r#"{"sample_type": "f16", "channels": [{"name": "a", "volts_per_full_scale": 1}]}"#,
        )
        .unwrap_err();
        assert!(e.contains("unknown variant `f16`"), "{e}");
        let e = parse(
            r#"{"sampletype": "f32", "channels": [{"name": "a", "volts_per_full_scale": 1}]}"#,
        )
        .unwrap_err();
        assert!(e.contains("unknown field `sampletype`"), "{e}");
    }

    #[test]
    fn sample_type_reads_in_each_spelling_and_serialises_back() {
        for (text, kind) in [
            ("i8", RawKind::I8),
            ("i16", RawKind::I16),
            ("i32", RawKind::I32),
            ("f32", RawKind::F32),
            ("f64", RawKind::F64),
        ] {
            let sc = parse(&format!(
                r#"{{"sample_type": "{text}", "channels": [{{"name": "a", "volts_per_full_scale": 1}}]}}"#
            ))
            .unwrap();
            assert_eq!(sc.sample_type, Some(kind));
            let back = serde_json::to_string(&sc).unwrap();
            assert!(
                back.contains(&format!(r#""sample_type":"{text}""#)),
                "{back}"
            );
        }
    }

    #[test]
    fn only_a_sidecar_naming_a_sample_type_makes_a_raw_dump() {
        let dir = tempfile::tempdir().unwrap();
        let data = dir.path().join("d.raw");
        assert!(!names_sample_type(&data));
        std::fs::write(dir.path().join("d.json"), r#"{"sample_type": "i16"}"#).unwrap();
        assert!(names_sample_type(&data));
        // A report or other JSON beside a text capture leaves it text.
        std::fs::write(dir.path().join("d.json"), r#"{"events": [1, 2]}"#).unwrap();
        assert!(!names_sample_type(&data));
        std::fs::write(dir.path().join("d.json"), "not json").unwrap();
        assert!(!names_sample_type(&data));
    }
}
