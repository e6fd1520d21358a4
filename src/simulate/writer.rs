//! Writes a [`Capture`] in every format the readers accept: CSV variants, WAV (integer and
//! float, with a JSON sidecar carrying the scale) and raw little-endian dumps (same sidecar).
//!
//! Every file is written under a temporary name in the target folder and renamed into
//! place, so an interrupted run never leaves a half-written capture.

use std::fmt::Write as _;
use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use serde::Serialize;
use thiserror::Error;

use crate::capture::{Capture, Channel, RawKind};

/// Why a capture could not be written.
#[derive(Debug, Error)]
pub enum WriteError {
    #[error("{file}: {source}")]
    Io {
        file: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("{file}: {message}")]
    Wav { file: PathBuf, message: String },
    #[error("{file}: {message}")]
    Invalid { file: PathBuf, message: String },
}

/// Unit of the CSV time column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TimeUnit {
    #[default]
    S,
    Ms,
    Us,
    Ns,
}

impl TimeUnit {
    fn per_second(self) -> f64 {
        match self {
            TimeUnit::S => 1.0,
            TimeUnit::Ms => 1e3,
            TimeUnit::Us => 1e6,
            TimeUnit::Ns => 1e9,
        }
    }

    fn symbol(self) -> &'static str {
        match self {
            TimeUnit::S => "s",
            TimeUnit::Ms => "ms",
            TimeUnit::Us => "us",
            TimeUnit::Ns => "ns",
        }
    }
}

/// How a CSV file looks.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CsvStyle {
    pub delimiter: u8,
    pub decimal_comma: bool,
    pub time_column: bool,
    /// Free-text metadata lines before the header (sample interval, record length).
    pub preamble: bool,
    pub header: bool,
    pub time_unit: TimeUnit,
}

impl Default for CsvStyle {
    fn default() -> Self {
        CsvStyle {
            delimiter: b',',
            decimal_comma: false,
            time_column: true,
            preamble: true,
            header: true,
            time_unit: TimeUnit::S,
        }
    }
}

/// Output formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OutputFormat {
    Csv(CsvStyle),
    /// Integer PCM of 8, 16, 24 or 32 bits.
    WavInt(u16),
    WavF32,
    Raw(RawKind),
}

impl OutputFormat {
    /// The format names `--format` takes.
    pub const NAMES: &'static [&'static str] = &[
        "csv",
        "csv-semicolon",
        "csv-tab",
        "csv-values",
        "wav8",
        "wav16",
        "wav24",
        "wav32",
        "wavf32",
        "raw-i8",
        "raw-i16",
        "raw-i32",
        "raw-f32",
        "raw-f64",
    ];

    /// A format by name (see [`OutputFormat::NAMES`]).
    pub fn from_name(name: &str) -> Option<Self> {
        let csv = CsvStyle::default();
        Some(match name.to_ascii_lowercase().as_str() {
            "csv" => OutputFormat::Csv(csv),
            "csv-semicolon" => OutputFormat::Csv(CsvStyle {
                delimiter: b';',
                decimal_comma: true,
                ..csv
            }),
            "csv-tab" => OutputFormat::Csv(CsvStyle {
                delimiter: b'\t',
                ..csv
            }),
            "csv-values" => OutputFormat::Csv(CsvStyle {
                time_column: false,
                ..csv
            }),
            "wav8" => OutputFormat::WavInt(8),
            "wav16" | "wav" => OutputFormat::WavInt(16),
            "wav24" => OutputFormat::WavInt(24),
            "wav32" => OutputFormat::WavInt(32),
            "wavf32" => OutputFormat::WavF32,
            "raw-i8" => OutputFormat::Raw(RawKind::I8),
            "raw-i16" => OutputFormat::Raw(RawKind::I16),
            "raw-i32" => OutputFormat::Raw(RawKind::I32),
            "raw-f32" | "raw" => OutputFormat::Raw(RawKind::F32),
            "raw-f64" => OutputFormat::Raw(RawKind::F64),
            _ => return None,
        })
    }

    /// A format guessed from the file extension.
    pub fn from_path(path: &Path) -> Option<Self> {
        let ext = path.extension()?.to_str()?.to_ascii_lowercase();
        match ext.as_str() {
            "csv" => Self::from_name("csv"),
            "tsv" | "txt" => Self::from_name("csv-tab"),
            "wav" => Self::from_name("wav16"),
            "raw" | "bin" | "dat" => Self::from_name("raw-f32"),
            _ => None,
        }
    }
}

