//! Interleaved little-endian sample frames (WAV data, raw dumps) decoded in bulk to scaled
//! values, one channel at a time over a buffer of whole frames.

use super::wav::Scaling;
use super::CaptureError;

/// How one stored sample is encoded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Encoding {
    /// 8-bit WAV: unsigned, 128 is zero.
    U8,
    I8,
    I16,
    /// 24-bit in three bytes.
    I24,
    /// 24-bit in the low three bytes of four (WAV extensible with 24 valid bits).
    I24In4,
    I32,
    F32,
    F64,
}

impl Encoding {
    /// Bytes per stored sample.
    pub(crate) fn bytes(self) -> usize {
        match self {
            Encoding::U8 | Encoding::I8 => 1,
            Encoding::I16 => 2,
            Encoding::I24 => 3,
            Encoding::I24In4 | Encoding::I32 | Encoding::F32 => 4,
            Encoding::F64 => 8,
        }
    }
}

crate::avx2::twice_compiled!(
    /// Appends `code * gain + offset` of every sample in `bytes` (whole frames of one
    /// sample per scaling) to its channel. For float encodings, a NaN or infinite stored
    /// sample stops the decoding: the error gives its index in `bytes`, counted in
    /// samples, and its value; nothing is appended. Compiled for AVX2 too: a long WAV is
    /// decoded twice (survey, then measurement), and the wider conversion took the 16-bit
    /// decode from 4.3 to 1.4 instructions a sample.
    pub(crate) fn decode_frames(
        enc: Encoding,
        bytes: &[u8],
        scalings: &[Scaling],
        out: &mut [Vec<f64>],
    ) -> Result<(), (usize, f64)> => decode_frames_on;
);

#[inline(always)]
fn decode_frames_on(
    enc: Encoding,
    bytes: &[u8],
    scalings: &[Scaling],
    out: &mut [Vec<f64>],
) -> Result<(), (usize, f64)> {
    match enc {
        Encoding::U8 => decode::<1>(bytes, scalings, out, |b| f64::from(code_u8(b))),
        Encoding::I8 => decode::<1>(bytes, scalings, out, |b| f64::from(code_i8(b))),
        Encoding::I16 => decode::<2>(bytes, scalings, out, |b| f64::from(code_i16(b))),
        Encoding::I24 => decode::<3>(bytes, scalings, out, |b| f64::from(code_i24(b))),
        Encoding::I24In4 => decode::<4>(bytes, scalings, out, |b| f64::from(code_i24in4(b))),
        Encoding::I32 => decode::<4>(bytes, scalings, out, |b| f64::from(code_i32(b))),
        Encoding::F32 => {
            let value = |b| f64::from(f32::from_le_bytes(b));
            if let Some(bad) = first_not_finite::<4>(bytes, value) {
                return Err(bad);
            }
            decode::<4>(bytes, scalings, out, |b| f64::from(f32::from_le_bytes(b)))
        }
        Encoding::F64 => {
            if let Some(bad) = first_not_finite::<8>(bytes, f64::from_le_bytes) {
                return Err(bad);
            }
            decode::<8>(bytes, scalings, out, f64::from_le_bytes)
        }
    }
    Ok(())
}

// The stored integer of each integer encoding, one place for the byte layouts.
#[inline(always)]
fn code_u8(b: [u8; 1]) -> i32 {
    i32::from(b[0]) - 128
}
#[inline(always)]
fn code_i8(b: [u8; 1]) -> i32 {
    i32::from(b[0] as i8)
}
#[inline(always)]
fn code_i16(b: [u8; 2]) -> i32 {
    i32::from(i16::from_le_bytes(b))
}
/// Sign-extended from bit 23: the top byte shifted out, then shifted back in.
#[inline(always)]
fn code_i24([b0, b1, b2]: [u8; 3]) -> i32 {
    i32::from_le_bytes([0, b0, b1, b2]) >> 8
}
/// The top byte of the container is ignored, set or not.
#[inline(always)]
fn code_i24in4([b0, b1, b2, _]: [u8; 4]) -> i32 {
    code_i24([b0, b1, b2])
}
#[inline(always)]
fn code_i32(b: [u8; 4]) -> i32 {
    i32::from_le_bytes(b)
}

#[inline(always)]
fn array<const N: usize>(s: &[u8]) -> [u8; N] {
    let mut a = [0u8; N];
    for (d, &b) in a.iter_mut().zip(s) {
        *d = b;
    }
    a
}

