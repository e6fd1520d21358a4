//! Interleaved little-endian sample frames (WAV data, raw dumps) decoded in bulk to scaled
//! values, one channel at a time over a buffer of whole frames.

use super::wav::Scaling;

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
        Encoding::U8 => decode::<1>(bytes, scalings, out, |b| f64::from(i16::from(b[0]) - 128)),
        Encoding::I8 => decode::<1>(bytes, scalings, out, |b| f64::from(b[0] as i8)),
        Encoding::I16 => decode::<2>(bytes, scalings, out, |b| f64::from(i16::from_le_bytes(b))),
        // Sign-extended from bit 23: the top byte shifted out, then shifted back in.
        Encoding::I24 => decode::<3>(bytes, scalings, out, |b| {
            f64::from(i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8)
        }),
        Encoding::I24In4 => decode::<4>(bytes, scalings, out, |b| {
            f64::from(i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8)
        }),
        Encoding::I32 => decode::<4>(bytes, scalings, out, |b| f64::from(i32::from_le_bytes(b))),
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

#[cfg(test)]
mod tests {
    use super::*;

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
        for enc in [
            Encoding::U8,
            Encoding::I8,
            Encoding::I16,
            Encoding::I24,
            Encoding::I24In4,
            Encoding::I32,
        ] {
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
