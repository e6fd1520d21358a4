//! The temporary copy of a long text capture's samples, kept small.
//!
//! A long delimited-text capture is measured from a copy of its parsed samples (parsing the
//! text again would cost more). Written as plain f64 values the copy was 8 bytes a sample,
//! and copying those bytes into the kernel's page cache took a quarter of the CPU time of a
//! 10 M-sample CSV. But numbers printed as decimal text are, after parsing, exactly an
//! integer over a power of ten (`24.3137` is 243137 / 10^4, correctly rounded), so most
//! stretches of samples are stored as integer codes: 2-byte differences between
//! neighbouring codes where the signal moves little, 4-byte codes where it jumps, and the
//! f64 values themselves where a value is no such quotient (more digits, `-0`, `NaN`).
//!
//! Every code is checked on the way in: a value is stored as a code only when decoding the
//! code gives back the same 64 bits, so the copy is exact by construction whatever printed
//! the numbers.
//!
//! The layout lives and dies with this process (machine byte order, no version): a run of
//! records, each a 16-byte header (kind, decimal places, sample count, first code) and its
//! payload, covering at most [`RECORD_SAMPLES`] samples.

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Seek, SeekFrom, Write};

/// Most samples one record covers: short enough that a jump (an edge) sends only its own
/// few thousand samples to the wider codes.
pub const RECORD_SAMPLES: usize = 4096;

/// Most decimal places tried: instruments rarely print more, and the codes must fit in 32
/// bits (a value of up to 2 with nine places).
const MAX_PLACES: usize = 9;

/// Powers of ten up to [`MAX_PLACES`], all exact doubles.
const POW10: [f64; MAX_PLACES + 1] = [1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9];

const HEADER_BYTES: usize = 16;

/// How a record's samples are stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    /// The f64 values.
    Values = 0,
    /// i32 codes; value = code / 10^places.
    Codes = 1,
    /// i16 differences between neighbouring codes, from the header's first code.
    Steps = 2,
}

impl Kind {
    fn from_byte(b: u8) -> Option<Kind> {
        match b {
            0 => Some(Kind::Values),
            1 => Some(Kind::Codes),
            2 => Some(Kind::Steps),
            _ => None,
        }
    }
}

/// The value a code stands for. Encoding checks against exactly this expression, so
/// decoding gives back the bits that were written.
#[inline(always)]
fn decode(code: i32, places: usize) -> f64 {
    f64::from(code) / POW10[places]
}

/// The code of `v` at `places` decimal places, and whether it decodes to `v` bit for bit.
/// Branch-free, so that a record's codes are worked out a vector at a time.
#[inline(always)]
fn code_of(v: f64, places: usize) -> (i32, bool) {
    const LIMIT: f64 = i32::MAX as f64;
    let scaled = v * POW10[places];
    // Rounds half away from zero with a truncating conversion (no rounding instruction
    // in the baseline x86-64 set); the check is what makes the code right, and it fails
    // for NaN, infinities and values beyond the codes' 32 bits.
    let code = (scaled.clamp(-LIMIT, LIMIT) + 0.5f64.copysign(scaled)) as i32;
    (code, decode(code, places).to_bits() == v.to_bits())
}

crate::avx2::twice_compiled!(
    /// Fills `codes` with the codes of `v` at `places`; true when every one is exact.
    /// Compiled for AVX2 too: four divisions at a time instead of two (the division that
    /// checks each code was most of the copy's encoding time; the same bits either way,
    /// a division being correctly rounded).
    fn codes_at(v: &[f64], places: usize, codes: &mut Vec<i32>) -> bool => codes_at_on;
);

#[inline(always)]
fn codes_at_on(v: &[f64], places: usize, codes: &mut Vec<i32>) -> bool {
    // Written in place by index, not by `extend`: that is a function of the standard
    // library's of its own, compiled without AVX2 and one value at a time.
    codes.clear();
    codes.resize(v.len(), 0);
    let mut all = true;
    for (c, &x) in codes.iter_mut().zip(v) {
        let (code, ok) = code_of(x, places);
        *c = code;
        all &= ok;
    }
    all
}