/// One channel's entry in the sidecar: `volts = offset_v + fraction * volts_per_full_scale`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct SidecarChannel {
    pub name: String,
    pub unit: String,
    pub volts_per_full_scale: f64,
    pub offset_v: f64,
}

/// The JSON file beside a WAV or raw dump (schema in [`crate::capture::sidecar`]).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Sidecar {
    pub sample_rate_hz: f64,
    /// Time of the first sample; left out when it is 0.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub t0_s: Option<f64>,
    /// Raw dumps only, so they read back without `--raw`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sample_type: Option<RawKind>,
    pub channels: Vec<SidecarChannel>,
}

/// Writes `capture` to `path`; returns the files written (the data file, then any sidecar).
pub fn write_capture(
    capture: &Capture,
    path: &Path,
    format: &OutputFormat,
) -> Result<Vec<PathBuf>, WriteError> {
    if capture.channels.is_empty() {
        return Err(WriteError::Invalid {
            file: path.to_path_buf(),
            message: "the capture has no channels".into(),
        });
    }
    match format {
        OutputFormat::Csv(style) => {
            atomic(path, |w| {
                write_csv(capture, style, w).map_err(|e| io_err(path, e))
            })?;
            Ok(vec![path.to_path_buf()])
        }
        OutputFormat::WavInt(bits) => write_wav(capture, path, Some(*bits)),
        OutputFormat::WavF32 => write_wav(capture, path, None),
        OutputFormat::Raw(kind) => write_raw(capture, path, *kind),
    }
}

fn io_err(path: &Path, source: std::io::Error) -> WriteError {
    WriteError::Io {
        file: path.to_path_buf(),
        source,
    }
}

fn temp_name(path: &Path) -> PathBuf {
    let mut name = path
        .file_name()
        .map(|n| n.to_os_string())
        .unwrap_or_default();
    name.push(format!(".partial-{}", std::process::id()));
    path.with_file_name(name)
}

