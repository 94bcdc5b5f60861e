//! A small seeded random-number generator and the distributions the channel
//! simulation draws from.
//!
//! The generator is PCG32, the "PCG-XSH-RR 64/32" member of the PCG family
//! (M. E. O'Neill, "PCG: A Family of Simple Fast Space-Efficient Statistically
//! Good Algorithms for Random Number Generation", Harvey Mudd College
//! HMC-CS-2014-0905, 2014): a 64-bit linear congruential state with a 32-bit
//! permuted output. It uses integer operations only, so the same seed gives
//! the same bits on every target. The floating-point draws built on it use
//! `f32` arithmetic and [`libm`] only (no `f64`, no platform maths library),
//! so they too repeat bit for bit between a host and a Cortex-M.

/// Multiplier of the 64-bit LCG behind PCG32 (O'Neill 2014, and the
/// reference `pcg32_random_r`).
const PCG_MULTIPLIER: u64 = 6_364_136_223_846_793_005;

/// 2^-24: half the spacing of the 23-bit grid of [`Pcg32::uniform`].
const TWO_POW_MINUS_24: f32 = 1.0 / 16_777_216.0;

/// The PCG32 generator (PCG-XSH-RR 64/32): 64 bits of state, 2^63
/// selectable streams, period 2^64 per stream.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Pcg32 {
    state: u64,
    increment: u64,
}

impl Pcg32 {
    /// A generator seeded with `seed` on stream `stream`, exactly as the
    /// reference `pcg32_srandom_r(seed, stream)`. Different streams with the
    /// same seed give unrelated sequences.
    pub fn new(seed: u64, stream: u64) -> Self {
        let mut g = Pcg32 {
            state: 0,
            increment: (stream << 1) | 1,
        };
        g.step();
        g.state = g.state.wrapping_add(seed);
        g.step();
        g
    }

    #[inline]
    fn step(&mut self) {
        self.state = self
            .state
            .wrapping_mul(PCG_MULTIPLIER)
            .wrapping_add(self.increment);
    }

    /// The next 32 random bits.
    #[inline]
    pub fn next_u32(&mut self) -> u32 {
        let old = self.state;
        self.step();
        // XSH-RR output permutation: xorshift high, then a random rotation.
        // Keeping the low 32 bits is the algorithm's truncation.
        #[allow(clippy::cast_possible_truncation)]
        let xorshifted = (((old >> 18) ^ old) >> 27) as u32;
        #[allow(clippy::cast_possible_truncation)]
        let rot = (old >> 59) as u32;
        xorshifted.rotate_right(rot)
    }

    /// A uniform number strictly inside (0, 1): the top 23 bits `b` give
    /// `(2b + 1) / 2^24`, the centre of one of 2^23 equal cells, so neither 0
    /// nor 1 can occur and `ln(u)` is always finite (`2b + 1 < 2^24` is exact
    /// in an `f32`).
    #[inline]
    pub fn uniform(&mut self) -> f32 {
        let bits = self.next_u32() >> 9;
        ((bits << 1) | 1) as f32 * TWO_POW_MINUS_24
    }

    /// An exponential draw with mean 1, by inversion: `-ln(u)`.
    #[inline]
    pub fn exponential(&mut self) -> f32 {
        -libm::logf(self.uniform())
    }

    /// `true` with probability `p` (`p` outside `[0, 1]` acts as clamped).
    #[inline]
    pub fn chance(&mut self, p: f32) -> bool {
        self.uniform() < p
    }
}

/// Standard normal draws by the Box-Muller transform (G. E. P. Box and
/// M. E. Muller, "A Note on the Generation of Random Normal Deviates",
/// Ann. Math. Statist. 29(2), 1958): two uniforms `u1, u2` give the two
/// independent normals `r·cos θ` and `r·sin θ` with `r = sqrt(-2 ln u1)`,
/// `θ = 2π u2`. The second one is kept for the next call. Box-Muller is used
/// rather than the polar method because it takes a fixed number of draws per
/// pair, which keeps sequences aligned when configurations change.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Normal {
    rng: Pcg32,
    spare: Option<f32>,
}

impl Normal {
    /// Normal draws from a PCG32 seeded with (`seed`, `stream`).
    pub fn new(seed: u64, stream: u64) -> Self {
        Normal {
            rng: Pcg32::new(seed, stream),
            spare: None,
        }
    }

    /// A pair of independent standard normal draws (both halves of one
    /// Box-Muller transform), regardless of any kept spare.
    #[inline]
    pub fn pair(&mut self) -> (f32, f32) {
        let u1 = self.rng.uniform();
        let u2 = self.rng.uniform();
        let r = libm::sqrtf(-2.0 * libm::logf(u1));
        let theta = 2.0 * core::f32::consts::PI * u2;
        (r * libm::cosf(theta), r * libm::sinf(theta))
    }

    /// One standard normal draw (mean 0, variance 1).
    #[inline]
    pub fn sample(&mut self) -> f32 {
        match self.spare.take() {
            Some(z) => z,
            None => {
                let (a, b) = self.pair();
                self.spare = Some(b);
                a
            }
        }
    }

    /// The underlying uniform generator, for draws of other kinds.
    pub fn rng(&mut self) -> &mut Pcg32 {
        &mut self.rng
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pcg32_matches_the_reference_demo() {
        // First six outputs of pcg32_srandom_r(42, 54) in O'Neill's
        // pcg32-demo.c (pcg-c-basic distribution), "Round 1".
        let mut g = Pcg32::new(42, 54);
        let want = [
            0xa15c_02b7_u32,
            0x7b47_f409,
            0xba1d_3330,
            0x83d2_f293,
            0xbfa4_784b,
            0xcbed_606e,
        ];
        for w in want {
            assert_eq!(g.next_u32(), w);
        }
    }

    #[test]
    fn uniform_stays_strictly_inside_the_unit_interval() {
        let mut g = Pcg32::new(1, 2);
        let mut sum = 0.0f64;
        let n = 100_000;
        for _ in 0..n {
            let u = g.uniform();
            assert!(u > 0.0 && u < 1.0);
            sum += f64::from(u);
        }
        // Mean 1/2 with standard error 1/sqrt(12 n) ≈ 0.0009.
        assert!((sum / f64::from(n) - 0.5).abs() < 0.005);
        // The extreme cells are exactly representable and inside (0, 1).
        let (lo, hi) = (
            std::hint::black_box(1.0f32),
            std::hint::black_box(16_777_215.0f32),
        );
        assert!(lo * TWO_POW_MINUS_24 > 0.0);
        assert!(hi * TWO_POW_MINUS_24 < 1.0);
    }

    #[test]
    fn normal_has_unit_variance() {
        let mut n = Normal::new(7, 0);
        let count = 200_000;
        let (mut s1, mut s2) = (0.0f64, 0.0f64);
        for _ in 0..count {
            let z = f64::from(n.sample());
            assert!(z.is_finite());
            s1 += z;
            s2 += z * z;
        }
        let mean = s1 / f64::from(count);
        let var = s2 / f64::from(count) - mean * mean;
        assert!(mean.abs() < 0.01, "mean {mean}");
        assert!((var - 1.0).abs() < 0.015, "variance {var}");
    }
}
