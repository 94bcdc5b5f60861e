//! The loss price: how the rate layer spends the loss budget across
//! packets when several rates are in play.
//!
//! With a rate table the controller minimises the charge per delivered
//! packet at the target loss *on average*, not packet by packet. That is a
//! constrained minimum, and its Lagrangian gives each packet the choice
//! that minimises
//!
//! ```text
//! J(m, P) = charge(m, P) + μ · q(m, P)
//! ```
//!
//! over the rates `m` and powers `P`, where `q` is the chance the packet is
//! lost and `μ` the price of a loss (pC). The outer loop moves `μ` as the
//! adaptive margin moves in the power-only controller: up by a ratio after
//! each loss, down by that ratio to the power `p/(1−p)` after each delivery,
//! so that `μ` can stay bounded only if losses are a fraction `p` of the
//! packets (the ratio scaled by `√((1−p)/p ÷ 99)`, so that the price's noise
//! per packet is that of a 1 % target at every target); it never falls below the recent charge per delivered packet
//! (the minimum of a ratio, charge over deliveries, prices a delivery at
//! least at the ratio itself: Dinkelbach's method), so where losses are
//! dear in themselves (a fix paid for every packet) fewer are taken than
//! the target allows. Where holding the link is cheap the price buys a low `q`; where
//! it is dear (a deep shadow that needs the slowest rate) it accepts a high
//! one, which is what a fixed margin tuned with hindsight over a whole log
//! does, but chosen packet by packet from the estimate.
//!
//! ## The loss model
//! The prediction error `e = z − ẑ` of the shared estimate is taken to be
//! Laplace with scale `b`, the predictor's mean absolute error (the maximum
//! likelihood scale for that error measure). At `x = P − ẑ − offset_m` dB
//! above the requirement, `q = ½·e^(−x/b)` for `x ≥ 0` and
//! `1 − ½·e^(x/b)` below. Its exponential tail is the tail of Rayleigh
//! fading in dB: the chance of a fade deeper than `x` below the mean of the
//! dB values is `≈ 0.56·e^(−0.23x)`, and a Laplace with the mean absolute
//! error of Rayleigh in dB (≈ 4.3 dB) gives `0.5·e^(−0.23x)` (from the
//! exponential distribution of the received power; common practice).
//!
//! ## The minimum at one rate
//! For `x ≥ 0`, `dJ/dx = g − μq/b` with `g` the charge per dB of more
//! power; the charge is piecewise linear in dB and convex for radios whose
//! current rises ever faster with power, so the minimum is where
//! `μq = b·g`: `x* = b·ln 2 · (log2 μ − 1 − log2(b·g))`, found by walking
//! the current table's segments down from the highest power. Below `x = 0`
//! `J` is concave in `x`, so its minimum there is at the lowest power (a
//! packet given up as cheaply as possible) or at `x = 0`. Both candidates,
//! clamped to the power limits and to [`outage_ceiling`], are priced
//! exactly and the cheaper kept.
//!
//! All in integers: logarithms and powers of two from 65-entry tables with
//! linear interpolation (better than 10⁻⁴ octave), prices in pC, the price
//! itself kept as `log2 μ` in 2⁻²⁴ octave.
//!
//! [`outage_ceiling`]: super::config::ControllerConfig::outage_ceiling

/// Fractional bits of the logarithms (octaves).
pub(crate) const LOG_BITS: u32 = 12;
/// Fractional bits of the price's logarithm.
pub(crate) const PRICE_BITS: u32 = 24;

/// `round(4096·log2(1 + i/64))`, i = 0..=64.
const LOG2_TABLE: [u16; 65] = [
    0, 92, 182, 271, 358, 445, 530, 613, 696, 778, 858, 937, 1016, 1093, 1169, 1244, 1319, 1392,
    1465, 1536, 1607, 1677, 1746, 1814, 1882, 1949, 2015, 2080, 2145, 2208, 2272, 2334, 2396, 2457,
    2518, 2578, 2637, 2696, 2754, 2812, 2869, 2926, 2982, 3037, 3092, 3146, 3200, 3254, 3307, 3359,
    3412, 3463, 3514, 3565, 3615, 3665, 3715, 3764, 3812, 3861, 3908, 3956, 4003, 4050, 4096,
];

/// `round(65536·2^(i/64))`, i = 0..=64.
const EXP2_TABLE: [u32; 65] = [
    65536, 66250, 66971, 67700, 68438, 69183, 69936, 70698, 71468, 72246, 73032, 73828, 74632,
    75444, 76266, 77096, 77936, 78785, 79642, 80510, 81386, 82273, 83169, 84074, 84990, 85915,
    86851, 87796, 88752, 89719, 90696, 91684, 92682, 93691, 94711, 95743, 96785, 97839, 98905,
    99982, 101070, 102171, 103283, 104408, 105545, 106694, 107856, 109031, 110218, 111418, 112631,
    113858, 115098, 116351, 117618, 118899, 120194, 121502, 122825, 124163, 125515, 126882, 128263,
    129660, 131072,
];