/// Codes for all of `v` at the fewest places from `start` up that serve every value, or
/// `None`. `codes` receives them.
fn codes_for(v: &[f64], start: usize, codes: &mut Vec<i32>) -> Option<usize> {
    let mut places = start;
    while !codes_at(v, places, codes) {
        // The first value the places do not serve says how many it needs. More places
        // serve the values before it too (a quotient w / 10^p is also 10w / 10^(p+1)
        // while it fits), and the whole record is checked again all the same.
        let x = v.iter().copied().find(|&x| !code_of(x, places).1)?;
        places = (places + 1..=MAX_PLACES).find(|&p| code_of(x, p).1)?;
    }
    Some(places)
}

/// Appends one record of `v` (at most [`RECORD_SAMPLES`] values) to `out`; returns the
/// decimal places to try first for the next record and the bytes written.
fn encode_record(
    v: &[f64],
    places: usize,
    scratch: &mut Scratch,
    out: &mut impl Write,
) -> std::io::Result<(usize, usize)> {
    let Scratch { codes, steps } = scratch;
    let (kind, places, first) = match codes_for(v, places, codes) {
        None => (Kind::Values, places, 0i32),
        Some(p) => {
            steps.clear();
            let mut small = true;
            let mut prev = codes.first().copied().unwrap_or(0);
            steps.extend(codes.iter().map(|&c| {
                let d = c.wrapping_sub(prev);
                prev = c;
                small &= i32::from(d as i16) == d;
                d as i16
            }));
            let kind = if small { Kind::Steps } else { Kind::Codes };
            (kind, p, codes.first().copied().unwrap_or(0))
        }
    };
    let mut header = [0u8; HEADER_BYTES];
    header[0] = kind as u8;
    header[1] = places as u8;
    header[4..8].copy_from_slice(&(v.len() as u32).to_ne_bytes());
    header[8..12].copy_from_slice(&first.to_ne_bytes());
    out.write_all(&header)?;
    let payload: &[u8] = match kind {
        Kind::Values => bytemuck::cast_slice(v),
        Kind::Codes => bytemuck::cast_slice(codes),
        Kind::Steps => bytemuck::cast_slice(steps),
    };
    out.write_all(payload)?;
    Ok((places, HEADER_BYTES + payload.len()))
}

/// Working buffers of the encoder, kept between records.
#[derive(Default)]
struct Scratch {
    codes: Vec<i32>,
    steps: Vec<i16>,
}

/// Decodes one record's payload into `out` (appending).
fn decode_record(
    kind: Kind,
    places: usize,
    first: i32,
    payload: &[u8],
    codes: &mut Vec<i32>,
    out: &mut Vec<f64>,
) {
    codes.clear();
    match kind {
        Kind::Values => {
            out.extend(
                payload
                    .chunks_exact(8)
                    .map(|b| f64::from_ne_bytes(b.try_into().unwrap_or([0; 8]))),
            );
            return;
        }
        Kind::Codes => codes.extend(
            payload
                .chunks_exact(4)
                .map(|b| i32::from_ne_bytes(b.try_into().unwrap_or([0; 4]))),
        ),
        Kind::Steps => {
            let mut code = first;
            codes.extend(payload.chunks_exact(2).map(|b| {
                code = code.wrapping_add(i32::from(i16::from_ne_bytes([b[0], b[1]])));
                code
            }));
        }
    }
    // Apart from the running sum above, so that this loop works a vector at a time.
    decode_codes(codes, places, out);
}

crate::avx2::twice_compiled!(
    /// Appends the value of every code to `out`; compiled for AVX2 too (see `codes_at`).
    fn decode_codes(codes: &[i32], places: usize, out: &mut Vec<f64>) => decode_codes_on;
);

#[inline(always)]
fn decode_codes_on(codes: &[i32], places: usize, out: &mut Vec<f64>) {
    // By index into room made first (see `codes_at_on`).
    let from = out.len();
    out.resize(from + codes.len(), 0.0);
    for (o, &c) in out[from..].iter_mut().zip(codes) {
        *o = decode(c, places);
    }
}

fn payload_bytes(kind: Kind, n: usize) -> usize {
    n * match kind {
        Kind::Values => 8,
        Kind::Codes => 4,
        Kind::Steps => 2,
    }
}

