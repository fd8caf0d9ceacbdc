//! Random numbers of our own: xoshiro256** seeded through SplitMix64, written out here so that every
//! stream (the demo data, the bench instances, the bootstrap resamples) depends on no crate's version and
//! stays byte-identical for years: a pack re-run long after gives the same figures.

/// `SplitMix64` (Steele, Lea & Flood; reference code by Sebastiano Vigna, 2015,
/// public domain). Used only to spread one `u64` seed over xoshiro's state, as
/// Vigna recommends, so that similar seeds still give unrelated streams.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
}

/// `xoshiro256**` 1.0 (David Blackman & Sebastiano Vigna, "Scrambled linear
/// pseudorandom number generators", ACM TOMS 47(4), 2021; reference code
/// public domain). Fast, small state, and good statistical quality.
pub struct Rng {
    s: [u64; 4],
    /// Marsaglia's polar method yields normals in pairs; keep the second.
    spare_normal: Option<f64>,
}

impl Rng {
    pub fn from_seed(seed: u64) -> Self {
        let mut mix = SplitMix64(seed);
        let s = [
            mix.next_u64(),
            mix.next_u64(),
            mix.next_u64(),
            mix.next_u64(),
        ];
        Rng {
            s,
            spare_normal: None,
        }
    }

    pub fn next_u64(&mut self) -> u64 {
        let s = &mut self.s;
        let result = s[1].wrapping_mul(5).rotate_left(7).wrapping_mul(9);
        let t = s[1] << 17;
        s[2] ^= s[0];
        s[3] ^= s[1];
        s[1] ^= s[2];
        s[0] ^= s[3];
        s[2] ^= t;
        s[3] = s[3].rotate_left(45);
        result
    }

    /// An integer in 0..n by Lemire's multiply-and-shift ("Fast random integer generation in an
    /// interval", ACM TOMS 29(1), 2019, without the rejection step: the bias is below n / 2⁶⁴).
    pub fn below(&mut self, n: usize) -> usize {
        ((u128::from(self.next_u64()) * n as u128) >> 64) as usize
    }

    /// Uniform on [0, 1) from the top 53 bits, the usual exact conversion.
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Standard normal by Marsaglia's polar method (Marsaglia & Bray, 1964),
    /// which avoids trigonometric calls.
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare_normal.take() {
            return z;
        }
        loop {
            let u = 2.0 * self.uniform() - 1.0;
            let v = 2.0 * self.uniform() - 1.0;
            let s = u * u + v * v;
            if s > 0.0 && s < 1.0 {
                let m = (-2.0 * s.ln() / s).sqrt();
                self.spare_normal = Some(v * m);
                return u * m;
            }
        }
    }

    /// Student-t with 4 degrees of freedom, rescaled to unit variance (the raw
    /// variance is 4/2 = 2), so loadings keep their meaning as correlations.
    /// Clamped at 7 standard deviations: fat tails are wanted, but a one-day
    /// 15-sigma move in a demo would only distract the committee.
    pub fn student_t4(&mut self) -> f64 {
        let z = self.normal();
        let chi2: f64 = (0..4).map(|_| self.normal().powi(2)).sum();
        let t = z / (chi2 / 4.0).sqrt();
        (t / 2f64.sqrt()).clamp(-7.0, 7.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn generators_match_published_reference_outputs() {
        let mut mix = SplitMix64(0);
        assert_eq!(mix.next_u64(), 0xE220_A839_7B1D_CDAF);
        assert_eq!(mix.next_u64(), 0x6E78_9E6A_A1B9_65F4);
        let mut rng = Rng {
            s: [1, 2, 3, 4],
            spare_normal: None,
        };
        let expected = [
            11_520,
            0,
            1_509_978_240,
            1_215_971_899_390_074_240,
            1_216_172_134_540_287_360,
        ];
        for e in expected {
            assert_eq!(rng.next_u64(), e);
        }
    }
}