/// Decodes channel by channel: one strided pass per channel keeps each loop simple enough
/// to vectorize, and a buffer of frames stays in cache across the passes.
#[inline(always)]
fn decode<const N: usize>(
    bytes: &[u8],
    scalings: &[Scaling],
    out: &mut [Vec<f64>],
    code: impl Fn([u8; N]) -> f64,
) {
    let frame = N * scalings.len();
    if frame == 0 {
        return;
    }
    if let ([s], [o]) = (scalings, &mut *out) {
        o.extend(
            bytes
                .chunks_exact(N)
                .map(|c| code(array(c)) * s.gain + s.offset),
        );
        return;
    }
    for (ch, (s, o)) in scalings.iter().zip(out.iter_mut()).enumerate() {
        let at = ch * N;
        o.extend(bytes.chunks_exact(frame).map(|f| {
            let c = f.get(at..at + N).map_or([0u8; N], array);
            code(c) * s.gain + s.offset
        }));
    }
}

/// The first sample that is NaN or infinite: its index and value. One pass that only
/// tests (and vectorizes), then a search only when there is something to find.
fn first_not_finite<const N: usize>(
    bytes: &[u8],
    value: impl Fn([u8; N]) -> f64,
) -> Option<(usize, f64)> {
    let all_finite = bytes
        .chunks_exact(N)
        .fold(true, |ok, c| ok & value(array(c)).is_finite());
    if all_finite {
        return None;
    }
    bytes
        .chunks_exact(N)
        .map(|c| value(array(c)))
        .enumerate()
        .find(|(_, x)| !x.is_finite())
}

/// How a channel's stored integers become the values [`super::BlockReader`] hands out:
/// `(code * gain + offset) * factor`, the factor being `--scale`'s (left out when one, as
/// the reader leaves it out).
#[derive(Debug, Clone, Copy)]
pub(crate) struct CodeMap {
    gain: f64,
    offset: f64,
    factor: f64,
}

impl CodeMap {
    /// The map of an integer encoding whose every code gives a finite value (so the
    /// smallest and largest values are those of the smallest and largest codes, see
    /// [`CodedChannel::extremes`]); `None` for floats or a scaling that overflows.
    pub(crate) fn new(enc: Encoding, s: Scaling, factor: f64) -> Option<Self> {
        let (lo, hi) = code_range(enc)?;
        let map = CodeMap {
            gain: s.gain,
            offset: s.offset,
            factor,
        };
        // A zero gain or factor would make values of both signs of zero, whose order the
        // codes do not give.
        let nonzero = s.gain != 0.0 && factor != 0.0;
        (nonzero && map.value(lo).is_finite() && map.value(hi).is_finite()).then_some(map)
    }

    #[inline(always)]
    fn value(&self, code: i32) -> f64 {
        // The same operations, in the same order, as `decode` and the reader's `--scale`.
        let x = f64::from(code) * self.gain + self.offset;
        if self.factor != 1.0 {
            x * self.factor
        } else {
            x
        }
    }
}

/// A binary stream of whole interleaved frames (WAV data, a raw dump). Each reader gives
/// its encoding, its channels' scalings and `frames`, the loop over runs of frames with its
/// own error messages; reading the frames as values ([`FrameStream::fill`]) or one channel
/// as stored codes ([`FrameStream::fill_coded`]) is written once here.
pub(crate) trait FrameStream {
    /// The stored encoding; `None` when the reader cannot decode it (`frames` then says
    /// why).
    fn encoding(&self) -> Option<Encoding>;

    fn scalings(&self) -> &[Scaling];

    /// Hands up to `max` whole frames to `handle`, with the encoding and the channels'
    /// scalings; returns how many. `handle` may refuse a sample (its index in the bytes,
    /// counted in samples, and value): the error then names its place in the file.
    fn frames(
        &mut self,
        max: usize,
        handle: impl FnMut(Encoding, &[u8], &[Scaling]) -> Result<(), (usize, f64)> + Send,
    ) -> Result<usize, CaptureError>;

    /// Appends up to `max` frames, decoded and scaled, one vector per channel; returns how
    /// many were read.
    fn fill(&mut self, out: &mut [Vec<f64>], max: usize) -> Result<usize, CaptureError> {
        self.frames(max, |enc, b, scalings| decode_frames(enc, b, scalings, out))
    }

