//! RIFF/WAVE captures (8, 16, 24, 32-bit integer and 32-bit float), scaled to physical units
//! by the sidecar (see [`super::sidecar`]) or left as fractions of full scale for `--scale`
//! to convert. `hound` reads and checks the header; the sample data is read in large runs of
//! bytes and decoded in bulk ([`super::frames`]).

use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use super::frames::{Encoding, FrameStream};
use super::runs::{Ended, FrameRuns};
use super::sidecar::{read_sidecar, Sidecar};
use super::{AdcRange, Capture, CaptureError, Channel, Format, ReadOptions};

/// How one channel's stored samples become physical values: `value = x * gain + offset`,
/// where `x` is the stored integer code or float.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Scaling {
    pub gain: f64,
    pub offset: f64,
}

/// Channels, scalings and time base shared by the WAV and raw readers.
pub(crate) struct Described {
    pub channels: Vec<Channel>,
    pub scalings: Vec<Scaling>,
    pub sample_interval_s: f64,
    pub t0_s: f64,
}

/// Builds channels from a sidecar or default names. `bits` is the integer sample width
/// (`None` for floats): integer codes are fractions of full scale, code / 2^(bits-1).
pub(crate) fn describe_channels(
    file: &Path,
    n_channels: usize,
    bits: Option<u32>,
    header_rate_hz: Option<f64>,
    sidecar: Option<&(PathBuf, Sidecar)>,
    opts: &ReadOptions,
    cap: &mut Capture,
) -> Result<Described, CaptureError> {
    let code_fraction = bits.map_or(1.0, |b| 0.5f64.powi(b.saturating_sub(1) as i32));
    let mut channels = Vec::with_capacity(n_channels.min(1024));
    let mut scalings = Vec::with_capacity(n_channels.min(1024));
    let rails = |vpfs: f64, offset: f64| {
        bits.map(|b| {
            // The highest code is one step below full scale: (2^(b-1) - 1) / 2^(b-1).
            let step = vpfs.abs() * code_fraction;
            let top = offset + vpfs * (1.0 - 0.5f64.powi(b.saturating_sub(1) as i32));
            let bottom = offset - vpfs;
            AdcRange {
                min_v: top.min(bottom),
                max_v: top.max(bottom),
                step_v: Some(step),
            }
        })
    };
    match sidecar {
        Some((sc_path, sc)) => {
            if sc.channels.len() != n_channels {
                return Err(CaptureError::Sidecar {
                    file: sc_path.clone(),
                    message: format!(
                        "describes {} channels but {} has {n_channels}; expected one entry per channel",
                        sc.channels.len(),
                        file.display()
                    ),
                });
            }
            cap.notes.push(format!(
                "channels described by the sidecar {}",
                sc_path.display()
            ));
            for c in &sc.channels {
                channels.push(Channel {
                    name: c.name.clone(),
                    unit: c.unit.clone(),
                    samples: Vec::new(),
                    adc: rails(c.volts_per_full_scale, c.offset_v),
                });
                scalings.push(Scaling {
                    gain: c.volts_per_full_scale * code_fraction,
                    offset: c.offset_v,
                });
                cap.metadata.push((
                    format!("{} volts_per_full_scale", c.name),
                    format!("{} {}", c.volts_per_full_scale, c.unit),
                ));
            }
        }
        None => {
            let says = format!(
                "no sidecar {}: samples are fractions of full scale (-1 to 1), named CH1.. and taken as V; give --scale CH1=VOLTS_PER_FULL_SCALE or write the sidecar",
                super::sidecar::sidecar_path(file).display()
            );
            // Without `--scale` every voltage reported is a fraction of full scale posing as
            // volts (a 60 V spike reads as 0.5 V): that belongs among the warnings `measure`
            // prints, not only in what `inspect` shows.
            if opts.scale.is_empty() {
                cap.warnings.push(says);
            } else {
                cap.notes.push(says);
            }
            for k in 0..n_channels {
                channels.push(Channel {
                    name: format!("CH{}", k + 1),
                    unit: "V".to_string(),
                    samples: Vec::new(),
                    adc: rails(1.0, 0.0),
                });
                scalings.push(Scaling {
                    gain: code_fraction,
                    offset: 0.0,
                });
            }
        }
    }
    let sc = sidecar.map(|s| &s.1);
    let sample_interval_s = match (opts.dt_s, sc.and_then(|s| s.sample_rate_hz), header_rate_hz) {
        (Some(dt), _, _) => {
            cap.notes
                .push(format!("sample interval {dt:e} s from --dt/--sample-rate"));
            dt
        }
        (None, Some(hz), header) => {
            let mut note = format!("sample rate {hz:e} Hz from the sidecar");
            if let Some(h) = header {
                note.push_str(&format!(" (the header says {h} Hz)"));
            }
            cap.notes.push(note);
            1.0 / hz
        }
        (None, None, Some(hz)) if hz > 0.0 => {
            cap.notes
                .push(format!("sample rate {hz} Hz from the header"));
            1.0 / hz
        }
        _ => {
            return Err(CaptureError::Invalid {
                file: file.to_path_buf(),
                message: format!(
                "no sample rate: expected 'sample_rate_hz' in the sidecar {} or --dt/--sample-rate",
                super::sidecar::sidecar_path(file).display()
            ),
            })
        }
    };
    let t0_s = sc.and_then(|s| s.t0_s).unwrap_or(0.0);
    Ok(Described {
        channels,
        scalings,
        sample_interval_s,
        t0_s,
    })
}

