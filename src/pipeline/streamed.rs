//! Reading a capture whole when it is short, and measuring it as it streams when it is
//! long, so memory never grows with the capture's length.
//!
//! The file is read block by block. Up to [`IN_MEMORY_SAMPLES`] samples per channel it is
//! kept whole and measured as before. Beyond that only the switch-node and current channels
//! go on: a [`Surveyor`] looks at every sample once, and the later passes of
//! [`measure_stream`] read the samples again, from a spill file for delimited text
//! (parsing text twice would cost more than writing and reading the numbers; the spill
//! keeps most samples as short integer codes, see [`super::spill`]), or from the file
//! itself for WAV and raw dumps (decoding binary samples again is as cheap as reading a
//! spill).

use std::path::Path;

use super::spill::{SpillReader, SpillWriter, RECORD_SAMPLES};
use super::{capture_doc, fit_plot, model_context, pick_channels, Settings, SKETCH_POINTS};
use crate::capture::{
    self, AdcRange, Block, BlockReader, Capture, Channel, CodedChannel, Format, DEFAULT_BLOCK_LEN,
};
use crate::document::CaptureDoc;
use crate::measure::stream::{
    measure_stream, BlockSink, Observer, Replay, Samples, StreamInfo, StreamLimits, Surveyor,
    WindowView,
};
use crate::measure::MeasureError;
use crate::model::{self, EventFit};
use crate::report::sketch::EnvelopeBuilder;
use crate::report::{EventWave, FitPlot, TraceSketch};

/// Longest capture (samples per channel) held whole in memory: 8 MiB per channel.
pub const IN_MEMORY_SAMPLES: usize = 1 << 20;

/// What [`load`] gives.
pub enum Loaded {
    /// The capture, short enough to hold.
    Whole(Capture),
    /// The capture was long and is already measured.
    Measured(Box<CaptureDoc>, Option<TraceSketch>),
}

fn interrupted(path: &Path) -> String {
    format!("{}: interrupted", path.display())
}

/// The next block of the first read, unless the run was asked to stop.
fn next_block(
    path: &Path,
    reader: &mut BlockReader,
    block: &mut Block,
    settings: &Settings,
) -> Result<bool, String> {
    if settings.stopped() {
        return Err(interrupted(path));
    }
    reader.next_block_into(block).map_err(|e| e.to_string())
}

/// The next samples of channel `ch` as stored codes, unless the run was asked to stop (see
/// [`BlockReader::next_coded`]).
fn next_coded(
    path: &Path,
    reader: &mut BlockReader,
    ch: usize,
    look: &mut (dyn FnMut(&CodedChannel) + Send),
    settings: &Settings,
) -> Result<Option<usize>, String> {
    if settings.stopped() {
        return Err(interrupted(path));
    }
    reader.next_coded(ch, look).map_err(|e| e.to_string())
}

/// The index of the one channel of the capture called `name`.
fn only_channel_named(header: &Capture, name: &str) -> Option<usize> {
    let mut named = header
        .channels
        .iter()
        .enumerate()
        .filter(|(_, c)| c.name == name);
    match (named.next(), named.next()) {
        (Some((k, _)), None) => Some(k),
        _ => None,
    }
}

/// Reads `path`; a long capture is measured on the way (see the module notes).
pub fn load(path: &Path, settings: &Settings, sketch: bool) -> Result<Loaded, String> {
    let mut reader = capture::open_blocks(path, &settings.read).map_err(|e| e.to_string())?;
    let mut channels: Vec<Vec<f64>> = vec![Vec::new(); reader.header().channels.len()];
    let mut block = Block::default();
    let mut held = 0usize;
    let limit = settings.stream_above.unwrap_or(IN_MEMORY_SAMPLES);
    while next_block(path, &mut reader, &mut block, settings)? {
        if held == 0 && block.len() >= DEFAULT_BLOCK_LEN {
            // A capture of more than one block: room for as much as is ever held, made
            // once. Grown by doubling, the vectors were copied a dozen times and their
            // pages faulted in twice, with the parsing threads waiting meanwhile (a
            // tenth of a 10 M-sample CSV's first million samples). Pages never written
            // are never resident.
            let room = limit.min(IN_MEMORY_SAMPLES) + block.len();
            for all in &mut channels {
                all.reserve_exact(room);
            }
        }
        held += block.len();
        for (all, part) in channels.iter_mut().zip(&block.channels) {
            all.extend_from_slice(part);
        }
        if held > settings.stream_above.unwrap_or(IN_MEMORY_SAMPLES) {
            let (doc, sk) = measure_streaming(path, reader, channels, settings, sketch)?;
            return Ok(Loaded::Measured(Box::new(doc), sk));
        }
    }
    let cap = reader.finish_with(channels).map_err(|e| e.to_string())?;
    Ok(Loaded::Whole(cap))
}

