//! Raw little-endian sample dumps (`--raw i8|i16|i32|f32|f64`, or `sample_type` in the
//! sidecar): interleaved frames of one sample per channel, no header.
//!
//! The sidecar (see [`super::sidecar`]) gives the channel count, names, scaling, the
//! sample rate and the sample type. Without a sidecar the dump is one channel `CH1`,
//! samples as fractions of full scale (integers) or as stored (floats), `--raw` must give
//! the type and `--dt`/`--sample-rate` the rate.

use std::fs::File;
use std::io::{BufReader, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use super::frames::{Encoding, FrameStream};
use super::runs::{Ended, FrameRuns};
use super::sidecar::read_sidecar;
use super::wav::{describe_channels, Scaling};
use super::{Capture, CaptureError, Format, RawKind, ReadOptions};

impl RawKind {
    /// Bytes per sample.
    pub fn bytes(self) -> usize {
        match self {
            RawKind::I8 => 1,
            RawKind::I16 => 2,
            RawKind::I32 | RawKind::F32 => 4,
            RawKind::F64 => 8,
        }
    }

    fn int_bits(self) -> Option<u32> {
        match self {
            RawKind::I8 => Some(8),
            RawKind::I16 => Some(16),
            RawKind::I32 => Some(32),
            RawKind::F32 | RawKind::F64 => None,
        }
    }

    fn name(self) -> &'static str {
        match self {
            RawKind::I8 => "i8",
            RawKind::I16 => "i16",
            RawKind::I32 => "i32",
            RawKind::F32 => "f32",
            RawKind::F64 => "f64",
        }
    }

    fn encoding(self) -> Encoding {
        match self {
            RawKind::I8 => Encoding::I8,
            RawKind::I16 => Encoding::I16,
            RawKind::I32 => Encoding::I32,
            RawKind::F32 => Encoding::F32,
            RawKind::F64 => Encoding::F64,
        }
    }
}

/// Streaming reader of a raw dump.
pub(crate) struct RawStream {
    file: PathBuf,
    runs: FrameRuns<BufReader<File>>,
    kind: RawKind,
    scalings: Vec<Scaling>,
    data_offset: u64,
    frames_total: u64,
    frames_read: u64,
}