    /// Hands up to `max` frames of channel `ch` to `look` as stored codes (see
    /// [`CodedChannel`]), `--scale`'s `factor` included; returns how many, or `None` when
    /// the samples are floats or the scaling would overflow (then [`FrameStream::fill`]
    /// reads them).
    fn fill_coded(
        &mut self,
        ch: usize,
        factor: f64,
        max: usize,
        look: &mut (dyn FnMut(&CodedChannel) + Send),
    ) -> Result<Option<usize>, CaptureError> {
        let Some(map) = self
            .encoding()
            .zip(self.scalings().get(ch))
            .and_then(|(enc, &s)| CodeMap::new(enc, s, factor))
        else {
            return Ok(None);
        };
        self.frames(max, move |enc, bytes, scalings| {
            if let Some(c) = CodedChannel::new(bytes, enc, scalings.len(), ch, map) {
                look(&c);
            }
            Ok(())
        })
        .map(Some)
    }
}

/// The smallest and largest code of an integer encoding.
fn code_range(enc: Encoding) -> Option<(i32, i32)> {
    match enc {
        Encoding::U8 | Encoding::I8 => Some((-128, 127)),
        Encoding::I16 => Some((i16::MIN.into(), i16::MAX.into())),
        Encoding::I24 | Encoding::I24In4 => Some((-(1 << 23), (1 << 23) - 1)),
        Encoding::I32 => Some((i32::MIN, i32::MAX)),
        Encoding::F32 | Encoding::F64 => None,
    }
}

/// What takes the samples of a [`CodedChannel`]: `len` samples, their smallest and largest
/// value, and `value(j)` for any `j < len` it wants.
pub trait TakeValues {
    fn take_values(
        &mut self,
        len: usize,
        extremes: Option<(f64, f64)>,
        value: impl Fn(usize) -> f64,
    );
}

/// One channel of a run of whole frames of integer samples, left as stored. The first
/// read of a long binary capture wants only the range of its samples and every
/// `stride`-th of them: taken from the codes, that is a pass of integer comparisons
/// instead of converting every sample of every channel to a float (what a block costs).
pub struct CodedChannel<'a> {
    bytes: &'a [u8],
    enc: Encoding,
    /// Bytes per frame, and the offset of this channel's sample in a frame.
    frame: usize,
    at: usize,
    map: CodeMap,
}

impl<'a> CodedChannel<'a> {
    /// Channel `ch` of the whole frames in `bytes`, or `None` for a float encoding.
    pub(crate) fn new(
        bytes: &'a [u8],
        enc: Encoding,
        n_channels: usize,
        ch: usize,
        map: CodeMap,
    ) -> Option<Self> {
        code_range(enc)?;
        let frame = enc.bytes() * n_channels.max(1);
        Some(CodedChannel {
            bytes: &bytes[..bytes.len() / frame * frame],
            enc,
            frame,
            at: enc.bytes() * ch.min(n_channels.saturating_sub(1)),
            map,
        })
    }

    /// Samples (frames) in the run.
    pub fn len(&self) -> usize {
        self.bytes.len() / self.frame
    }

    pub fn is_empty(&self) -> bool {
        self.bytes.is_empty()
    }

    /// Hands the run to `sink`: its length, its extremes and the value of each sample asked
    /// for, exactly what a block would hold. The encoding is matched once here, so each
    /// sample asked for is a few instructions (matched per sample, and called, the
    /// survey's samples cost a quarter of the first read).
    pub fn hand_to(&self, sink: &mut impl TakeValues) {
        let (b, frame, at, map) = (self.bytes, self.frame, self.at, self.map);
        let extremes = self.extremes();
        let len = self.len();
        let byte = |j: usize, k: usize| b[j * frame + at + k];
        match self.enc {
            Encoding::U8 => sink.take_values(len, extremes, |j| map.value(code_u8([byte(j, 0)]))),
            Encoding::I8 => sink.take_values(len, extremes, |j| map.value(code_i8([byte(j, 0)]))),
            Encoding::I16 => sink.take_values(len, extremes, |j| {
                map.value(code_i16([byte(j, 0), byte(j, 1)]))
            }),
            Encoding::I24 => sink.take_values(len, extremes, |j| {
                map.value(code_i24([byte(j, 0), byte(j, 1), byte(j, 2)]))
            }),
            Encoding::I24In4 => sink.take_values(len, extremes, |j| {
                map.value(code_i24in4([
                    byte(j, 0),
                    byte(j, 1),
                    byte(j, 2),
                    byte(j, 3),
                ]))
            }),
            Encoding::I32 => sink.take_values(len, extremes, |j| {
                map.value(code_i32([byte(j, 0), byte(j, 1), byte(j, 2), byte(j, 3)]))
            }),
            Encoding::F32 | Encoding::F64 => {}
        }
    }

