//! Streaming: a capture of any length read in blocks of a bounded number of samples per
//! channel, so later stages can work in flat memory. [`super::read_capture`] is built on it.

use std::path::Path;

use super::adc::RailWatch;
use super::csv::CsvStream;
use super::frames::{CodedChannel, FrameStream};
use super::raw::RawStream;
use super::skew::{skews_of, Skew};
use super::wav::WavStream;
use super::{csv, raw, wav, Capture, CaptureError, Format, ReadOptions};

/// Samples per channel in a block unless [`BlockReader::set_block_len`] says otherwise.
pub const DEFAULT_BLOCK_LEN: usize = 1 << 16;

/// Consecutive samples of every channel.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Block {
    /// Index of the block's first sample in the capture (time `t0_s + index * dt`).
    pub first_sample: u64,
    /// One vector per channel, in the order of [`Capture::channels`], all the same length.
    pub channels: Vec<Vec<f64>>,
}

impl Block {
    /// Samples per channel in this block.
    pub fn len(&self) -> usize {
        self.channels.first().map_or(0, Vec::len)
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

enum Source {
    Csv(Box<CsvStream>),
    Wav(Box<WavStream>),
    Raw(Box<RawStream>),
}

/// Reads a capture block by block. The header describes the capture (channels with empty
/// samples); rails seen in CSV data and warnings found while reading are added by
/// [`BlockReader::finish`].
pub struct BlockReader {
    header: Capture,
    source: Source,
    block_len: usize,
    next_sample: u64,
    /// `--scale` factor per channel.
    factors: Vec<f64>,
    /// Extremes seen per channel (CSV only; WAV and raw rails come from full scale).
    rails: Option<Vec<RailWatch>>,
    record_length: Option<u64>,
    /// `--skew`, when a channel moves.
    skew: Option<Box<Skewing>>,
    done: bool,
}

/// The `--skew` stages of a capture's channels and the samples they have settled but not
/// yet handed out: a stage holds back as many samples as it looks ahead, so the channels
/// are handed out together, as far as every one of them has got.
struct Skewing {
    /// One per channel; `None` for a channel that does not move.
    stages: Vec<Option<Skew>>,
    settled: Vec<Vec<f64>>,
    /// The samples as read, before the stages.
    read: Vec<Vec<f64>>,
    /// The file has no more samples (every stage has finished).
    ended: bool,
}

impl Skewing {
    fn new(shifts: &[f64]) -> Self {
        Skewing {
            stages: shifts
                .iter()
                .map(|&s| (s != 0.0).then(|| Skew::new(s)))
                .collect(),
            settled: vec![Vec::new(); shifts.len()],
            read: vec![Vec::new(); shifts.len()],
            ended: false,
        }
    }

    /// Passes the samples just read through the stages (all of them at the record's end).
    fn take_read(&mut self) {
        let ended = self.ended;
        for ((stage, read), settled) in self
            .stages
            .iter_mut()
            .zip(&self.read)
            .zip(&mut self.settled)
        {
            match stage {
                Some(s) => {
                    s.push(read, settled);
                    if ended {
                        s.finish(settled);
                    }
                }
                None => settled.extend_from_slice(read),
            }
        }
    }

    /// Moves up to `most` samples of every channel, as many as all have settled, into
    /// `out`; how many.
    fn hand_out(&mut self, most: usize, out: &mut [Vec<f64>]) -> usize {
        let m = self
            .settled
            .iter()
            .map(Vec::len)
            .min()
            .unwrap_or(0)
            .min(most);
        if m > 0 {
            for (settled, o) in self.settled.iter_mut().zip(out) {
                o.extend_from_slice(&settled[..m]);
                settled.drain(..m);
            }
        }
        m
    }
}

/// Opens a capture for streaming. The format comes from `opts.raw`, then the file's leading
/// bytes (`RIFF....WAVE`), then its extension, then a sidecar naming a `sample_type` (a raw
/// dump); anything else is read as delimited text.
pub fn open_blocks(path: &Path, opts: &ReadOptions) -> Result<BlockReader, CaptureError> {
    let (mut header, source, record_length) = match super::detect_format(path, opts)? {
        Format::Raw => {
            let (c, s) = raw::open(path, opts)?;
            (c, Source::Raw(Box::new(s)), None)
        }
        Format::Wav => {
            let (c, s) = wav::open(path, opts)?;
            (c, Source::Wav(Box::new(s)), None)
        }
        Format::Csv => {
            let (c, s, n) = csv::open(path, opts)?;
            (c, Source::Csv(Box::new(s)), n)
        }
    };
    let factors = super::apply_scale_options(&mut header, opts)?;
    let skew = skews_of(&mut header, opts)?.map(|shifts| Box::new(Skewing::new(&shifts)));
    let rails = matches!(source, Source::Csv(_)).then(|| {
        header
            .channels
            .iter()
            .map(|_| RailWatch::default())
            .collect()
    });
    Ok(BlockReader {
        header,
        source,
        block_len: DEFAULT_BLOCK_LEN,
        next_sample: 0,
        factors,
        rails,
        record_length,
        skew,
        done: false,
    })
}

impl BlockReader {
    /// What the capture is: format, time base, channels (with empty samples), notes.
    pub fn header(&self) -> &Capture {
        &self.header
    }

    /// Sets the most samples per channel a block holds (at least 1).
    pub fn set_block_len(&mut self, n: usize) {
        self.block_len = n.max(1);
    }

    /// The next block, or `None` after the last sample.
    pub fn next_block(&mut self) -> Result<Option<Block>, CaptureError> {
        let mut b = Block::default();
        Ok(self.next_block_into(&mut b)?.then_some(b))
    }

    /// Fills `block` with the next samples, reusing its buffers; `false` after the last.
    pub fn next_block_into(&mut self, block: &mut Block) -> Result<bool, CaptureError> {
        let nch = self.header.channels.len();
        block.channels.resize_with(nch, Vec::new);
        for c in &mut block.channels {
            c.clear();
        }
        block.first_sample = self.next_sample;
        if self.done {
            return Ok(false);
        }
        let Some(mut sk) = self.skew.take() else {
            let n = self.read_samples(&mut block.channels)?;
            self.next_sample += n as u64;
            return Ok(n > 0);
        };
        let got = loop {
            let m = sk.hand_out(self.block_len, &mut block.channels);
            if m > 0 || sk.ended {
                break m;
            }
            for c in &mut sk.read {
                c.clear();
            }
            let mut read = std::mem::take(&mut sk.read);
            let n = self.read_samples(&mut read);
            sk.read = read;
            sk.ended = n? == 0;
            sk.take_read();
        };
        self.skew = Some(sk);
        self.done = got == 0;
        self.next_sample += got as u64;
        Ok(got > 0)
    }

    /// Hands channel `ch`'s next samples (up to a block) to `look` as stored codes, with
    /// `--scale` applied as a block would have it: for a look at every sample that needs
    /// only a few of them as numbers (the survey of a long capture's first read). How
    /// many, 0 at the end; `None` when this capture cannot be read so (text, float
    /// samples, `--skew`), and [`BlockReader::next_block_into`] reads it instead.
    pub fn next_coded(
        &mut self,
        ch: usize,
        look: &mut (dyn FnMut(&CodedChannel) + Send),
    ) -> Result<Option<usize>, CaptureError> {
        if self.skew.is_some() {
            return Ok(None);
        }
        if self.done {
            return Ok(Some(0));
        }
        let factor = self.factors.get(ch).copied().unwrap_or(1.0);
        let r = match &mut self.source {
            Source::Csv(_) => return Ok(None),
            Source::Wav(s) => s.fill_coded(ch, factor, self.block_len, look),
            Source::Raw(s) => s.fill_coded(ch, factor, self.block_len, look),
        };
        match r {
            Err(e) => {
                self.done = true;
                Err(e)
            }
            Ok(Some(n)) => {
                self.done = n == 0;
                self.next_sample += n as u64;
                Ok(Some(n))
            }
            Ok(None) => Ok(None),
        }
    }

    /// Reads the next samples as the file holds them, `--scale` applied and rails watched,
    /// into `channels` (cleared); how many per channel, 0 at the end (then `done` is set,
    /// as it is at an error).
    fn read_samples(&mut self, channels: &mut [Vec<f64>]) -> Result<usize, CaptureError> {
        let r = match &mut self.source {
            Source::Csv(s) => s.fill(channels, self.block_len),
            Source::Wav(s) => s.fill(channels, self.block_len),
            Source::Raw(s) => s.fill(channels, self.block_len),
        };
        let n = match r {
            Ok(n) => n,
            Err(e) => {
                self.done = true;
                return Err(e);
            }
        };
        if n == 0 {
            self.done = true;
            return Ok(0);
        }
        for (k, c) in channels.iter_mut().enumerate() {
            let f = self.factors.get(k).copied().unwrap_or(1.0);
            if f != 1.0 {
                c.iter_mut().for_each(|x| *x *= f);
            }
            if let Some(w) = self.rails.as_mut().and_then(|r| r.get_mut(k)) {
                w.observe(c);
            }
        }
        Ok(n)
    }

    /// Samples per channel read so far.
    pub fn samples_read(&self) -> u64 {
        self.next_sample
    }

    /// The capture after the last block: [`BlockReader::finish`] with `channels` as the
    /// samples (leave them empty when only the header is wanted) and the count read noted;
    /// an error when the file held no sample at all.
    pub fn finish_with(self, channels: Vec<Vec<f64>>) -> Result<Capture, CaptureError> {
        let n = self.next_sample;
        let mut cap = self.finish();
        for (ch, samples) in cap.channels.iter_mut().zip(channels) {
            ch.samples = samples;
        }
        if n == 0 {
            return Err(CaptureError::Invalid {
                file: cap.source.clone(),
                message: "no samples; expected at least one sample per channel".to_string(),
            });
        }
        cap.notes.push(format!("{n} samples per channel"));
        Ok(cap)
    }

    /// The header completed with what reading found: ADC rails and code step seen in CSV
    /// data, time-step warnings, a record length that does not match.
    pub fn finish(self) -> Capture {
        let mut cap = self.header;
        if let Source::Csv(s) = &self.source {
            cap.warnings.extend(s.end_warnings());
        }
        if let Some(n) = self.record_length {
            if n != self.next_sample && self.done {
                cap.warnings.push(format!(
                    "the file states a record length of {n}, but {} rows were read",
                    self.next_sample
                ));
            }
        }
        if let Some(rails) = self.rails {
            for (ch, w) in cap.channels.iter_mut().zip(rails) {
                if let Some((range, note)) = w.conclude(&ch.name, &ch.unit) {
                    ch.adc = Some(range);
                    cap.notes.push(note);
                }
            }
        }
        cap
    }
}