/// Streaming reader of a WAV file's frames.
pub(crate) struct WavStream {
    file: PathBuf,
    /// The data chunk, frame by frame.
    runs: FrameRuns<File>,
    /// How the samples are stored; `None` for a layout no decoder reads (refused at the
    /// first sample, where the previous per-sample reader refused it).
    encoding: Option<Encoding>,
    scalings: Vec<Scaling>,
    file_len: u64,
    /// Byte offset of the first sample.
    data_start: u64,
    frames_declared: u64,
    frames_read: u64,
}

/// Where and why the chunks of a WAV header go wrong, found by walking them (each an id,
/// a little-endian length, the bytes, and a pad byte after an odd length: the RIFF layout):
/// for the header reader's failures that name no place ("failed to read enough bytes").
/// `None` when the walk reaches the `data` chunk after a `fmt ` chunk with no fault seen.
fn header_problem(path: &Path) -> Option<(u64, String)> {
    let mut f = File::open(path).ok()?;
    let len = f.metadata().ok()?.len();
    let mut at = 12u64;
    let mut seen: Vec<String> = Vec::new();
    let listed = |seen: &[String]| {
        if seen.is_empty() {
            "no chunk".to_string()
        } else {
            format!("the chunks {}", seen.join(", "))
        }
    };
    loop {
        let mut head = [0u8; 8];
        f.seek(SeekFrom::Start(at)).ok()?;
        if at + 8 > len || f.read_exact(&mut head).is_err() {
            return Some((
                at,
                format!(
                    "the WAV header ends after {} without a 'data' chunk (the file was cut short?)",
                    listed(&seen)
                ),
            ));
        }
        let id = String::from_utf8_lossy(&head[..4]).into_owned();
        let size = u64::from(u32::from_le_bytes([head[4], head[5], head[6], head[7]]));
        if id == "data" {
            if !seen.iter().any(|c| c == "'fmt '") {
                return Some((
                    at,
                    "the 'data' chunk comes before any 'fmt ' chunk; expected the format first"
                        .to_string(),
                ));
            }
            // The walk found nothing wrong up to the samples: a pad byte after an odd chunk
            // is what the header reader does not take.
            return None;
        }
        if id == "fmt " && size < 16 {
            return Some((
                at,
                format!("the 'fmt ' chunk is {size} bytes; expected at least 16"),
            ));
        }
        if at + 8 + size > len {
            return Some((
                at,
                format!(
                    "chunk '{id}' claims {size} bytes, but only {} follow (the file was cut short?)",
                    len - at - 8
                ),
            ));
        }
        if size % 2 == 1 {
            return Some((
                at,
                format!(
                    "chunk '{id}' has an odd length ({size} bytes) and a pad byte after it, which this reader does not take; expected even-length chunks before 'data' (remove the chunk or export again)"
                ),
            ));
        }
        seen.push(format!("'{id}'"));
        at += 8 + size;
    }
}