    /// The smallest and largest value, `None` when the run is empty. Taken from the
    /// smallest and largest code: `code * gain + offset` (then times the factor) rounds
    /// monotonically, so the order of the codes is kept (reversed by a negative gain or
    /// factor), and every value is finite ([`CodeMap::new`]), which is what
    /// `levels::finite_extremes` of the block would give.
    pub fn extremes(&self) -> Option<(f64, f64)> {
        let (lo, hi) = code_extremes(self.enc, self.bytes, self.frame, self.at)?;
        let (a, b) = (self.map.value(lo), self.map.value(hi));
        Some((a.min(b), a.max(b)))
    }
}

crate::avx2::twice_compiled!(
    /// The smallest and largest code of the channel at byte `at` of each `frame`-byte
    /// frame of `bytes`. Compiled for AVX2 too: sixteen 16-bit codes a comparison.
    fn code_extremes(enc: Encoding, bytes: &[u8], frame: usize, at: usize) -> Option<(i32, i32)>
        => code_extremes_on;
);

#[inline(always)]
fn code_extremes_on(enc: Encoding, bytes: &[u8], frame: usize, at: usize) -> Option<(i32, i32)> {
    if bytes.len() < frame || frame == 0 {
        return None;
    }
    match enc {
        Encoding::U8 => extremes_of::<1>(bytes, frame, at, code_u8),
        Encoding::I8 => extremes_of::<1>(bytes, frame, at, code_i8),
        Encoding::I16 if frame == 2 => {
            // One channel of 16-bit codes, the common long capture: compared as 16-bit
            // integers, twice as many to a register as when widened first (23 M against
            // 46 M instructions on a 100 M-sample WAV).
            let (lo, hi) = bytes
                .chunks_exact(2)
                .fold((i16::MAX, i16::MIN), |(lo, hi), c| {
                    let x = i16::from_le_bytes([c[0], c[1]]);
                    (lo.min(x), hi.max(x))
                });
            Some((lo.into(), hi.into()))
        }
        Encoding::I16 => extremes_of::<2>(bytes, frame, at, code_i16),
        Encoding::I24 => extremes_of::<3>(bytes, frame, at, code_i24),
        Encoding::I24In4 => extremes_of::<4>(bytes, frame, at, code_i24in4),
        Encoding::I32 => extremes_of::<4>(bytes, frame, at, code_i32),
        Encoding::F32 | Encoding::F64 => None,
    }
}

#[inline(always)]
fn extremes_of<const N: usize>(
    bytes: &[u8],
    frame: usize,
    at: usize,
    code: impl Fn([u8; N]) -> i32,
) -> Option<(i32, i32)> {
    let fold = |(lo, hi): (i32, i32), x: i32| (lo.min(x), hi.max(x));
    let start = (i32::MAX, i32::MIN);
    let (lo, hi) = if frame == N {
        bytes
            .chunks_exact(N)
            .map(|c| code(array(c)))
            .fold(start, fold)
    } else {
        bytes
            .chunks_exact(frame)
            .map(|f| code(f.get(at..at + N).map_or([0u8; N], array)))
            .fold(start, fold)
    };
    (lo <= hi).then_some((lo, hi))
}

#[cfg(test)]
mod tests {
    use super::*;

    const INTEGER_ENCODINGS: [Encoding; 6] = [
        Encoding::U8,
        Encoding::I8,
        Encoding::I16,
        Encoding::I24,
        Encoding::I24In4,
        Encoding::I32,
    ];

    fn unit(n: usize) -> Vec<Scaling> {
        vec![
            Scaling {
                gain: 1.0,
                offset: 0.0
            };
            n
        ]
    }

    fn decoded(enc: Encoding, bytes: &[u8], n_channels: usize) -> Vec<Vec<f64>> {
        let mut out = vec![Vec::new(); n_channels];
        decode_frames(enc, bytes, &unit(n_channels), &mut out).unwrap();
        out
    }

