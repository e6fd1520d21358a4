//! Deterministic randomness and the digitiser: a seeded generator, Gaussian noise and ADC
//! quantization with rails.

/// xoshiro256** (Blackman & Vigna 2018, "Scrambled linear pseudorandom number
/// generators"), seeded through splitmix64 as its authors recommend.
#[derive(Debug, Clone)]
pub struct Rng {
    s: [u64; 4],
    spare: Option<f64>,
}

fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

impl Rng {
    pub fn new(seed: u64) -> Self {
        let mut sm = seed;
        let s = [
            splitmix64(&mut sm),
            splitmix64(&mut sm),
            splitmix64(&mut sm),
            splitmix64(&mut sm),
        ];
        Rng { s, spare: None }
    }

    pub fn next_u64(&mut self) -> u64 {
        let result = self.s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = self.s[1] << 17;
        self.s[2] ^= self.s[0];
        self.s[3] ^= self.s[1];
        self.s[1] ^= self.s[2];
        self.s[0] ^= self.s[3];
        self.s[2] ^= t;
        self.s[3] = self.s[3].rotate_left(45);
        result
    }

    /// Uniform in [0, 1) with 53 random bits.
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Standard normal deviate by the Box-Muller transform (Box & Muller 1958).
    pub fn gaussian(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        // 1 - u lies in (0, 1], so the logarithm is finite.
        let u1 = 1.0 - self.uniform();
        let u2 = self.uniform();
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (std::f64::consts::TAU * u2).sin_cos();
        self.spare = Some(r * s);
        r * c
    }
}

/// An ADC: `2^bits` codes spread evenly from `min_v` to `max_v` (both rails reachable).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Adc {
    pub bits: u32,
    pub min_v: f64,
    pub max_v: f64,
}

impl Adc {
    /// One code step.
    pub fn step_v(&self) -> f64 {
        (self.max_v - self.min_v) / (self.levels() - 1.0)
    }

    fn levels(&self) -> f64 {
        2f64.powi(self.bits.clamp(1, 32) as i32)
    }

    /// Rounds to the nearest code; values beyond the range stick at the rails (clipping).
    pub fn quantize(&self, v: f64) -> f64 {
        let step = self.step_v();
        let code = ((v - self.min_v) / step)
            .round()
            .clamp(0.0, self.levels() - 1.0);
        self.min_v + code * step
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn same_seed_same_stream_and_gaussian_moments() {
        let mut a = Rng::new(7);
        let mut b = Rng::new(7);
        assert_eq!(a.next_u64(), b.next_u64());
        assert_ne!(Rng::new(8).next_u64(), Rng::new(7).next_u64());
        // Sample mean and variance of 200k standard normals: within 4 standard errors
        // of 0 and 1 (standard error of the mean 1/sqrt(n), of the variance sqrt(2/n)).
        let n = 200_000;
        let mut r = Rng::new(42);
        let (mut s1, mut s2) = (0.0, 0.0);
        for _ in 0..n {
            let z = r.gaussian();
            s1 += z;
            s2 += z * z;
        }
        let mean = s1 / n as f64;
        let var = s2 / n as f64 - mean * mean;
        assert!(mean.abs() < 4.0 / (n as f64).sqrt(), "{mean}");
        assert!((var - 1.0).abs() < 4.0 * (2.0 / n as f64).sqrt(), "{var}");
    }

    #[test]
    fn adc_rounds_and_clips() {
        let adc = Adc {
            bits: 8,
            min_v: -10.0,
            max_v: 245.0,
        };
        // 255 steps over 255 V: one volt per code.
        assert!((adc.step_v() - 1.0).abs() < 1e-12);
        assert_eq!(adc.quantize(12.4), 12.0);
        assert_eq!(adc.quantize(12.6), 13.0);
        assert_eq!(adc.quantize(900.0), 245.0);
        assert_eq!(adc.quantize(-50.0), -10.0);
    }
}