/// Writes through a buffered temporary file and renames it into place.
fn atomic(
    path: &Path,
    body: impl FnOnce(&mut BufWriter<File>) -> Result<(), WriteError>,
) -> Result<(), WriteError> {
    let tmp = temp_name(path);
    let result = (|| {
        let file = File::create(&tmp).map_err(|e| io_err(path, e))?;
        let mut w = BufWriter::new(file);
        body(&mut w)?;
        w.flush().map_err(|e| io_err(path, e))?;
        std::fs::rename(&tmp, path).map_err(|e| io_err(path, e))
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// Appends a number with about 7 significant digits: plain notation for ordinary
/// magnitudes, scientific beyond, trailing zeros dropped.
fn push_number(out: &mut String, x: f64, decimal_comma: bool) {
    let start = out.len();
    if x == 0.0 || !x.is_finite() {
        out.push('0');
        return;
    }
    let e = x.abs().log10().floor() as i32;
    if (-3..7).contains(&e) {
        let decimals = (6 - e).max(0) as usize;
        let _ = write!(out, "{x:.decimals$}");
        trim_zeros(out, start);
    } else {
        let _ = write!(out, "{x:.6e}");
        if let Some(epos) = out[start..].find('e') {
            let exp = out.split_off(start + epos);
            trim_zeros(out, start);
            out.push_str(&exp);
        }
    }
    if decimal_comma {
        // Both marks are one ASCII byte, so the swap keeps the string valid.
        if let Some(p) = out[start..].find('.') {
            out.replace_range(start + p..start + p + 1, ",");
        }
    }
}

fn trim_zeros(out: &mut String, start: usize) {
    if out[start..].contains('.') {
        while out.ends_with('0') {
            out.pop();
        }
        if out.ends_with('.') {
            out.pop();
        }
    }
}

/// Renders the CSV text into any writer.
pub fn write_csv(capture: &Capture, style: &CsvStyle, w: &mut impl Write) -> std::io::Result<()> {
    let d = style.delimiter as char;
    if style.decimal_comma && d == ',' {
        return Err(std::io::Error::new(
            std::io::ErrorKind::InvalidInput,
            "a decimal comma needs a semicolon or tab delimiter",
        ));
    }
    let n = capture.n_samples();
    let dt = capture.sample_interval_s;
    let mut line = String::with_capacity(256);
    if style.preamble || !style.time_column {
        let value = |x: f64| {
            let mut s = String::new();
            push_number(&mut s, x, style.decimal_comma);
            s
        };
        writeln!(w, "source{d}kickscan simulate")?;
        writeln!(w, "sample interval [s]{d}{}", value(dt))?;
        writeln!(w, "record length{d}{n}")?;
        writeln!(w, "start time [s]{d}{}", value(capture.t0_s))?;
        for (k, v) in &capture.metadata {
            if matches!(k.as_str(), "clamp" | "switch") {
                writeln!(w, "{k}{d}{}", v.replace([d, '\n', '\r'], " "))?;
            }
        }
    }
    if style.header {
        if style.time_column {
            let _ = write!(line, "t [{}]", style.time_unit.symbol());
        }
        for (k, c) in capture.channels.iter().enumerate() {
            if k > 0 || style.time_column {
                line.push(d);
            }
            let _ = write!(line, "{} [{}]", c.name.replace(d, " "), c.unit);
        }
        writeln!(w, "{line}")?;
    }
    let scale = style.time_unit.per_second();
    let dt_unit = dt * scale;
    let decimals = (3.0 - dt_unit.log10().floor()).clamp(0.0, 15.0) as usize;
    for j in 0..n {
        line.clear();
        if style.time_column {
            let t = (capture.t0_s + j as f64 * dt) * scale;
            let start = line.len();
            let _ = write!(line, "{t:.decimals$}");
            trim_zeros(&mut line, start);
            if line[start..].starts_with("-0")
                && line[start..].trim_start_matches(['-', '0']).is_empty()
            {
                line.replace_range(start..start + 1, "");
            }
            if style.decimal_comma {
                if let Some(p) = line[start..].find('.') {
                    line.replace_range(start + p..start + p + 1, ",");
                }
            }
        }
        for (k, c) in capture.channels.iter().enumerate() {
            if k > 0 || style.time_column {
                line.push(d);
            }
            push_number(
                &mut line,
                c.samples.get(j).copied().unwrap_or(0.0),
                style.decimal_comma,
            );
        }
        line.push('\n');
        w.write_all(line.as_bytes())?;
    }
    Ok(())
}

/// Scale of a channel in integer codes: the ADC range if known, else the data range, so
/// that `offset +- full_scale` maps to the extreme codes `+-(2^(b-1) - 1)` exactly.
fn channel_scale(c: &Channel, bits: u32) -> (f64, f64) {
    let (lo, hi) = match c.adc {
        Some(a) => (a.min_v, a.max_v),
        None => c
            .samples
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
                (lo.min(v), hi.max(v))
            }),
    };
    let (lo, hi) = if lo.is_finite() && hi.is_finite() {
        (lo, hi)
    } else {
        (-1.0, 1.0)
    };
    let offset = 0.5 * (lo + hi);
    let half = (0.5 * (hi - lo)).max(1e-12 * offset.abs().max(1.0));
    let top = 2f64.powi(bits as i32 - 1);
    (offset, half * top / (top - 1.0))
}

fn sidecar_for(capture: &Capture, scales: &[(f64, f64)], raw: Option<RawKind>) -> Sidecar {
    Sidecar {
        sample_rate_hz: 1.0 / capture.sample_interval_s,
        t0_s: (capture.t0_s != 0.0).then_some(capture.t0_s),
        sample_type: raw,
        channels: capture
            .channels
            .iter()
            .zip(scales)
            .map(|(c, &(offset_v, fs))| SidecarChannel {
                name: c.name.clone(),
                unit: c.unit.clone(),
                volts_per_full_scale: fs,
                offset_v,
            })
            .collect(),
    }
}

fn sidecar_path(path: &Path) -> PathBuf {
    path.with_extension("json")
}

fn write_sidecar(path: &Path, sidecar: &Sidecar) -> Result<PathBuf, WriteError> {
    let side = sidecar_path(path);
    if side == path {
        return Err(WriteError::Invalid {
            file: path.to_path_buf(),
            message: "the data file cannot end in .json: the sidecar takes that name".into(),
        });
    }
    let text = serde_json::to_string_pretty(sidecar).map_err(|e| WriteError::Invalid {
        file: side.clone(),
        message: e.to_string(),
    })?;
    atomic(&side, |w| {
        w.write_all(text.as_bytes())
            .and_then(|_| w.write_all(b"\n"))
            .map_err(|e| io_err(&side, e))
    })?;
    Ok(side)
}

fn to_code(v: f64, offset: f64, fs: f64, bits: u32) -> i64 {
    let top = 2f64.powi(bits as i32 - 1);
    ((v - offset) / fs * top).round().clamp(-top, top - 1.0) as i64
}

fn write_wav(
    capture: &Capture,
    path: &Path,
    bits: Option<u16>,
) -> Result<Vec<PathBuf>, WriteError> {
    let wav_err = |e: hound::Error| WriteError::Wav {
        file: path.to_path_buf(),
        message: e.to_string(),
    };
    if let Some(b) = bits {
        if !matches!(b, 8 | 16 | 24 | 32) {
            return Err(WriteError::Invalid {
                file: path.to_path_buf(),
                message: format!("{b}-bit WAV; expected 8, 16, 24 or 32"),
            });
        }
    }
    let n_ch = u16::try_from(capture.channels.len()).map_err(|_| WriteError::Invalid {
        file: path.to_path_buf(),
        message: "too many channels for WAV".into(),
    })?;
    let rate = (1.0 / capture.sample_interval_s)
        .round()
        .clamp(1.0, u32::MAX as f64) as u32;
    let spec = hound::WavSpec {
        channels: n_ch,
        sample_rate: rate,
        bits_per_sample: bits.unwrap_or(32),
        sample_format: if bits.is_some() {
            hound::SampleFormat::Int
        } else {
            hound::SampleFormat::Float
        },
    };
    let scales: Vec<(f64, f64)> = capture
        .channels
        .iter()
        .map(|c| channel_scale(c, u32::from(bits.unwrap_or(24))))
        .collect();
    let side = write_sidecar(path, &sidecar_for(capture, &scales, None))?;
    let tmp = temp_name(path);
    let result = (|| {
        let mut w = hound::WavWriter::create(&tmp, spec).map_err(wav_err)?;
        for j in 0..capture.n_samples() {
            for (c, &(offset, fs)) in capture.channels.iter().zip(&scales) {
                let v = c.samples.get(j).copied().unwrap_or(0.0);
                match bits {
                    Some(8) => w.write_sample(to_code(v, offset, fs, 8) as i8),
                    Some(16) => w.write_sample(to_code(v, offset, fs, 16) as i16),
                    Some(b) => w.write_sample(to_code(v, offset, fs, u32::from(b)) as i32),
                    None => w.write_sample(((v - offset) / fs) as f32),
                }
                .map_err(wav_err)?;
            }
        }
        w.finalize().map_err(wav_err)?;
        std::fs::rename(&tmp, path).map_err(|e| io_err(path, e))
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(e);
    }
    Ok(vec![path.to_path_buf(), side])
}

/// Raw dump: interleaved frames (one sample of each channel in turn), little-endian.
/// Integer kinds hold fractions of full scale like WAV; float kinds hold the physical
/// values (the sidecar then says full scale 1, offset 0).
fn write_raw(capture: &Capture, path: &Path, kind: RawKind) -> Result<Vec<PathBuf>, WriteError> {
    let bits = match kind {
        RawKind::I8 => Some(8),
        RawKind::I16 => Some(16),
        RawKind::I32 => Some(32),
        RawKind::F32 | RawKind::F64 => None,
    };
    let scales: Vec<(f64, f64)> = capture
        .channels
        .iter()
        .map(|c| bits.map_or((0.0, 1.0), |b| channel_scale(c, b)))
        .collect();
    let side = write_sidecar(path, &sidecar_for(capture, &scales, Some(kind)))?;
    atomic(path, |w| {
        for j in 0..capture.n_samples() {
            for (c, &(offset, fs)) in capture.channels.iter().zip(&scales) {
                let v = c.samples.get(j).copied().unwrap_or(0.0);
                let r = match kind {
                    RawKind::I8 => w.write_all(&(to_code(v, offset, fs, 8) as i8).to_le_bytes()),
                    RawKind::I16 => w.write_all(&(to_code(v, offset, fs, 16) as i16).to_le_bytes()),
                    RawKind::I32 => w.write_all(&(to_code(v, offset, fs, 32) as i32).to_le_bytes()),
                    RawKind::F32 => w.write_all(&(v as f32).to_le_bytes()),
                    RawKind::F64 => w.write_all(&v.to_le_bytes()),
                };
                r.map_err(|e| io_err(path, e))?;
            }
        }
        Ok(())
    })?;
    Ok(vec![path.to_path_buf(), side])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::capture::{AdcRange, Format};

    fn capture() -> Capture {
        let v: Vec<f64> = (0..200)
            .map(|k| 12.0 + 300.0 * (k as f64 * 0.1).sin() * (-(k as f64) * 0.01).exp())
            .collect();
        let i: Vec<f64> = (0..200).map(|k| 0.075 - k as f64 * 3.0e-4).collect();
        Capture {
            source: PathBuf::from("t"),
            format: Format::Csv,
            sample_interval_s: 1e-7,
            t0_s: -5e-6,
            channels: vec![
                Channel {
                    name: "v_sw".into(),
                    unit: "V".into(),
                    samples: v,
                    adc: Some(AdcRange {
                        min_v: -300.0,
                        max_v: 350.0,
                        step_v: None,
                    }),
                },
                Channel {
                    name: "i_coil".into(),
                    unit: "A".into(),
                    samples: i,
                    adc: None,
                },
            ],
            metadata: vec![("clamp".into(), "RC snubber 1000 ohm, 4.7e-9 F".into())],
            notes: vec![],
            warnings: vec![],
        }
    }

    /// Parses the rendered CSV back with std only: skips the preamble (lines whose first
    /// field is not a number), reads the data rows.
    fn parse(text: &str, d: char, comma: bool) -> (Vec<String>, Vec<Vec<f64>>) {
        let mut header = Vec::new();
        let mut rows = Vec::new();
        for line in text.lines() {
            let fields: Vec<String> = line
                .split(d)
                .map(|f| {
                    if comma {
                        f.replace(',', ".")
                    } else {
                        f.to_string()
                    }
                })
                .collect();
            let nums: Result<Vec<f64>, _> = fields.iter().map(|f| f.parse::<f64>()).collect();
            match nums {
                Ok(n) if !rows.is_empty() || n.len() == fields.len() && n.len() > 1 => rows.push(n),
                _ if rows.is_empty() => header = fields,
                _ => panic!("bad row {line}"),
            }
        }
        (header, rows)
    }

    #[test]
    fn csv_round_trips_in_every_style() {
        let cap = capture();
        for (d, comma, time, unit) in [
            (b',', false, true, TimeUnit::S),
            (b';', true, true, TimeUnit::Us),
            (b'\t', false, false, TimeUnit::S),
            (b';', false, true, TimeUnit::Ns),
        ] {
            let style = CsvStyle {
                delimiter: d,
                decimal_comma: comma,
                time_column: time,
                time_unit: unit,
                ..CsvStyle::default()
            };
            let mut buf = Vec::new();
            write_csv(&cap, &style, &mut buf).unwrap();
            let text = String::from_utf8(buf).unwrap();
            assert!(text.contains("sample interval [s]"), "{text}");
            let (header, rows) = parse(&text, d as char, comma);
            assert_eq!(rows.len(), 200);
            let first = usize::from(time);
            assert_eq!(header[first], "v_sw [V]");
            if time {
                assert_eq!(header[0], format!("t [{}]", unit.symbol()));
                let t = rows[3][0] / unit.per_second();
                assert!((t - (-5e-6 + 3e-7)).abs() < 1e-12, "{t}");
            }
            for (k, row) in rows.iter().enumerate() {
                let (v, i) = (row[first], row[first + 1]);
                // Seven significant digits are written.
                assert!((v - cap.channels[0].samples[k]).abs() <= 1e-6 * v.abs().max(1.0));
                assert!((i - cap.channels[1].samples[k]).abs() <= 1e-6 * i.abs().max(1e-3));
            }
        }
        // The comma in the clamp text does not break a comma-separated preamble.
        let mut buf = Vec::new();
        write_csv(&cap, &CsvStyle::default(), &mut buf).unwrap();
        let text = String::from_utf8(buf).unwrap();
        assert!(text
            .lines()
            .any(|l| l == "clamp,RC snubber 1000 ohm  4.7e-9 F"));
        let bad = CsvStyle {
            decimal_comma: true,
            ..CsvStyle::default()
        };
        assert!(write_csv(&cap, &bad, &mut Vec::new()).is_err());
    }

    #[test]
    fn numbers_are_short_and_exact_enough() {
        let cases = [
            (24.0, "24"),
            (0.075, "0.075"),
            (-1.5e-9, "-1.5e-9"),
            (586.10512345, "586.1051"),
            (2.5e7, "2.5e7"),
            (0.0, "0"),
        ];
        for (x, s) in cases {
            let mut out = String::new();
            push_number(&mut out, x, false);
            assert_eq!(out, s);
        }
        let mut out = String::new();
        push_number(&mut out, 12.25, true);
        assert_eq!(out, "12,25");
    }

    #[test]
    fn wav_round_trips_through_hound_with_its_sidecar() {
        let cap = capture();
        let dir = tempfile::tempdir().unwrap();
        for (fmt, bits) in [
            (OutputFormat::WavInt(8), 8u32),
            (OutputFormat::WavInt(16), 16),
            (OutputFormat::WavInt(24), 24),
            (OutputFormat::WavInt(32), 32),
            (OutputFormat::WavF32, 0),
        ] {
            let path = dir.path().join(format!("run{bits}.wav"));
            let files = write_capture(&cap, &path, &fmt).unwrap();
            assert_eq!(files[1], dir.path().join(format!("run{bits}.json")));
            let side: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(&files[1]).unwrap()).unwrap();
            assert_eq!(side["sample_rate_hz"].as_f64(), Some(1e7));
            assert_eq!(side["t0_s"].as_f64(), Some(-5e-6));
            // The WAV header gives the sample type; the readers refuse it in a WAV sidecar.
            assert!(side.get("sample_type").is_none());
            let chans = side["channels"].as_array().unwrap();
            assert_eq!(chans[0]["name"], "v_sw");
            assert_eq!(chans[1]["unit"], "A");
            let mut reader = hound::WavReader::open(&path).unwrap();
            assert_eq!(reader.spec().channels, 2);
            assert_eq!(reader.spec().sample_rate, 10_000_000);
            let frac: Vec<f64> = if bits == 0 {
                reader
                    .samples::<f32>()
                    .map(|s| f64::from(s.unwrap()))
                    .collect()
            } else {
                let top = 2f64.powi(bits as i32 - 1);
                reader
                    .samples::<i32>()
                    .map(|s| f64::from(s.unwrap()) / top)
                    .collect()
            };
            assert_eq!(frac.len(), 400);
            for (c, ch) in cap.channels.iter().enumerate() {
                let fs = chans[c]["volts_per_full_scale"].as_f64().unwrap();
                let off = chans[c]["offset_v"].as_f64().unwrap();
                // Quantization error is at most half a code of the full scale.
                let tol = if bits == 0 {
                    1e-6
                } else {
                    2f64.powi(-(bits as i32))
                } * fs
                    * 1.01;
                for k in 0..200 {
                    let v = off + frac[2 * k + c] * fs;
                    assert!(
                        (v - ch.samples[k]).abs() <= tol + 1e-9,
                        "{bits} bits, ch {c}, k {k}: {v} vs {}",
                        ch.samples[k]
                    );
                }
            }
            // The ADC rails of v_sw land on the extreme codes.
            let fs = chans[0]["volts_per_full_scale"].as_f64().unwrap();
            let off = chans[0]["offset_v"].as_f64().unwrap();
            if bits > 0 {
                let top = 2f64.powi(bits as i32 - 1);
                assert!((off + fs * (top - 1.0) / top - 350.0).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn raw_dump_is_interleaved_little_endian() {
        let cap = capture();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("dump.raw");
        write_capture(&cap, &path, &OutputFormat::Raw(RawKind::F64)).unwrap();
        let bytes = std::fs::read(&path).unwrap();
        assert_eq!(bytes.len(), 200 * 2 * 8);
        let at = |k: usize| f64::from_le_bytes(bytes[8 * k..8 * k + 8].try_into().unwrap());
        assert_eq!(at(2 * 7), cap.channels[0].samples[7]);
        assert_eq!(at(2 * 7 + 1), cap.channels[1].samples[7]);
        let path16 = dir.path().join("dump16.bin");
        let files = write_capture(&cap, &path16, &OutputFormat::Raw(RawKind::I16)).unwrap();
        let side: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&files[1]).unwrap()).unwrap();
        let fs = side["channels"][0]["volts_per_full_scale"]
            .as_f64()
            .unwrap();
        let off = side["channels"][0]["offset_v"].as_f64().unwrap();
        // The sidecar names the sample type and the first sample's time.
        assert_eq!(side["sample_type"], "i16");
        assert_eq!(side["t0_s"].as_f64(), Some(-5e-6));
        let bytes = std::fs::read(&path16).unwrap();
        let code = i16::from_le_bytes([bytes[4 * 7], bytes[4 * 7 + 1]]);
        let v = off + f64::from(code) / 32768.0 * fs;
        assert!((v - cap.channels[0].samples[7]).abs() < fs / 32768.0);
        // No temporary files are left behind.
        let names: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        assert!(names.iter().all(|n| !n.contains("partial")), "{names:?}");
    }

    #[test]
    fn formats_by_name_and_extension() {
        assert_eq!(
            OutputFormat::from_path(Path::new("a/b.WAV")),
            Some(OutputFormat::WavInt(16))
        );
        assert!(matches!(
            OutputFormat::from_name("csv-semicolon"),
            Some(OutputFormat::Csv(CsvStyle {
                delimiter: b';',
                decimal_comma: true,
                ..
            }))
        ));
        for n in OutputFormat::NAMES {
            assert!(OutputFormat::from_name(n).is_some(), "{n}");
        }
        assert!(OutputFormat::from_path(Path::new("x.json")).is_none());
    }
}
