//! Reading captures: every file format kickscan accepts ends up as one [`Capture`].
//!
//! Only this module reads input files. Readers sniff what they can (delimiter, decimal
//! mark, header, metadata lines, time units) and record each guess in [`Capture::notes`], so
//! `kickscan inspect` can show what was understood; every guess can be overridden through
//! [`ReadOptions`].
//!
//! - [`read_capture`] reads a whole file; [`open_blocks`] streams it in [`Block`]s of a
//!   bounded number of samples per channel, for captures of any length in flat memory.
//! - Delimited text (`csv`): preamble lines, header, units, time column, checked row by row.
//! - WAV (`wav`) and raw little-endian dumps (`raw`), described by a sidecar JSON file
//!   ([`sidecar`] documents its schema).
//! - [`select_channel`] picks a channel by name, number or difference (`CH1-CH2`);
//!   `--scale` and `--skew` (`skew`) are applied while reading, to every channel named.
//!
//! Untrusted sizes never drive allocation: lines are capped at 1 MiB, sidecars at 1 MiB,
//! and sample vectors grow with the samples actually read, not with what a header claims.

use std::io::Read;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use thiserror::Error;

mod adc;
mod blocks;
mod cells;
mod channel;
mod columns;
mod csv;
mod decimal;
mod frames;
mod lines;
mod raw;
mod runs;
pub mod sidecar;
mod skew;
mod wav;

pub use blocks::{open_blocks, Block, BlockReader, DEFAULT_BLOCK_LEN};
pub use channel::select_channel;
pub use frames::{CodedChannel, TakeValues};
pub use sidecar::{Sidecar, SidecarChannel};

/// File formats kickscan reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Format {
    Csv,
    Wav,
    Raw,
}

impl std::fmt::Display for Format {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Format::Csv => "csv",
            Format::Wav => "wav",
            Format::Raw => "raw",
        })
    }
}

/// Sample type of a raw little-endian dump (`--raw`, or `sample_type` in the sidecar).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum RawKind {
    I8,
    I16,
    I32,
    F32,
    F64,
}

/// The vertical range of the digitiser, where known: values at these rails are clipped.
///
/// A rail that was not seen (a CSV channel clipped only at the top, or one whose only known
/// property is its code step) is infinite: `min_v = -inf`, `max_v = +inf`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct AdcRange {
    pub min_v: f64,
    pub max_v: f64,
    /// One code step in the channel's unit, where known.
    pub step_v: Option<f64>,
}

/// One channel of samples, already scaled to its physical unit.
#[derive(Debug, Clone, PartialEq)]
pub struct Channel {
    pub name: String,
    /// Physical unit as read or assumed (`V`, `A`).
    pub unit: String,
    pub samples: Vec<f64>,
    /// Digitiser range, from a WAV full scale, a sidecar, or values repeated at the
    /// extreme codes of a CSV.
    pub adc: Option<AdcRange>,
}

/// A capture as understood by a reader: uniformly sampled channels on one time base.
#[derive(Debug, Clone, PartialEq)]
pub struct Capture {
    /// The path as given by the user.
    pub source: PathBuf,
    pub format: Format,
    pub sample_interval_s: f64,
    /// Time of the first sample (negative with pre-trigger).
    pub t0_s: f64,
    pub channels: Vec<Channel>,
    /// Key/value metadata read from the file (CSV preamble, sidecar), in file order.
    pub metadata: Vec<(String, String)>,
    /// What the reader detected or guessed, one sentence each (`"delimiter ';' (sniffed)"`).
    pub notes: Vec<String>,
    /// Things the user should know (jittered time steps, ...).
    pub warnings: Vec<String>,
}

impl Capture {
    /// Number of samples per channel.
    pub fn n_samples(&self) -> usize {
        self.channels.first().map_or(0, |c| c.samples.len())
    }
}

/// Options that override what the readers would sniff, and per-channel corrections.
#[derive(Debug, Clone, Default)]
pub struct ReadOptions {
    /// Sample interval when the file has none (`--dt`, `--sample-rate`).
    pub dt_s: Option<f64>,
    /// Read the file as a raw little-endian dump of this type.
    pub raw: Option<RawKind>,
    /// `NAME=FACTOR` multipliers (probe attenuation, shunt transconductance).
    pub scale: Vec<(String, f64)>,
    /// `NAME=S` time skews (probe and cable delay), applied while reading.
    pub skew: Vec<(String, f64)>,
    /// Force a CSV delimiter.
    pub delimiter: Option<u8>,
    /// Force a decimal comma (`Some(true)`) or point (`Some(false)`).
    pub decimal_comma: Option<bool>,
}

/// Every way a capture can fail to read. Each message names the file and the place.
#[derive(Debug, Error)]
pub enum CaptureError {
    #[error("{file}: {source}")]
    Io {
        file: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("{file}: line {line}, column {column}: {message}")]
    Csv {
        file: PathBuf,
        line: usize,
        column: usize,
        message: String,
    },
    #[error("{file}: byte {offset}: {message}")]
    Binary {
        file: PathBuf,
        offset: u64,
        message: String,
    },
    #[error("{file}: {message}")]
    Sidecar { file: PathBuf, message: String },
    #[error("{file}: no channel '{wanted}'; the channels are: {available}")]
    NoSuchChannel {
        file: PathBuf,
        wanted: String,
        available: String,
    },
    #[error("{file}: {message}")]
    Invalid { file: PathBuf, message: String },
}