/// `log2(x)` in 2⁻¹² octave; `i32::MIN` for 0.
pub(crate) fn log2_q12(x: u64) -> i32 {
    if x == 0 {
        return i32::MIN;
    }
    let lz = x.leading_zeros();
    // The leading one at bit 63: the next 6 bits index the table, the 16
    // after them interpolate.
    let m = x << lz;
    let idx = ((m >> 57) & 63) as usize;
    let rem = ((m >> 41) & 0xFFFF) as u32;
    let a = u32::from(LOG2_TABLE.get(idx).copied().unwrap_or(0));
    let b = u32::from(LOG2_TABLE.get(idx + 1).copied().unwrap_or(4096));
    let frac = a + (((b - a) * rem) >> 16);
    // lz ≤ 63: the integer part is within 0..=63.
    #[allow(clippy::cast_possible_wrap)]
    {
        ((63 - lz as i32) << LOG_BITS) + frac as i32
    }
}

/// `2^(y / 4096)`, saturating at `u64::MAX` and rounding down to 0.
pub(crate) fn exp2_q12(y: i32) -> u64 {
    let n = y >> LOG_BITS;
    #[allow(clippy::cast_sign_loss)] // masked: 0..4096
    let f = (y & ((1 << LOG_BITS) - 1)) as u32;
    let idx = (f >> 6) as usize;
    let rem = f & 63;
    let a = EXP2_TABLE.get(idx).copied().unwrap_or(65536);
    let b = EXP2_TABLE.get(idx + 1).copied().unwrap_or(131_072);
    // In [2¹⁶, 2¹⁷): the value times 2¹⁶.
    let mant = u64::from(a + (((b - a) * rem) >> 6));
    if n >= 16 {
        let s = n - 16;
        if s >= 47 {
            u64::MAX
        } else {
            #[allow(clippy::cast_sign_loss)]
            {
                mant << s as u32
            }
        }
    } else {
        let s = 16 - n;
        if s >= 64 {
            0
        } else {
            #[allow(clippy::cast_sign_loss)]
            {
                mant >> s as u32
            }
        }
    }
}

/// The loss model of one packet, derived once per update from the
/// estimate's spread and the price.
#[derive(Debug, Clone, Copy)]
pub(crate) struct LossModel {
    /// `log2 μ − 1` (the ½ of the model), 2⁻¹² octave.
    half_price_log: i32,
    /// `μ`, pC.
    price: u64,
    /// `log2 b`, b in 1/8192 dB, 2⁻¹² octave.
    log_b: i32,
    /// `b·ln 2`, 1/8192 dB (at least 1).
    scale: i64,
    /// `2³² / (b·ln 2)` (a 32-bit division): `x · inv >> 20` is
    /// `x/(b·ln 2)` in 2⁻¹² octave.
    inv: u32,
}

/// `ln 2` in 2⁻¹⁶.
const LN2_Q16: u64 = 45_426;

impl LossModel {
    /// The model at price `log2 μ` (2⁻²⁴ octave) and spread `b` (the mean
    /// absolute error, 1/8192 dB; at least 1/8 dB is used).
    pub(crate) fn new(price_log: i32, b: u32) -> Self {
        let b = u64::from(b.max(1 << 10));
        let scale = ((b * LN2_Q16) >> 16).max(1);
        let pl = price_log >> (PRICE_BITS - LOG_BITS);
        LossModel {
            half_price_log: pl - (1 << LOG_BITS),
            price: exp2_q12(pl),
            log_b: log2_q12(b),
            #[allow(clippy::cast_possible_wrap)] // b < 2³²
            scale: scale as i64,
            // scale ≥ 709: the quotient is below 2²³.
            inv: u32::MAX / u32::try_from(scale).unwrap_or(u32::MAX),
        }
    }

    /// `μ·q` at `x` (1/8192 dB) above the requirement, pC.
    pub(crate) fn risk(&self, x: i32) -> u64 {
        // |x| < 2³¹ and inv < 2²³: the product is below 2⁵⁴.
        let t = (u64::from(x.unsigned_abs()) * u64::from(self.inv)) >> 20;
        let t = i64::try_from(t).unwrap_or(i64::MAX);
        let y = i64::from(self.half_price_log) - t;
        let y = i32::try_from(y.max(i64::from(i32::MIN))).unwrap_or(i32::MIN);
        let tail = exp2_q12(y);
        if x >= 0 {
            tail
        } else {
            self.price.saturating_sub(tail)
        }
    }

    /// The `x ≥ 0` where the price of one more dB of power, `log_g`
    /// (`log2` of pC per 1/8192 dB, 2⁻¹² octave), equals the fall of the
    /// risk; 0 when there is none (the price does not pay for any of it).
    pub(crate) fn balance(&self, log_g: i32) -> i32 {
        let t = i64::from(self.half_price_log) - i64::from(self.log_b) - i64::from(log_g);
        if t <= 0 {
            return 0;
        }
        // t below 2³¹ (a balance beyond half a million octaves is no
        // different) and scale below 2³²: the product fits.
        let x = (t.min(1 << 31) * self.scale) >> LOG_BITS;
        i32::try_from(x).unwrap_or(i32::MAX)
    }