fn wav_error(file: &Path, offset: u64, e: hound::Error) -> CaptureError {
    CaptureError::Binary {
        file: file.to_path_buf(),
        offset,
        message: match e {
            hound::Error::IoError(io) => format!("cannot read the WAV file: {io}"),
            hound::Error::FormatError(m) => {
                format!("not a valid WAV file ({m}); expected a RIFF/WAVE file")
            }
            hound::Error::Unsupported => "unsupported WAV sample format; expected 8, 16, 24 or 32-bit integer or 32-bit float PCM".to_string(),
            other => format!("cannot read the WAV file: {other}"),
        },
    }
}

/// Opens a WAV file and describes its channels.
pub(crate) fn open(path: &Path, opts: &ReadOptions) -> Result<(Capture, WavStream), CaptureError> {
    let file_len = std::fs::metadata(path)
        .map_err(|source| CaptureError::Io {
            file: path.to_path_buf(),
            source,
        })?
        .len();
    let f = File::open(path).map_err(|source| CaptureError::Io {
        file: path.to_path_buf(),
        source,
    })?;
    let reader = hound::WavReader::new(BufReader::with_capacity(1 << 18, f)).map_err(|e| {
        match header_problem(path) {
            Some((offset, message)) => CaptureError::Binary {
                file: path.to_path_buf(),
                offset,
                message,
            },
            None => wav_error(path, 0, e),
        }
    })?;
    let spec = reader.spec();
    let float = spec.sample_format == hound::SampleFormat::Float;
    if float && spec.bits_per_sample != 32 {
        return Err(wav_error(path, 0, hound::Error::Unsupported));
    }
    if !float && !matches!(spec.bits_per_sample, 1..=32) {
        return Err(wav_error(path, 0, hound::Error::Unsupported));
    }
    if spec.channels == 0 {
        return Err(CaptureError::Binary {
            file: path.to_path_buf(),
            offset: 0,
            message: "the WAV header declares 0 channels; expected at least one".to_string(),
        });
    }
    let mut cap = Capture {
        source: path.to_path_buf(),
        format: Format::Wav,
        sample_interval_s: 0.0,
        t0_s: 0.0,
        channels: Vec::new(),
        metadata: Vec::new(),
        notes: Vec::new(),
        warnings: Vec::new(),
    };
    cap.notes.push(format!(
        "WAV, {} channel(s), {}-bit {}",
        spec.channels,
        spec.bits_per_sample,
        if float { "float" } else { "integer" }
    ));
    let frames_declared = u64::from(reader.duration());
    let n_stored = u64::from(reader.len());
    let mut inner = reader.into_inner();
    let (data_start, data_len) = data_chunk(path, &mut inner)?;
    // The samples are read from the file itself, in runs longer than any buffer would
    // batch: through the header's buffered reader each run was copied twice (once by the
    // kernel into the buffer, once out of it: a fifth of a long WAV's wall time).
    let mut file = inner.into_inner();
    file.seek(SeekFrom::Start(data_start))
        .map_err(|source| CaptureError::Io {
            file: path.to_path_buf(),
            source,
        })?;
    let encoding = encoding_of(spec, data_len, n_stored);
    let frame_bytes = encoding.map_or(1, |e| e.bytes() * usize::from(spec.channels));
    let runs = FrameRuns::new(file, frame_bytes, frames_declared * frame_bytes as u64);
    cap.metadata
        .push(("frames (header)".to_string(), frames_declared.to_string()));
    let sidecar = read_sidecar(path)?;
    if let Some((sc_path, sc)) = &sidecar {
        if sc.sample_type.is_some() {
            return Err(CaptureError::Sidecar {
                file: sc_path.clone(),
                message: format!(
                    "'sample_type' is for raw dumps, but {} is a WAV file whose header gives the sample type; expected no 'sample_type'",
                    path.display()
                ),
            });
        }
    }
    let d = describe_channels(
        path,
        usize::from(spec.channels),
        (!float).then_some(u32::from(spec.bits_per_sample)),
        Some(f64::from(spec.sample_rate)),
        sidecar.as_ref(),
        opts,
        &mut cap,
    )?;
    if float {
        cap.notes
            .push("float samples: no ADC rails known".to_string());
    }
    cap.channels = d.channels;
    cap.sample_interval_s = d.sample_interval_s;
    cap.t0_s = d.t0_s;
    Ok((
        cap,
        WavStream {
            file: path.to_path_buf(),
            runs,
            encoding,
            scalings: d.scalings,
            file_len,
            data_start,
            frames_declared,
            frames_read: 0,
        },
    ))
}