/// Reads a whole capture. The format comes from `opts.raw`, then the file's leading bytes
/// (`RIFF....WAVE`), then its extension, then a sidecar naming a `sample_type` (a raw
/// dump); anything else is tried as delimited text.
/// `--scale` factors and `--skew` shifts are applied here.
pub fn read_capture(path: &Path, opts: &ReadOptions) -> Result<Capture, CaptureError> {
    let mut reader = open_blocks(path, opts)?;
    let mut channels: Vec<Vec<f64>> = reader
        .header()
        .channels
        .iter()
        .map(|_| Vec::new())
        .collect();
    let mut block = Block::default();
    while reader.next_block_into(&mut block)? {
        for (all, part) in channels.iter_mut().zip(&block.channels) {
            all.extend_from_slice(part);
        }
    }
    reader.finish_with(channels)
}

/// Which reader a file needs.
pub(crate) fn detect_format(path: &Path, opts: &ReadOptions) -> Result<Format, CaptureError> {
    refuse_unless_regular(path)?;
    if opts.raw.is_some() {
        return Ok(Format::Raw);
    }
    let mut head = [0u8; 12];
    let mut n = 0;
    let mut f = std::fs::File::open(path).map_err(|source| CaptureError::Io {
        file: path.to_path_buf(),
        source,
    })?;
    while n < head.len() {
        match f.read(&mut head[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(source) => {
                return Err(CaptureError::Io {
                    file: path.to_path_buf(),
                    source,
                })
            }
        }
    }
    let is_wav_ext = path
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("wav") || e.eq_ignore_ascii_case("wave"));
    if n == 12 && &head[..4] == b"RIFF" && &head[8..12] == b"WAVE" {
        return Ok(Format::Wav);
    }
    if n == 0 && is_wav_ext {
        return Err(CaptureError::Binary {
            file: path.to_path_buf(),
            offset: 0,
            message: "the file is empty; expected a RIFF/WAVE header".to_string(),
        });
    }
    if is_wav_ext || (n >= 4 && (&head[..4] == b"RF64" || &head[..4] == b"RIFF")) {
        return Err(CaptureError::Binary {
            file: path.to_path_buf(),
            offset: 0,
            message:
                "expected a RIFF/WAVE header ('RIFF', size, 'WAVE'); 64-bit RF64 files are not read"
                    .to_string(),
        });
    }
    if sidecar::names_sample_type(path) {
        return Ok(Format::Raw);
    }
    Ok(Format::Csv)
}

/// Every reader opens its file more than once (the format's first bytes, the sniffed head,
/// the stream; a long capture once more for each pass). A pipe cannot be read again: its
/// second open waits for a writer that has gone (a hang) and a seek fails, so anything but a
/// regular file is refused here, by name, before it is opened.
fn refuse_unless_regular(path: &Path) -> Result<(), CaptureError> {
    let meta = std::fs::metadata(path).map_err(|source| CaptureError::Io {
        file: path.to_path_buf(),
        source,
    })?;
    if meta.is_file() {
        return Ok(());
    }
    let kind = file_kind(&meta.file_type());
    Err(CaptureError::Invalid {
        file: path.to_path_buf(),
        message: format!(
            "{kind}, not a regular file; a capture is read more than once (its layout first, then its samples), so save it to a file first (for example `cat SOURCE > capture.csv`) and give that"
        ),
    })
}

/// What a file that is not a regular file is, in words.
fn file_kind(t: &std::fs::FileType) -> &'static str {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if t.is_fifo() {
            return "a pipe (FIFO or process substitution)";
        }
        if t.is_char_device() {
            return "a character device";
        }
        if t.is_block_device() {
            return "a block device";
        }
        if t.is_socket() {
            return "a socket";
        }
    }
    if t.is_dir() {
        "a folder"
    } else {
        "a special file"
    }
}

/// Applies `--scale NAME=FACTOR` to the header (units of the ADC range) and returns the
/// factor per channel for the samples. A name that matches no channel is an error.
pub(crate) fn apply_scale_options(
    cap: &mut Capture,
    opts: &ReadOptions,
) -> Result<Vec<f64>, CaptureError> {
    let mut factors = vec![1.0; cap.channels.len()];
    for (name, f) in &opts.scale {
        if !(f.is_finite() && *f != 0.0) {
            return Err(CaptureError::Invalid {
                file: cap.source.clone(),
                message: format!("--scale {name}={f}: expected a finite, non-zero factor"),
            });
        }
        let k =
            channel::find_channel(cap, name).ok_or_else(|| channel::no_such_channel(cap, name))?;
        if let Some(x) = factors.get_mut(k) {
            *x *= f;
        }
        if let Some(ch) = cap.channels.get_mut(k) {
            if let Some(a) = ch.adc.as_mut() {
                let (lo, hi) = (a.min_v * f, a.max_v * f);
                a.min_v = lo.min(hi);
                a.max_v = lo.max(hi);
                a.step_v = a.step_v.map(|s| s * f.abs());
            }
            cap.notes
                .push(format!("'{}' multiplied by {f} (--scale)", ch.name));
        }
    }
    Ok(factors)
}

/// A value rounded to 6 significant digits for notes and messages, so a step computed from
/// printed times shows as `2e-9`, not `1.9999999999999998e-9`.
pub(crate) fn sig(x: f64) -> f64 {
    format!("{x:.5e}").parse().unwrap_or(x)
}
