//! RIFF/WAVE captures (8, 16, 24, 32-bit integer and 32-bit float) through `hound`, scaled
//! to physical units by the sidecar (see [`super::sidecar`]) or left as fractions of full
//! scale for `--scale` to convert.

use std::fs::File;
use std::io::BufReader;
use std::path::{Path, PathBuf};

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
            cap.notes.push(format!(
                "no sidecar {}: samples are fractions of full scale (-1 to 1), named CH1.. and taken as V; give --scale CH1=VOLTS_PER_FULL_SCALE or write the sidecar",
                super::sidecar::sidecar_path(file).display()
            ));
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
    reader: hound::WavReader<BufReader<File>>,
    float: bool,
    scalings: Vec<Scaling>,
    file_len: u64,
    frames_declared: u64,
    frames_read: u64,
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
    let reader = hound::WavReader::new(BufReader::with_capacity(1 << 18, f))
        .map_err(|e| wav_error(path, 0, e))?;
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
            reader,
            float,
            scalings: d.scalings,
            file_len,
            frames_declared,
            frames_read: 0,
        },
    ))
}

impl WavStream {
    /// Appends up to `max` frames; returns how many were read.
    pub(crate) fn fill(&mut self, out: &mut [Vec<f64>], max: usize) -> Result<usize, CaptureError> {
        let nch = self.scalings.len();
        let want = (max as u64).min(self.frames_declared.saturating_sub(self.frames_read)) as usize;
        let mut k = 0usize;
        let total = want * nch;
        let mut failure = None;
        if self.float {
            for s in self.reader.samples::<f32>().take(total) {
                match s {
                    Ok(x) => push(out, &self.scalings, k, f64::from(x)),
                    Err(e) => {
                        failure = Some(e);
                        break;
                    }
                }
                k += 1;
            }
        } else {
            for s in self.reader.samples::<i32>().take(total) {
                match s {
                    Ok(x) => push(out, &self.scalings, k, f64::from(x)),
                    Err(e) => {
                        failure = Some(e);
                        break;
                    }
                }
                k += 1;
            }
        }
        let frames = k / nch.max(1);
        self.frames_read += frames as u64;
        if failure.is_some() || k < total {
            let complete = self.frames_read;
            let message = format!(
                "the file ends inside the sample data: the header promises {} frames, only {complete} are complete (the file was cut short)",
                self.frames_declared
            );
            return Err(match failure {
                // hound reports a short read as `Other` with this text.
                Some(hound::Error::IoError(e))
                    if e.kind() != std::io::ErrorKind::UnexpectedEof
                        && !e.to_string().contains("enough bytes") =>
                {
                    CaptureError::Io {
                        file: self.file.clone(),
                        source: e,
                    }
                }
                Some(e @ (hound::Error::FormatError(_) | hound::Error::Unsupported)) => {
                    wav_error(&self.file, self.file_len, e)
                }
                _ => CaptureError::Binary {
                    file: self.file.clone(),
                    offset: self.file_len,
                    message,
                },
            });
        }
        Ok(frames)
    }
}

#[inline]
fn push(out: &mut [Vec<f64>], scalings: &[Scaling], k: usize, x: f64) {
    let ch = k % scalings.len().max(1);
    if let (Some(v), Some(s)) = (out.get_mut(ch), scalings.get(ch)) {
        v.push(x * s.gain + s.offset);
    }
}