/// The switch-node and current channels of one block, picked as for a whole capture.
fn pick_block(
    header: &Capture,
    channels: Vec<Vec<f64>>,
    settings: &Settings,
) -> Result<(Channel, Option<Channel>), String> {
    let mut cap = Capture {
        source: header.source.clone(),
        format: header.format,
        sample_interval_s: header.sample_interval_s,
        t0_s: header.t0_s,
        channels: header.channels.clone(),
        metadata: Vec::new(),
        notes: Vec::new(),
        warnings: Vec::new(),
    };
    for (ch, samples) in cap.channels.iter_mut().zip(channels) {
        ch.samples = samples;
    }
    pick_channels(&mut cap, settings)
}

/// What to do when the temporary copy cannot be made, said with the error.
const SPILL_ADVICE: &str =
    "it takes 2 to 8 bytes per sample of each channel measured; point TMPDIR at a folder with room";

/// A new spill file, or an error saying where it could not be made and what to do.
fn new_spill(path: &Path) -> Result<SpillWriter, String> {
    let file = tempfile::tempfile().map_err(|e| {
        format!(
            "{}: the capture is long and is measured from a temporary copy of its samples, which could not be created in {}: {e} ({SPILL_ADVICE})",
            path.display(),
            std::env::temp_dir().display()
        )
    })?;
    Ok(SpillWriter::new(file))
}

/// Where the later passes read the samples from.
enum Source<'a> {
    /// Spill files of the voltage and (if any) current samples.
    Spilled {
        path: &'a Path,
        v: SpillReader,
        i: Option<SpillReader>,
    },
    /// The capture file itself, opened again for each pass.
    Reopened {
        path: &'a Path,
        header: &'a Capture,
        settings: &'a Settings,
    },
}

impl Replay for Source<'_> {
    fn replay(&mut self, each: &mut BlockSink) -> Result<bool, String> {
        match self {
            Source::Spilled { path, v, i } => {
                const BLOCK: usize = 1 << 16;
                let fail = |e: std::io::Error| {
                    format!(
                        "{}: reading the temporary copy of the samples: {e}",
                        path.display()
                    )
                };
                v.rewind().map_err(fail)?;
                if let Some(r) = i.as_mut() {
                    r.rewind().map_err(fail)?;
                }
                let mut block = Samples {
                    v: Vec::with_capacity(BLOCK + RECORD_SAMPLES),
                    i: i.is_some()
                        .then(|| Vec::with_capacity(BLOCK + RECORD_SAMPLES)),
                };
                read_in_turn(
                    &mut block,
                    |b: &mut &mut Samples| {
                        let n = v.read_into(&mut b.v, BLOCK).map_err(fail)?;
                        if let (Some(r), Some(ib)) = (i.as_mut(), b.i.as_mut()) {
                            // Both copies were written in the same blocks, so their
                            // records end at the same samples.
                            if r.read_into(ib, n).map_err(fail)? != n {
                                return Err(fail(std::io::Error::new(
                                    std::io::ErrorKind::InvalidData,
                                    "the current's copy is out of step with the voltage's",
                                )));
                            }
                        }
                        Ok(n > 0)
                    },
                    |b| Ok(each(b)),
                )
            }
            Source::Reopened {
                path,
                header,
                settings,
            } => {
                let mut reader =
                    capture::open_blocks(path, &settings.read).map_err(|e| e.to_string())?;
                read_in_turn(
                    Block::default(),
                    |block: &mut Block| reader.next_block_into(block).map_err(|e| e.to_string()),
                    |block| {
                        let channels = std::mem::take(&mut block.channels);
                        let (sig, cur) = pick_block(header, channels, settings)?;
                        let mut samples = Samples {
                            v: sig.samples,
                            i: cur.map(|c| c.samples),
                        };
                        let go_on = each(&mut samples);
                        // The buffers (the block's, or those left in their place) go back
                        // to the reader.
                        block.channels = std::iter::once(samples.v).chain(samples.i).collect();
                        Ok(go_on)
                    },
                )
            }
        }
    }
}

