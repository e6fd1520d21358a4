//! Binary sample data (WAV data chunks, raw dumps) read in runs of whole frames, the next
//! run read while the frames of the current one are decoded, so copying from the file and
//! decoding overlap on two threads.

use std::io::{ErrorKind, Read};

/// Most bytes read in one run.
const MAX_RUN_BYTES: usize = 1 << 20;

/// How the sample data ended before its stated length.
#[derive(Debug)]
pub(crate) enum Ended {
    /// The file ended.
    Short,
    /// Reading failed.
    Failed(std::io::Error),
}

/// Bytes read in one go, and how far they have been handed out.
#[derive(Default)]
struct Run {
    data: Vec<u8>,
    len: usize,
    pos: usize,
    /// The data ended early right after these bytes.
    ended: Option<Ended>,
}

/// A reader of `frame_bytes`-byte frames, positioned at the first sample.
pub(crate) struct FrameRuns<R> {
    reader: R,
    frame_bytes: usize,
    /// Bytes of sample data not yet asked of the reader.
    left: u64,
    cur: Run,
    next: Option<Run>,
    spare: Vec<u8>,
}

impl<R: Read + Send> FrameRuns<R> {
    /// Reads `data_bytes` bytes of frames (what the header states; the file may hold
    /// fewer) from `reader`.
    pub(crate) fn new(reader: R, frame_bytes: usize, data_bytes: u64) -> Self {
        FrameRuns {
            reader,
            frame_bytes: frame_bytes.max(1),
            left: data_bytes,
            cur: Run::default(),
            next: None,
            spare: Vec::new(),
        }
    }

    /// Hands up to `max` whole frames to `decode`, reading the next run meanwhile when
    /// these frames finish the current one: the frames handed and what `decode` returned;
    /// `Ok(None)` after the last frame; how the data ended once the whole frames before
    /// the end have been handed out.
    pub(crate) fn with_frames<T: Send>(
        &mut self,
        max: usize,
        decode: impl FnOnce(&[u8]) -> T + Send,
    ) -> Result<Option<(usize, T)>, Ended> {
        let fb = self.frame_bytes;
        let run_bytes = max.saturating_mul(fb).clamp(fb, MAX_RUN_BYTES.max(fb));
        while (self.cur.len - self.cur.pos) < fb {
            if let Some(e) = self.cur.ended.take() {
                // Nothing after it: the frames left are lost, later calls end here too.
                self.cur.pos = self.cur.len;
                self.left = 0;
                self.next = None;
                return Err(e);
            }
            let next = match self.next.take() {
                Some(r) => r,
                None if self.left == 0 => return Ok(None),
                None => {
                    let buf = std::mem::take(&mut self.spare);
                    read_run(&mut self.reader, buf, run_bytes, &mut self.left)
                }
            };
            self.spare = std::mem::replace(&mut self.cur, next).data;
        }
        let n = max.min((self.cur.len - self.cur.pos) / fb);
        let (start, end) = (self.cur.pos, self.cur.pos + n * fb);
        let spent = self.cur.len - end < fb;
        // Read ahead on the thread pool only from inside it: a thread outside that waits on
        // the pool could wait for ever while the pool's threads wait on it.
        let in_pool = rayon::current_thread_index().is_some();
        let ahead =
            in_pool && spent && self.next.is_none() && self.cur.ended.is_none() && self.left > 0;
        let frames = self.cur.data.get(start..end).unwrap_or(&[]);
        let t = if ahead {
            let (reader, left) = (&mut self.reader, &mut self.left);
            let buf = std::mem::take(&mut self.spare);
            let (t, run) =
                rayon::join(|| decode(frames), || read_run(reader, buf, run_bytes, left));
            self.next = Some(run);
            t
        } else {
            decode(frames)
        };
        self.cur.pos = end;
        Ok(Some((n, t)))
    }
}

/// Reads the next run of up to `size` bytes (never past the stated data) into `buf`.
fn read_run(reader: &mut impl Read, mut buf: Vec<u8>, size: usize, left: &mut u64) -> Run {
    let size = usize::try_from(*left).map_or(size, |l| l.min(size));
    *left -= size as u64;
    if buf.len() < size {
        buf.resize(size, 0);
    }
    let mut got = 0;
    let mut ended = None;
    while let Some(rest) = buf.get_mut(got..size).filter(|r| !r.is_empty()) {
        match reader.read(rest) {
            Ok(0) => {
                ended = Some(Ended::Short);
                break;
            }
            Ok(k) => got += k,
            Err(e) if e.kind() == ErrorKind::Interrupted => {}
            Err(e) => {
                ended = Some(Ended::Failed(e));
                break;
            }
        }
    }
    Run {
        data: buf,
        len: got,
        pos: 0,
        ended,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// All frames handed out, `max` at a time: the bytes, and how the data ended.
    fn drain(data: &[u8], frame: usize, stated: u64, max: usize) -> (Vec<u8>, Option<Ended>) {
        let mut r = FrameRuns::new(data, frame, stated);
        let mut got = Vec::new();
        loop {
            match r.with_frames(max, |b| b.to_vec()) {
                Ok(Some((n, bytes))) => {
                    assert!(n <= max && bytes.len() == n * frame);
                    got.extend(bytes);
                }
                Ok(None) => return (got, None),
                Err(e) => return (got, Some(e)),
            }
        }
    }

    #[test]
    fn every_frame_once_in_order_for_any_request() {
        let data: Vec<u8> = (0..30_000u32).map(|k| (k % 251) as u8).collect();
        for max in [1, 7, 1000, 1 << 20] {
            let (got, end) = drain(&data, 6, 30_000, max);
            assert_eq!(got, data, "max {max}");
            assert!(end.is_none());
        }
        // Data stated shorter than the file: what follows it is not sample data.
        let (got, end) = drain(&data, 6, 600, 64);
        assert_eq!(got, &data[..600]);
        assert!(end.is_none());
    }

    #[test]
    fn a_file_shorter_than_stated_gives_its_whole_frames_then_ends() {
        let data = vec![1u8; 1001];
        let (got, end) = drain(&data, 4, 1 << 40, 64);
        assert_eq!(got.len(), 1000);
        assert!(matches!(end, Some(Ended::Short)));
    }
}