    /// `x` (1/8192 dB) at which the planned loss is `q`, given as
    /// `log2(1/(2q))` (2⁻¹² octave, negative for `q > ½`: see
    /// [`ceiling_log`]).
    pub(crate) fn x_at(&self, ceiling_log: i32) -> i32 {
        // |ceiling_log| < 2³¹ and scale < 2³²: the product fits.
        let x = (i64::from(ceiling_log) * self.scale) >> LOG_BITS;
        i32::try_from(x).unwrap_or(if x < 0 { i32::MIN } else { i32::MAX })
    }
}

/// The outage ceiling as the update uses it: `x_at` of `q` is
/// `b·ln 2 · log2(1/(2q))` for `q ≤ ½` and `−b·ln 2 · log2(1/(2(1−q)))`
/// above; `None` for `q ≥ 1` (no ceiling). 2⁻¹² octave.
pub(crate) fn ceiling_log(q: f32) -> Option<i32> {
    if q >= 1.0 {
        return None;
    }
    let v = if q <= 0.5 {
        libm::log2f(1.0 / (2.0 * q))
    } else {
        -libm::log2f(1.0 / (2.0 * (1.0 - q)))
    };
    #[allow(clippy::cast_possible_truncation)]
    Some(libm::roundf(v * (1 << LOG_BITS) as f32) as i32)
}

#[cfg(test)]
#[allow(
    clippy::unwrap_used,
    clippy::cast_precision_loss,
    clippy::cast_possible_truncation
)]
mod tests {
    use super::*;

    #[test]
    fn log2_is_within_a_ten_thousandth_of_an_octave() {
        for &x in &[
            1u64,
            2,
            3,
            5,
            7,
            100,
            1000,
            12345,
            1 << 20,
            3 << 40,
            u64::MAX,
        ] {
            let want = (x as f64).log2();
            let got = f64::from(log2_q12(x)) / 4096.0;
            assert!((got - want).abs() < 5e-4, "{x}: {got} vs {want}");
        }
        assert_eq!(log2_q12(0), i32::MIN);
    }

    #[test]
    fn exp2_is_within_a_ten_thousandth_relative() {
        for &y in &[
            -40000i32, -4096, -1, 0, 1, 777, 4096, 65536, 150_000, 200_000,
        ] {
            let want = 2f64.powf(f64::from(y) / 4096.0);
            let got = exp2_q12(y) as f64;
            if (1e3..1e18).contains(&want) {
                assert!((got / want - 1.0).abs() < 2e-4, "{y}: {got} vs {want}");
            } else if want < 1.0 {
                assert!(got <= 1.0, "{y}: {got}");
            }
        }
        assert_eq!(exp2_q12(i32::MAX), u64::MAX);
        assert_eq!(exp2_q12(i32::MIN), 0);
    }

    #[test]
    fn risk_follows_the_laplace_model() {
        // μ = 2²⁰ pC, b = 4 dB.
        let b = 4 << 13;
        let m = LossModel::new(20 << PRICE_BITS, b);
        let mu = f64::from(1u32 << 20);
        for &xdb in &[-8.0f64, -1.0, 0.0, 1.0, 4.0, 12.0] {
            let x = (xdb * 8192.0) as i32;
            let q = if xdb >= 0.0 {
                0.5 * (-xdb / 4.0).exp()
            } else {
                1.0 - 0.5 * (xdb / 4.0).exp()
            };
            let got = m.risk(x) as f64;
            assert!(
                (got / (mu * q) - 1.0).abs() < 2e-3,
                "{xdb}: {got} vs {}",
                mu * q
            );
        }
    }

    #[test]
    fn balance_is_where_the_slopes_meet() {
        // μq/b = g at x*: with μ = 2³⁰ pC, b = 3 dB (24576 fine) and
        // g = 2⁶ pC per fine, x* = b·ln(μ/(2·b·g)).
        let b = 3 * 8192;
        let m = LossModel::new(30 << PRICE_BITS, b);
        let x = m.balance(6 << LOG_BITS);
        let want = 3.0 * (f64::from(1u32 << 30) / (2.0 * 24576.0 * 64.0)).ln();
        assert!((f64::from(x) / 8192.0 - want).abs() < 0.01, "{x} vs {want}");
        // No balance when the price is below b·g·2.
        assert_eq!(
            LossModel::new(10 << PRICE_BITS, b).balance(6 << LOG_BITS),
            0
        );
    }

    #[test]
    fn the_ceiling_is_the_quantile_of_the_model() {
        let b = 2 * 8192;
        let m = LossModel::new(0, b);
        for &q in &[0.01f32, 0.1, 0.5, 0.9] {
            let x = f64::from(m.x_at(ceiling_log(q).unwrap())) / 8192.0;
            let model = if x >= 0.0 {
                0.5 * (-x / 2.0).exp()
            } else {
                1.0 - 0.5 * (x / 2.0).exp()
            };
            assert!((model - f64::from(q)).abs() < 1e-3, "{q}: {model}");
        }
        assert_eq!(ceiling_log(1.0), None);
    }
}