/// Runs `fill` then `use_` on one buffer, block after block, on this thread; `Ok(false)`
/// from `fill` is the end of the samples, from `use_` a stop (then the result is
/// `Ok(false)`). Reading ahead on a thread of its own was tried and was slower here: on
/// two cores the hand-over of every block (a wake-up, the block moving between caches)
/// cost more than the overlap saved (100 M-sample WAV 0.45 -> 0.39 s in turn; the spill
/// of a 10 M-sample CSV the same either way). The readers still read the file ahead on
/// the thread pool when the pass runs inside it.
fn read_in_turn<B>(
    mut buffer: B,
    mut fill: impl FnMut(&mut B) -> Result<bool, String>,
    mut use_: impl FnMut(&mut B) -> Result<bool, String>,
) -> Result<bool, String> {
    while fill(&mut buffer)? {
        if !use_(&mut buffer)? {
            return Ok(false);
        }
    }
    Ok(true)
}

/// Fits and plots made while the final pass has each window at hand.
struct FileWork<'a> {
    file: String,
    settings: &'a Settings,
    adc: Option<AdcRange>,
    dt_s: f64,
    t0_s: f64,
    sketch: bool,
    envelope: std::sync::Mutex<Option<EnvelopeBuilder>>,
    n: usize,
    fits: Vec<Option<EventFit>>,
    waves: Vec<EventWave>,
    /// Index, switch stress and fit plot of the worst fitted event so far.
    worst: Option<(usize, f64, FitPlot)>,
}

/// What one window gives: its fit, the event's stress with the fit applied, its wave and
/// fit plot for the report.
type WindowWork = (Option<EventFit>, f64, Option<EventWave>, Option<FitPlot>);

impl Observer for FileWork<'_> {
    type Out = WindowWork;

    fn block(&self, v: &[f64]) {
        let mut envelope = self.envelope.lock().unwrap_or_else(|p| p.into_inner());
        if let Some(e) = envelope.as_mut() {
            e.push(v);
        }
    }

    fn window(&self, w: &WindowView) -> WindowWork {
        let ctx = model_context(w.event.polarity, w.event.v_on, self.adc, self.settings);
        let t_start_s = self.t0_s + w.range.0 as f64 * self.dt_s;
        let fit = (!self.settings.no_fit)
            .then(|| model::fit_event(w.v, self.dt_s, t_start_s, w.event, &ctx))
            .flatten();
        let mut event = w.event.clone();
        if let Some(f) = &fit {
            model::apply_fit(&mut event, f, &ctx);
        }
        let wave = self
            .sketch
            .then(|| EventWave::of_window(&event, w.v, w.range.0, w.range, self.dt_s, self.t0_s));
        let plot = match (&fit, self.sketch) {
            (Some(f), true) => Some(fit_plot(
                &self.file, &event, w.range, f, w.v, w.range.0, self.adc, self.dt_s, self.t0_s,
            )),
            _ => None,
        };
        (fit, event.switch_stress_v, wave, plot)
    }

    fn keep(&mut self, index: usize, (fit, stress, wave, plot): WindowWork) {
        if self.fits.len() <= index {
            self.fits.resize(index + 1, None);
        }
        if fit.is_some() && self.worst.as_ref().is_none_or(|w| stress > w.1) {
            self.worst = plot.map(|p| (index, stress, p));
        }
        self.fits[index] = fit;
        self.waves.extend(wave);
    }

    fn restart(&mut self) {
        *self.envelope.get_mut().unwrap_or_else(|p| p.into_inner()) = self
            .sketch
            .then(|| EnvelopeBuilder::new(self.n, SKETCH_POINTS, self.dt_s, self.t0_s));
        self.fits.clear();
        self.waves.clear();
        self.worst = None;
    }
}