/// Writes samples to an unnamed temporary file as records.
pub struct SpillWriter {
    file: BufWriter<File>,
    places: usize,
    scratch: Scratch,
    written: u64,
}

impl SpillWriter {
    pub fn new(file: File) -> SpillWriter {
        SpillWriter {
            file: BufWriter::with_capacity(1 << 16, file),
            places: 0,
            scratch: Scratch::default(),
            written: 0,
        }
    }

    /// Appends `v`, in records of at most [`RECORD_SAMPLES`].
    pub fn write(&mut self, v: &[f64]) -> std::io::Result<()> {
        for part in v.chunks(RECORD_SAMPLES) {
            let (places, bytes) =
                encode_record(part, self.places, &mut self.scratch, &mut self.file)?;
            self.places = places;
            self.written += bytes as u64;
        }
        Ok(())
    }

    /// Bytes written so far.
    #[cfg(test)]
    pub fn bytes_written(&self) -> u64 {
        self.written
    }

    /// Flushes and hands back a reader from the first sample.
    pub fn finish(self) -> std::io::Result<SpillReader> {
        let mut file = self.file.into_inner().map_err(|e| e.into_error())?;
        file.seek(SeekFrom::Start(0))?;
        Ok(SpillReader {
            file: BufReader::with_capacity(1 << 16, file),
            payload: Vec::new(),
            codes: Vec::new(),
        })
    }
}

/// Reads the records back, as often as asked.
pub struct SpillReader {
    file: BufReader<File>,
    payload: Vec<u8>,
    codes: Vec<i32>,
}

impl SpillReader {
    /// Back to the first sample.
    pub fn rewind(&mut self) -> std::io::Result<()> {
        self.file.seek(SeekFrom::Start(0)).map(|_| ())
    }

    /// Replaces `out` with the samples of the next records, whole records only, until it
    /// holds at least `at_least` samples or the copy ends; returns how many it holds.
    pub fn read_into(&mut self, out: &mut Vec<f64>, at_least: usize) -> std::io::Result<usize> {
        out.clear();
        while out.len() < at_least && self.next_record(out)? {}
        Ok(out.len())
    }

    /// Appends the next record's samples to `out`; false at the end of the copy.
    fn next_record(&mut self, out: &mut Vec<f64>) -> std::io::Result<bool> {
        let mut header = [0u8; HEADER_BYTES];
        // The end of the copy is the end of a record; a header cut short is damage, not
        // an end (the samples after it would be silently lost).
        let mut got = 0;
        while got < HEADER_BYTES {
            match self.file.read(&mut header[got..]) {
                Ok(0) if got == 0 => return Ok(false),
                Ok(0) => return Err(std::io::ErrorKind::UnexpectedEof.into()),
                Ok(k) => got += k,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e),
            }
        }
        let bad = || std::io::Error::new(std::io::ErrorKind::InvalidData, "damaged record");
        let kind = Kind::from_byte(header[0]).ok_or_else(bad)?;
        let places = usize::from(header[1]);
        let n = u32::from_ne_bytes([header[4], header[5], header[6], header[7]]) as usize;
        let first = i32::from_ne_bytes([header[8], header[9], header[10], header[11]]);
        if places > MAX_PLACES || n > RECORD_SAMPLES {
            return Err(bad());
        }
        self.payload.resize(payload_bytes(kind, n), 0);
        self.file.read_exact(&mut self.payload)?;
        decode_record(kind, places, first, &self.payload, &mut self.codes, out);
        Ok(true)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn round_trip(v: &[f64]) -> (Vec<f64>, u64) {
        let mut w = SpillWriter::new(tempfile::tempfile().unwrap());
        // Written in uneven pieces, as the reader's blocks come.
        for part in v.chunks(5000) {
            w.write(part).unwrap();
        }
        let bytes = w.bytes_written();
        let mut r = w.finish().unwrap();
        let mut back = Vec::new();
        for pass in 0..2 {
            if pass == 1 {
                r.rewind().unwrap();
            }
            back.clear();
            let mut block = Vec::new();
            while r.read_into(&mut block, 3 * RECORD_SAMPLES).unwrap() > 0 {
                back.extend_from_slice(&block);
            }
        }
        (back, bytes)
    }