/// Where the sample data starts and how long the header says it is. `hound` has just read
/// the data chunk's header (`data`, length) and stopped before the first sample.
fn data_chunk(path: &Path, r: &mut BufReader<File>) -> Result<(u64, u64), CaptureError> {
    let io = |source| CaptureError::Io {
        file: path.to_path_buf(),
        source,
    };
    let start = r.stream_position().map_err(io)?;
    r.seek_relative(-8).map_err(io)?;
    let mut head = [0u8; 8];
    r.read_exact(&mut head).map_err(io)?;
    let [b0, b1, b2, b3, l0, l1, l2, l3] = head;
    if [b0, b1, b2, b3] != *b"data" {
        return Err(CaptureError::Binary {
            file: path.to_path_buf(),
            offset: start.saturating_sub(8),
            message: "expected the 'data' chunk header before the samples".to_string(),
        });
    }
    Ok((start, u64::from(u32::from_le_bytes([l0, l1, l2, l3]))))
}

/// The decoder for the header's layout: bytes per stored sample (the data length over the
/// samples it holds) and valid bits.
fn encoding_of(spec: hound::WavSpec, data_len: u64, n_stored: u64) -> Option<Encoding> {
    if n_stored == 0 {
        return None;
    }
    let bytes = data_len / n_stored;
    match (spec.sample_format, bytes, spec.bits_per_sample) {
        (hound::SampleFormat::Int, 1, 8) => Some(Encoding::U8),
        (hound::SampleFormat::Int, 2, 16) => Some(Encoding::I16),
        (hound::SampleFormat::Int, 3, 24) => Some(Encoding::I24),
        (hound::SampleFormat::Int, 4, 24) => Some(Encoding::I24In4),
        (hound::SampleFormat::Int, 4, 32) => Some(Encoding::I32),
        (hound::SampleFormat::Float, 4, 32) => Some(Encoding::F32),
        _ => None,
    }
}

impl FrameStream for WavStream {
    fn encoding(&self) -> Option<Encoding> {
        self.encoding
    }

    fn scalings(&self) -> &[Scaling] {
        &self.scalings
    }

    fn frames(
        &mut self,
        max: usize,
        mut handle: impl FnMut(Encoding, &[u8], &[Scaling]) -> Result<(), (usize, f64)> + Send,
    ) -> Result<usize, CaptureError> {
        let want = (max as u64).min(self.frames_declared.saturating_sub(self.frames_read)) as usize;
        if want == 0 {
            return Ok(0);
        }
        let Some(enc) = self.encoding else {
            return Err(wav_error(
                &self.file,
                self.file_len,
                hound::Error::Unsupported,
            ));
        };
        let frame_bytes = (enc.bytes() * self.scalings.len()) as u64;
        let mut done = 0usize;
        while done < want {
            let scalings = &self.scalings;
            let handle = &mut handle;
            let step = self
                .runs
                .with_frames(want - done, |b| handle(enc, b, scalings));
            match step {
                Ok(Some((n, Ok(())))) => done += n,
                Ok(Some((_, Err((k, x))))) => {
                    let frame = self.frames_read + done as u64;
                    return Err(CaptureError::Binary {
                        file: self.file.clone(),
                        offset: self.data_start + frame * frame_bytes + (k * enc.bytes()) as u64,
                        message: format!(
                            "sample is {x}; expected a finite number (NaN and infinity cannot be measured)"
                        ),
                    });
                }
                Ok(None) | Err(Ended::Short) => {
                    self.frames_read += done as u64;
                    return Err(CaptureError::Binary {
                        file: self.file.clone(),
                        offset: self.file_len,
                        message: format!(
                            "the file ends inside the sample data: the header promises {} frames, only {} are complete (the file was cut short)",
                            self.frames_declared, self.frames_read
                        ),
                    });
                }
                Err(Ended::Failed(e)) => {
                    self.frames_read += done as u64;
                    return Err(CaptureError::Io {
                        file: self.file.clone(),
                        source: e,
                    });
                }
            }
        }
        self.frames_read += done as u64;
        Ok(done)
    }
}