/// Goes on reading a long capture (whose first blocks are `held`) while surveying it, then
/// measures it in further passes.
fn measure_streaming(
    path: &Path,
    mut reader: BlockReader,
    held: Vec<Vec<f64>>,
    settings: &Settings,
    sketch: bool,
) -> Result<(CaptureDoc, Option<TraceSketch>), String> {
    let header = reader.header().clone();
    let spill = header.format == Format::Csv;
    let mut survey = Surveyor::new(StreamLimits::default());
    let (mut spill_v, mut spill_i) = (None, None);
    let io = |e: std::io::Error| {
        format!(
            "{}: writing the temporary copy of the samples in {}: {e} ({SPILL_ADVICE})",
            path.display(),
            std::env::temp_dir().display()
        )
    };
    let (signal, current) = pick_block(&header, held, settings)?;
    let signal_name = signal.name.clone();
    let current_name = current.as_ref().map(|c| c.name.clone());
    if spill {
        spill_v = Some(new_spill(path)?);
        if current.is_some() {
            spill_i = Some(new_spill(path)?);
        }
    }
    let mut feed =
        |survey: &mut Surveyor, sig: &Channel, cur: Option<&Channel>| -> Result<(), String> {
            let (spill_v, spill_i) = (&mut spill_v, &mut spill_i);
            let mut spill = move || -> Result<(), String> {
                if let Some(s) = spill_v.as_mut() {
                    s.write(&sig.samples).map_err(io)?;
                }
                if let (Some(s), Some(c)) = (spill_i.as_mut(), cur) {
                    s.write(&c.samples).map_err(io)?;
                }
                Ok(())
            };
            if sig.samples.len() > DEFAULT_BLOCK_LEN {
                // The samples held before the stream began (a million or so): surveyed and
                // spilled side by side, where one core did both while the other read a
                // single block and waited (a tenth of a 10 M-sample CSV's wall time).
                rayon::join(|| survey.push(&sig.samples), spill).1
            } else {
                survey.push(&sig.samples);
                spill()
            }
        };
    // Delimited text: each block is surveyed and spilled while the next one is read and
    // parsed, so the two halves keep both cores busy instead of taking turns. Binary
    // samples decode faster than a block can be handed to another core: surveyed in turn
    // on this thread, the block is still in this core's cache and no thread waits to be
    // woken for each block (the 100 M-sample WAV went from 0.55 to 0.45 s; text measured
    // 8 % slower in turn).
    let mut fed = Some((signal, current));
    let mut block = Block::default();
    // Binary samples read again from the file: the rest of this read only surveys the
    // signal, and takes it from the stored codes (the range from the smallest and largest
    // code, and only the samples kept converted). Decoding every sample of every channel
    // was two thirds of the first read of a long 16-bit WAV.
    let coded = (!spill)
        .then(|| only_channel_named(&header, &signal_name))
        .flatten();
    let mut read_all = false;
    if let Some(ch) = coded {
        if let Some((sig, cur)) = fed.take() {
            feed(&mut survey, &sig, cur.as_ref())?;
        }
        let mut look = |c: &CodedChannel| c.hand_to(&mut survey);
        while let Some(n) = next_coded(path, &mut reader, ch, &mut look, settings)? {
            if n == 0 {
                read_all = true;
                break;
            }
        }
    }
    while !read_all {
        let mut read = || next_block(path, &mut reader, &mut block, settings);
        let mut take = || match fed.take() {
            Some((sig, cur)) => feed(&mut survey, &sig, cur.as_ref()),
            None => Ok(()),
        };
        let (more, done) = if spill {
            rayon::join(read, take)
        } else {
            let done = take();
            (read(), done)
        };
        done?;
        read_all = !more?;
        if !read_all {
            let channels = std::mem::take(&mut block.channels);
            fed = Some(pick_block(&header, channels, settings)?);
        }
    }
    let finished = reader.finish();
    let n = survey.len();
    // The digitiser range seen over the whole record (delimited text learns it by reading).
    let adc = finished
        .channels
        .iter()
        .find(|c| c.name == signal_name)
        .and_then(|c| c.adc);
    let info = StreamInfo {
        dt_s: finished.sample_interval_s,
        t0_s: finished.t0_s,
        adc,
    };
    let mut source = match spill_v {
        Some(s) => Source::Spilled {
            path,
            v: s.finish().map_err(io)?,
            i: spill_i.map(SpillWriter::finish).transpose().map_err(io)?,
        },
        None => Source::Reopened {
            path,
            header: &header,
            settings,
        },
    };
    let file = path.display().to_string();
    let mut work = FileWork {
        file: file.clone(),
        settings,
        adc,
        dt_s: info.dt_s,
        t0_s: info.t0_s,
        sketch,
        envelope: Default::default(),
        n,
        fits: Vec::new(),
        waves: Vec::new(),
        worst: None,
    };
    let mut m = measure_stream(
        &mut source,
        survey,
        info,
        &settings.measure,
        &mut work,
        &|| settings.stopped(),
    )
    .map_err(|e| match e {
        MeasureError::Interrupted => interrupted(path),
        MeasureError::Read(msg) => msg,
        e => format!("{}: channel {signal_name}: {e}", path.display()),
    })?;
    for (event, fit) in m.events.iter_mut().zip(&work.fits) {
        if let Some(f) = fit {
            let ctx = model_context(event.polarity, event.v_on, adc, settings);
            model::apply_fit(event, f, &ctx);
        }
    }
    let mut warnings = finished.warnings.clone();
    warnings.extend(m.warnings.iter().cloned());
    let sketch = sketch.then(|| {
        let envelope = work
            .envelope
            .get_mut()
            .unwrap_or_else(|p| p.into_inner())
            .take()
            .map(EnvelopeBuilder::finish);
        let mut sk = TraceSketch::assemble(
            &file,
            info.dt_s,
            info.t0_s,
            n,
            envelope.unwrap_or_default(),
            std::mem::take(&mut work.waves),
            &m.events,
        );
        sk.label = settings.label.clone();
        sk.fit = work.worst.take().map(|(_, _, p)| p);
        sk
    });
    let doc = capture_doc(
        path,
        settings,
        &finished,
        n,
        signal_name,
        current_name,
        m,
        warnings,
    );
    Ok((doc, sketch))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A spill of `n` voltages `k` and currents `-k` (k = 0, 1, ...).
    fn spilled(path: &Path, n: usize) -> Source<'_> {
        let (mut v, mut i) = (new_spill(path).unwrap(), new_spill(path).unwrap());
        let all: Vec<f64> = (0..n).map(|k| k as f64).collect();
        let neg: Vec<f64> = all.iter().map(|x| -x).collect();
        for (a, b) in all.chunks(10_000).zip(neg.chunks(10_000)) {
            v.write(a).unwrap();
            i.write(b).unwrap();
        }
        Source::Spilled {
            path,
            v: v.finish().unwrap(),
            i: Some(i.finish().unwrap()),
        }
    }

    /// A read that fails part way is the pass's error, after the blocks read before it;
    /// a use that fails ends the pass with its error.
    #[test]
    fn a_failed_read_is_an_error_not_an_end() {
        let mut calls = 0;
        let mut used = Vec::new();
        let r = read_in_turn(
            0usize,
            |b: &mut usize| {
                calls += 1;
                *b = calls;
                if calls == 4 {
                    Err("disk gone".to_string())
                } else {
                    Ok(true)
                }
            },
            |b| {
                used.push(*b);
                Ok(true)
            },
        );
        assert_eq!(r, Err("disk gone".to_string()));
        assert_eq!(used, [1, 2, 3]);
        let r = read_in_turn(0usize, |_| Ok(true), |_| Err("bad block".to_string()));
        assert_eq!(r, Err("bad block".to_string()));
    }

    /// The spill comes back whole and in order on every pass; a sink that stops early
    /// ends the pass at once.
    #[test]
    fn a_spill_replays_whole_and_stops_when_asked() {
        let path = Path::new("long.csv");
        let n = 3 * (1 << 16) + 1234;
        let mut src = spilled(path, n);
        for _ in 0..2 {
            let (mut seen, mut ok) = (0usize, true);
            let done = src
                .replay(&mut |b| {
                    let (v, i) = (&b.v, b.i.as_deref().expect("the current channel"));
                    ok &= v.len() == i.len();
                    for (k, (&a, &b)) in v.iter().zip(i).enumerate() {
                        ok &= a == (seen + k) as f64 && b == -a;
                    }
                    seen += v.len();
                    true
                })
                .unwrap();
            assert!(done && ok);
            assert_eq!(seen, n);
        }
        let mut blocks = 0;
        let done = src
            .replay(&mut |_| {
                blocks += 1;
                blocks < 2
            })
            .unwrap();
        assert!(!done);
        assert_eq!(blocks, 2);
    }
}