    #[test]
    fn each_encoding_gives_the_stored_code() {
        // Expected codes from the little-endian two's-complement layout (and WAV's
        // unsigned 8-bit with 128 as zero).
        assert_eq!(
            decoded(Encoding::U8, &[0, 128, 255], 1),
            [vec![-128.0, 0.0, 127.0]]
        );
        assert_eq!(
            decoded(Encoding::I8, &[0x80, 0, 0x7f], 1),
            [vec![-128.0, 0.0, 127.0]]
        );
        assert_eq!(
            decoded(Encoding::I16, &[0x00, 0x80, 0xff, 0x7f, 0xfe, 0xff], 1),
            [vec![-32768.0, 32767.0, -2.0]]
        );
        assert_eq!(
            decoded(
                Encoding::I24,
                &[0x00, 0x00, 0x80, 0xff, 0xff, 0x7f, 0xff, 0xff, 0xff],
                1
            ),
            [vec![-8_388_608.0, 8_388_607.0, -1.0]]
        );
        // The top byte of a 24-in-32 container is ignored, set or not.
        assert_eq!(
            decoded(
                Encoding::I24In4,
                &[0x00, 0x00, 0x80, 0x00, 0xff, 0xff, 0x7f, 0xff],
                1
            ),
            [vec![-8_388_608.0, 8_388_607.0]]
        );
        assert_eq!(
            decoded(Encoding::I32, &i32::MIN.to_le_bytes(), 1),
            [vec![f64::from(i32::MIN)]]
        );
        assert_eq!(
            decoded(Encoding::F32, &1.5f32.to_le_bytes(), 1),
            [vec![1.5]]
        );
        assert_eq!(
            decoded(Encoding::F64, &(-0.25f64).to_le_bytes(), 1),
            [vec![-0.25]]
        );
    }

    #[test]
    fn frames_are_split_between_channels_and_scaled() {
        let bytes: Vec<u8> = [1i16, -1, 2, -2, 3, -3]
            .iter()
            .flat_map(|x| x.to_le_bytes())
            .collect();
        let s = [
            Scaling {
                gain: 2.0,
                offset: 1.0,
            },
            Scaling {
                gain: 1.0,
                offset: 0.0,
            },
        ];
        let mut out = vec![Vec::new(), Vec::new()];
        decode_frames(Encoding::I16, &bytes, &s, &mut out).unwrap();
        assert_eq!(out, [vec![3.0, 5.0, 7.0], vec![-1.0, -2.0, -3.0]]);
    }

    /// Both builds (AVX2 where the CPU has it, and the baseline) give the same bits for
    /// every encoding, one channel and two, over lengths that leave every remainder of a
    /// vector's width: the expected value is the code times the gain plus the offset,
    /// worked out one sample at a time.
    #[test]
    fn both_builds_decode_the_same_bits() {
        let s = [
            Scaling {
                gain: 0.0153,
                offset: -50.0,
            },
            Scaling {
                gain: -3.0e-4,
                offset: 0.25,
            },
        ];
        let bytes: Vec<u8> = (0..203u32).map(|k| (k * 89 + 7) as u8).collect();
        for enc in INTEGER_ENCODINGS {
            for n_ch in [1, 2] {
                let frame = enc.bytes() * n_ch;
                for len in [0, 1, 7, 8, 9, 17, 31, 33] {
                    let b = &bytes[..(len * frame).min(bytes.len() / frame * frame)];
                    let mut fast = vec![Vec::new(); n_ch];
                    let mut base = vec![Vec::new(); n_ch];
                    decode_frames(enc, b, &s[..n_ch], &mut fast).unwrap();
                    decode_frames_on(enc, b, &s[..n_ch], &mut base).unwrap();
                    let mut codes = vec![Vec::new(); n_ch];
                    decode_frames_on(enc, b, &unit(n_ch), &mut codes).unwrap();
                    let want: Vec<Vec<u64>> = codes
                        .iter()
                        .zip(&s)
                        .map(|(c, s)| {
                            c.iter()
                                .map(|x| (x * s.gain + s.offset).to_bits())
                                .collect()
                        })
                        .collect();
                    let bits = |o: &[Vec<f64>]| -> Vec<Vec<u64>> {
                        o.iter()
                            .map(|c| c.iter().map(|x| x.to_bits()).collect())
                            .collect()
                    };
                    assert_eq!(bits(&fast), want, "{enc:?} x{n_ch}, {len} frames");
                    assert_eq!(bits(&base), want, "{enc:?} x{n_ch}, {len} frames");
                }
            }
        }
    }

    /// What a [`CodedChannel`] hands over, every sample asked for.
    #[derive(Default)]
    struct Taken {
        values: Vec<f64>,
        extremes: Option<(f64, f64)>,
    }