    fn bits(v: &[f64]) -> Vec<u64> {
        v.iter().map(|x| x.to_bits()).collect()
    }

    /// Values parsed from 4-decimal text (as the readers parse them: the standard
    /// library's correctly rounded parser here) come back bit for bit, in 2 bytes a
    /// sample where neighbours are close and 4 where a step jumps by hundreds of volts.
    #[test]
    fn printed_decimals_come_back_exactly_and_small() {
        let v: Vec<f64> = (0..20_000)
            .map(|k| {
                let x = if k == 10_000 {
                    251.9608
                } else {
                    (k % 50) as f64 * 0.0392 - 1.5
                };
                format!("{x:.4}").parse::<f64>().unwrap()
            })
            .collect();
        let (back, bytes) = round_trip(&v);
        assert_eq!(bits(&back), bits(&v));
        // Written 5000 at a time: eight records (4096 + 904 per write). Neighbours differ
        // by at most 1.96 V (19 600 codes, within 16 bits) except at the jump to 251.9608,
        // which sends the record starting at sample 10 000 (4096 samples) to 4-byte codes.
        assert_eq!(bytes, 8 * 16 + 4096 * 4 + (20_000 - 4096) * 2);
    }

    /// What is no short decimal quotient is kept as it is: -0, NaN, infinities, values
    /// with many digits, values too large for the codes.
    #[test]
    fn values_without_a_code_come_back_exactly() {
        let v = vec![
            0.1,
            -0.0,
            f64::NAN,
            f64::INFINITY,
            std::f64::consts::PI,
            1e300,
            5e9,
            -3.25,
        ];
        let (back, _) = round_trip(&v);
        assert_eq!(bits(&back), bits(&v));
    }

    /// A copy cut inside a record's header or payload is an error, not a shorter record.
    #[test]
    fn a_copy_cut_short_is_an_error() {
        let v: Vec<f64> = (0..100).map(|k| k as f64 * 0.5).collect();
        let mut w = SpillWriter::new(tempfile::tempfile().unwrap());
        w.write(&v).unwrap();
        let full = w.bytes_written();
        let mut r = w.finish().unwrap();
        for cut in [5, HEADER_BYTES as u64 + 3] {
            r.file.get_mut().set_len(cut.min(full - 1)).unwrap();
            r.rewind().unwrap();
            let mut out = Vec::new();
            assert!(r.read_into(&mut out, 10).is_err(), "cut at {cut}");
        }
    }

    proptest! {
        /// Any f64 bits at all come back as they went in.
        #[test]
        fn any_bits_come_back(raw in proptest::collection::vec(any::<u64>(), 0..9000)) {
            let v: Vec<f64> = raw.into_iter().map(f64::from_bits).collect();
            let (back, _) = round_trip(&v);
            prop_assert_eq!(bits(&back), bits(&v));
        }

        /// Stretches of different resolutions, jumps and values with no code, in one copy:
        /// records change kind and places from one to the next and still come back.
        #[test]
        fn mixed_stretches_come_back(
            parts in proptest::collection::vec(
                (0usize..12, -3_000_000_000i64..3_000_000_000, 1usize..6000, any::<u64>()),
                1..6,
            ),
        ) {
            let mut v = Vec::new();
            for (places, start, len, odd) in parts {
                for k in 0..len as i64 {
                    let w = start + (k * 7919) % 40_000 - 20_000;
                    v.push(format!("{w}e-{places}").parse::<f64>().unwrap());
                }
                v.push(f64::from_bits(odd));
            }
            let (back, _) = round_trip(&v);
            prop_assert_eq!(bits(&back), bits(&v));
        }

        /// Decimal text of any resolution and size comes back as it was parsed.
        #[test]
        fn parsed_decimals_come_back(
            w in proptest::collection::vec(-5_000_000_000i64..5_000_000_000, 1..9000),
            places in 0usize..12,
        ) {
            let v: Vec<f64> = w
                .iter()
                .map(|&k| format!("{}e-{places}", k).parse::<f64>().unwrap())
                .collect();
            let (back, _) = round_trip(&v);
            prop_assert_eq!(bits(&back), bits(&v));
        }
    }
}