/// Opens a raw dump and describes its channels.
pub(crate) fn open(path: &Path, opts: &ReadOptions) -> Result<(Capture, RawStream), CaptureError> {
    let io = |source| CaptureError::Io {
        file: path.to_path_buf(),
        source,
    };
    let mut f = File::open(path).map_err(io)?;
    let file_len = f.metadata().map_err(io)?.len();
    let mut cap = Capture {
        source: path.to_path_buf(),
        format: Format::Raw,
        sample_interval_s: 0.0,
        t0_s: 0.0,
        channels: Vec::new(),
        metadata: Vec::new(),
        notes: Vec::new(),
        warnings: Vec::new(),
    };
    let sidecar = read_sidecar(path)?;
    let stated = sidecar.as_ref().and_then(|s| s.1.sample_type);
    let kind = match (opts.raw, stated) {
        (Some(given), Some(side)) if given != side => {
            cap.warnings.push(format!(
                "--raw {} overrides the sidecar's sample_type {}; the samples are read as {}",
                given.name(),
                side.name(),
                given.name()
            ));
            cap.notes
                .push(format!("raw little-endian {} samples (--raw)", given.name()));
            given
        }
        (Some(given), _) => {
            cap.notes
                .push(format!("raw little-endian {} samples (--raw)", given.name()));
            given
        }
        (None, Some(side)) => {
            cap.notes.push(format!(
                "raw little-endian {} samples (sidecar sample_type)",
                side.name()
            ));
            side
        }
        (None, None) => {
            return Err(CaptureError::Invalid {
                file: path.to_path_buf(),
                message: format!(
                    "no sample type: expected 'sample_type' in the sidecar {} or --raw i8|i16|i32|f32|f64",
                    super::sidecar::sidecar_path(path).display()
                ),
            })
        }
    };
    let n_channels = sidecar.as_ref().map_or(1, |s| s.1.channels.len());
    let d = describe_channels(
        path,
        n_channels,
        kind.int_bits(),
        None,
        sidecar.as_ref(),
        opts,
        &mut cap,
    )?;
    let data_offset = sidecar
        .as_ref()
        .and_then(|s| s.1.data_offset_bytes)
        .unwrap_or(0);
    if data_offset > file_len {
        return Err(CaptureError::Binary {
            file: path.to_path_buf(),
            offset: file_len,
            message: format!(
                "the sidecar says the samples start at byte {data_offset}, past the end of the file"
            ),
        });
    }
    let frame_bytes = (kind.bytes() * n_channels) as u64;
    let data_len = file_len - data_offset;
    let frames_total = data_len / frame_bytes;
    let leftover = data_len % frame_bytes;
    if frames_total == 0 {
        return Err(CaptureError::Binary {
            file: path.to_path_buf(),
            offset: data_offset,
            message: format!(
                "no complete frame ({frame_bytes} bytes: {n_channels} channel(s) of {}); expected sample data",
                kind.name()
            ),
        });
    }
    if leftover != 0 {
        cap.warnings.push(format!(
            "byte {}: the file ends inside a frame; the last {leftover} bytes are left out (frames are {frame_bytes} bytes: {n_channels} channel(s) of {})",
            data_offset + frames_total * frame_bytes,
            kind.name()
        ));
    }
    if data_offset > 0 {
        cap.notes
            .push(format!("samples start at byte {data_offset} (sidecar)"));
    }
    f.seek(SeekFrom::Start(data_offset)).map_err(io)?;
    cap.channels = d.channels;
    cap.sample_interval_s = d.sample_interval_s;
    cap.t0_s = d.t0_s;
    Ok((
        cap,
        RawStream {
            file: path.to_path_buf(),
            runs: FrameRuns::new(
                BufReader::with_capacity(1 << 16, f),
                frame_bytes as usize,
                frames_total * frame_bytes,
            ),
            kind,
            scalings: d.scalings,
            data_offset,
            frames_total,
            frames_read: 0,
        },
    ))
}

impl FrameStream for RawStream {
    fn encoding(&self) -> Option<Encoding> {
        Some(self.kind.encoding())
    }

    fn scalings(&self) -> &[Scaling] {
        &self.scalings
    }

    fn frames(
        &mut self,
        max: usize,
        mut handle: impl FnMut(Encoding, &[u8], &[Scaling]) -> Result<(), (usize, f64)> + Send,
    ) -> Result<usize, CaptureError> {
        let sb = self.kind.bytes();
        let frame_bytes = (sb * self.scalings.len()) as u64;
        let want = (max as u64).min(self.frames_total - self.frames_read) as usize;
        let enc = self.kind.encoding();
        let mut done = 0usize;
        while done < want {
            let start = self.data_offset + (self.frames_read + done as u64) * frame_bytes;
            let scalings = &self.scalings;
            let handle = &mut handle;
            let step = self
                .runs
                .with_frames(want - done, |b| handle(enc, b, scalings));
            let cannot_read = |why: String| CaptureError::Binary {
                file: self.file.clone(),
                offset: start,
                message: format!(
                    "cannot read {} bytes of samples: {why}",
                    (want - done) as u64 * frame_bytes
                ),
            };
            match step {
                Ok(Some((n, Ok(())))) => done += n,
                Ok(Some((_, Err((k, x))))) => {
                    return Err(CaptureError::Binary {
                        file: self.file.clone(),
                        offset: start + (k * sb) as u64,
                        message: format!(
                            "sample is {x}; expected a finite number (NaN and infinity cannot be measured)"
                        ),
                    });
                }
                Ok(None) | Err(Ended::Short) => {
                    return Err(cannot_read(
                        "the file ended (it was cut short while being read)".to_string(),
                    ))
                }
                Err(Ended::Failed(e)) => return Err(cannot_read(e.to_string())),
            }
        }
        self.frames_read += done as u64;
        Ok(done)
    }
}