    impl TakeValues for Taken {
        fn take_values(
            &mut self,
            len: usize,
            extremes: Option<(f64, f64)>,
            value: impl Fn(usize) -> f64,
        ) {
            self.values.extend((0..len).map(value));
            self.extremes = extremes;
        }
    }

    /// A channel taken from its codes gives, bit for bit, what decoding the frames and
    /// applying the `--scale` factor gives (the reader's two steps, done here one sample
    /// at a time), and the extremes the decoded block has (`levels::finite_extremes`):
    /// every integer encoding, one channel and three, gains and factors of both signs.
    #[test]
    fn a_coded_channel_gives_the_decoded_values_and_their_extremes() {
        let bytes: Vec<u8> = (0..601u32).map(|k| (k * 157 + 11) as u8).collect();
        let gains = [(0.0153, -50.0), (-3.0e-4, 0.25), (7.5, 0.0)];
        for enc in INTEGER_ENCODINGS {
            for n_ch in [1, 3] {
                let frame = enc.bytes() * n_ch;
                let b = &bytes[..bytes.len() / frame * frame];
                let scalings: Vec<Scaling> = gains[..n_ch]
                    .iter()
                    .map(|&(gain, offset)| Scaling { gain, offset })
                    .collect();
                let mut decoded = vec![Vec::new(); n_ch];
                decode_frames_on(enc, b, &scalings, &mut decoded).unwrap();
                for ch in 0..n_ch {
                    for factor in [1.0, -2.5, 1e-3] {
                        let want: Vec<f64> = decoded[ch]
                            .iter()
                            .map(|&x| if factor != 1.0 { x * factor } else { x })
                            .collect();
                        let map = CodeMap::new(enc, scalings[ch], factor).unwrap();
                        let c = CodedChannel::new(b, enc, n_ch, ch, map).unwrap();
                        let mut got = Taken::default();
                        c.hand_to(&mut got);
                        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                        let at = format!("{enc:?} x{n_ch} channel {ch} factor {factor}");
                        assert_eq!(bits(&got.values), bits(&want), "{at}");
                        assert_eq!(got.extremes, crate::levels::finite_extremes(&want), "{at}");
                        // A run cut short, down to no frame at all.
                        for len in [0, 1, 17] {
                            let c = CodedChannel::new(&b[..len * frame], enc, n_ch, ch, map);
                            let mut got = Taken::default();
                            c.unwrap().hand_to(&mut got);
                            assert_eq!(bits(&got.values), bits(&want[..len]), "{at}, {len}");
                            let e = crate::levels::finite_extremes(&want[..len]);
                            assert_eq!(got.extremes, e, "{at}, {len}");
                        }
                    }
                }
            }
        }
    }

    /// Floats, a zero gain or factor (signed zeros the codes cannot order) and a scaling
    /// that overflows are left to the decoder.
    #[test]
    fn codes_are_not_used_where_their_order_is_not_the_values_order() {
        let s = |gain, offset| Scaling { gain, offset };
        assert!(CodeMap::new(Encoding::F32, s(1.0, 0.0), 1.0).is_none());
        assert!(CodeMap::new(Encoding::F64, s(1.0, 0.0), 1.0).is_none());
        assert!(CodeMap::new(Encoding::I16, s(0.0, 1.0), 1.0).is_none());
        assert!(CodeMap::new(Encoding::I16, s(1.0, 0.0), 0.0).is_none());
        assert!(CodeMap::new(Encoding::I32, s(1e300, 0.0), 1e10).is_none());
        assert!(CodeMap::new(Encoding::I16, s(1.0, f64::NAN), 1.0).is_none());
        assert!(CodeMap::new(Encoding::I16, s(1.0, 0.0), f64::INFINITY).is_none());
        assert!(CodeMap::new(Encoding::I16, s(-1.0, 3.0), -2.0).is_some());
    }

    #[test]
    fn a_stored_nan_is_found_and_nothing_appended() {
        let bytes: Vec<u8> = [1.0f32, 2.0, f32::NAN, f32::INFINITY]
            .iter()
            .flat_map(|x| x.to_le_bytes())
            .collect();
        let mut out = vec![Vec::new(), Vec::new()];
        let (k, x) = decode_frames(Encoding::F32, &bytes, &unit(2), &mut out).unwrap_err();
        assert_eq!(k, 2);
        assert!(x.is_nan());
        assert!(out.iter().all(Vec::is_empty));
    }
}
