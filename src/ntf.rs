//! Noise transfer function (NTF) design for the requantiser's error
//! feedback, at configuration time.
//!
//! # The family
//!
//! `NTF(z) = B(z) (1 + z^-1)^k / D(z)`, monic (`h[0] = 1`), where
//!
//! - `B(z)` has the `order` zeros that suppress noise in the 20 kHz audio
//!   band: all at DC (`(1 - z^-1)^L`, the textbook reference, [`NtfZeros::Dc`])
//!   or spread over the band at the roots of the Legendre polynomial `P_L`
//!   scaled to the band edge `pi / OSR` ([`NtfZeros::Band`]; R. Schreier &
//!   G. C. Temes, *Understanding Delta-Sigma Data Converters*, 2005, ch. 4:
//!   this minimises the in-band noise integral, 3.5 to 23 dB better than DC
//!   zeros for orders 2 to 6);
//! - `(1 + z^-1)^k` puts `k` zeros at half the update rate. With two updates
//!   a period the rising and the falling edge of a leg sit at offsets that
//!   flip sign every update, so a half bridge (or a 2-level full bridge)
//!   mixes the shaped noise near half the update rate into the audio band,
//!   scaled by about `x w T / 4`; these zeros remove it there. A 3-level
//!   full bridge whose leg B is driven from the same rounded count cancels
//!   that mixing (and the even-order self-mixing of the shaped error) in the
//!   differential output: use `k = 0` there, and with one update a period;
//!   `k = 3` for a half bridge with two updates (measured below);
//! - `D(z)` holds the poles ([`NtfPoles`]): none (FIR), or Butterworth
//!   prototypes mapped by `z = e^s`: radius `W` (rad/sample) for the band
//!   zeros and, mirrored to `z = -e^s`, radius `Wp` for the half-rate zeros.
//!   `(W, Wp)` come from [`pole_table`], chosen on a grid so that the sum of
//!   |h| (the headroom the shaper needs) stays within 4, 8 or 12 while the
//!   in-band noise (plus, for `k > 0`, the noise a half bridge mixes back
//!   from half the update rate) is smallest, at OSR 19.2. Poles barely move
//!   with the OSR for a given sum |h|, so the table serves other OSRs; the
//!   headroom is always computed from the coefficients as implemented.
//!
//! # Why IIR
//! With 128 ticks a half period an FIR NTF of order 5 needs sum |h| = 32 for
//! DC zeros (16 ticks of headroom each side, 12.5 % of the range) and still
//! about 20 with band zeros; with two zeros at half the update rate more.
//! Poles cap the out-of-band gain, so an order-5 IIR NTF keeps sum |h| <= 8
//! (4 ticks) and lowers the out-of-band noise power that PWM's nonlinearity
//! folds back. Cost: `taps` more multiply-accumulates an update.
//!
//! # Measured (lab, reference scenario: 48 kHz in, 98.304 MHz, 384 kHz,
//! up/down, two updates a period, 16x oversampling, natural sampling, 997 Hz
//! at -1 dBFS, no dither)
//!
//! | bridge | order | k | poles | SNR dB | THD+N dB |
//! |---|---|---|---|---|---|
//! | full3 | 3 | 0 | Sum8 | 121.0 | -100.0 |
//! | full3 | 5 | 0 | Sum8 | 139.2 | -100.1 |
//! | full3 | 5 | 2 | Sum8 | 116.9 | -100.0 |
//! | half | 3 | 0 | Sum8 | 70.4 | -69.4 |
//! | half | 3 | 2 | FIR | 102.0 | -101.0 |
//! | half | 5 | 3 | Sum8 | 110.9 | -109.9 |
//! | half | 5 | 3 | FIR | 50.6 | -34.1 (clamped: sum\|h\| 22) |
//!
//! The full-bridge THD+N there is set by a third harmonic (-100 dBc at
//! 997 Hz) of the edge solver's leg B, not by the shaper.
//!
//! # Implemented form
//! The requantiser runs the filter as `u = v + sum c_i s[n-i]`,
//! `q = round(u)`, `e = q - u`, `s[n] = e - sum d_i s[n-i]`, so that
//! `q - v = (1 + C(z)/D(z)) e = NTF(z) e` with `D = 1 + sum d_i z^-i` and
//! `C = N - D`. Both `c` and `d` are `i32` with [`COEF_FRAC_BITS`] fraction
//! bits; [`Ntf::numerator`] and [`Ntf::denominator`] give the NTF of exactly
//! those integers.
//!
//! All of this is `no_std` f64 arithmetic with series for `exp`/`cos`/`sin`:
//! IEEE results, identical on host and target.

use crate::error::ConfigError;

/// Fraction bits of the feedback coefficients (Q6.25 in an `i32`: |c| < 64;
/// the largest coefficient of any design here is 20, and 25 fraction bits
/// keep even order 6's clustered zeros within 0.02 dB of their ideal in-band
/// integral).
pub const COEF_FRAC_BITS: u32 = 25;
/// Highest number of in-band zeros.
pub const MAX_ORDER: u8 = 6;
/// Highest number of zeros at half the update rate.
pub const MAX_HALF_RATE_ZEROS: u8 = 4;
/// Largest filter length: `order + half_rate_zeros`.
pub const MAX_TAPS: usize = MAX_ORDER as usize + MAX_HALF_RATE_ZEROS as usize;
/// Audio band edge the zeros are placed for, Hz.
pub const BAND_HZ: f64 = 20_000.0;
/// Samples of impulse response summed for sum |h| and sum |1/D|.
pub const IMPULSE_LEN: usize = 4096;

/// Where the in-band zeros go.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum NtfZeros {
    /// All at DC: `(1 - z^-1)^L`.
    Dc,
    /// At the Legendre-polynomial roots scaled to the band edge.
    Band,
}

/// Pole set: none (FIR) or a table design for a bound on sum |h|.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum NtfPoles {
    /// FIR: no poles.
    None,
    /// Poles for sum |h| <= 4 (2 ticks of headroom; 6 with dither).
    Sum4,
    /// Poles for sum |h| <= 8 (4 ticks; 12 with dither).
    Sum8,
    /// Poles for sum |h| <= 12 (6 ticks; 18 with dither).
    Sum12,
}

impl NtfPoles {
    /// The sum |h| bound the table design keeps at OSR 19.2, if any.
    pub const fn budget(self) -> Option<f64> {
        match self {
            NtfPoles::None => None,
            NtfPoles::Sum4 => Some(4.0),
            NtfPoles::Sum8 => Some(8.0),
            NtfPoles::Sum12 => Some(12.0),
        }
    }
}

/// Everything that fixes an NTF, apart from the update rate.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct NtfSpec {
    /// In-band zeros, 0..=[`MAX_ORDER`]; 0 with no half-rate zeros is plain
    /// rounding.
    pub order: u8,
    /// Placement of the in-band zeros.
    pub zeros: NtfZeros,
    /// Zeros at half the update rate, 0..=[`MAX_HALF_RATE_ZEROS`].
    pub half_rate_zeros: u8,
    /// Pole set.
    pub poles: NtfPoles,
}

/// Positive roots of the Legendre polynomial `P_L`, `L = 1..=6` (odd `L`
/// also has the root 0, listed first). Abramowitz & Stegun table 25.4
/// (Gauss-Legendre abscissae) \[memory\]; `tests/shaper.rs` re-derives them.
pub const LEGENDRE_ROOTS: [&[f64]; MAX_ORDER as usize] = [
    &[0.0],
    &[0.577_350_269_189_625_8],
    &[0.0, 0.774_596_669_241_483_4],
    &[0.339_981_043_584_856_3, 0.861_136_311_594_052_6],
    &[0.0, 0.538_469_310_105_683_1, 0.906_179_845_938_664],
    &[
        0.238_619_186_083_196_9,
        0.661_209_386_466_264_5,
        0.932_469_514_203_152,
    ],
];

/// `(W, Wp)` pole radii (rad/sample) by `[order - 1][half_rate_zeros]
/// [Sum4, Sum8, Sum12]`; 0 means no poles for that group. Chosen on the
/// grid `{0.05, 0.10, ..., 2.00, none}` at OSR 19.2 with band zeros, to
/// minimise `int_0^wb |NTF|^2 + [k > 0] int_0^wb (0.89^2/8) w^2
/// |NTF(pi - w)|^2 dw` (400-point trapezoid) subject to sum |h| (1500
/// samples) <= budget. Orders 5 and 6 with four half-rate zeros reach no
/// design with sum |h| <= 4: their Sum4 entries are the smallest sum |h| on
/// the grid (4.03 and 4.24). `tests/shaper.rs` checks every entry.
pub const POLE_TABLE: [[[(f32, f32); 3]; 5]; MAX_ORDER as usize] = [
    [
        [(0.00, 0.00), (0.00, 0.00), (0.00, 0.00)],
        [(0.00, 0.15), (0.00, 0.15), (0.00, 0.15)],
        [(0.00, 0.45), (0.00, 0.15), (0.00, 0.15)],
        [(1.25, 0.30), (0.00, 0.15), (0.00, 0.15)],
        [(0.55, 0.15), (0.00, 0.05), (0.00, 0.05)],
    ],
    [
        [(0.00, 0.00), (0.00, 0.00), (0.00, 0.00)],
        [(0.00, 0.00), (1.80, 2.00), (1.80, 2.00)],
        [(0.80, 0.50), (2.00, 0.65), (2.00, 0.65)],
        [(0.60, 0.40), (1.75, 0.40), (2.00, 0.45)],
        [(0.30, 0.15), (1.35, 0.30), (0.00, 0.35)],
    ],
    [
        [(0.90, 0.00), (2.00, 0.00), (2.00, 0.00)],
        [(0.50, 1.10), (0.85, 0.00), (0.85, 0.00)],
        [(0.45, 0.50), (1.10, 1.15), (1.50, 1.65)],
        [(0.45, 0.45), (0.90, 0.55), (1.40, 0.75)],
        [(0.20, 0.15), (0.75, 0.35), (1.15, 0.45)],
    ],
    [
        [(0.45, 0.00), (1.15, 0.00), (1.65, 0.00)],
        [(0.30, 0.55), (0.50, 0.00), (0.50, 0.00)],
        [(0.25, 0.30), (0.65, 1.15), (0.85, 2.00)],
        [(0.25, 0.30), (0.60, 0.70), (0.85, 1.00)],
        [(0.15, 0.15), (0.55, 0.45), (0.80, 0.75)],
    ],
    [
        [(0.25, 0.00), (0.80, 0.00), (1.15, 0.00)],
        [(0.20, 0.50), (0.35, 0.00), (0.35, 0.00)],
        [(0.20, 0.30), (0.45, 0.95), (0.55, 1.60)],
        [(0.20, 0.30), (0.45, 0.65), (0.60, 0.95)],
        [(0.10, 0.10), (0.40, 0.50), (0.60, 0.70)],
    ],
    [
        [(0.20, 0.00), (0.60, 0.00), (0.85, 0.00)],
        [(0.20, 0.35), (0.30, 0.00), (0.30, 0.00)],
        [(0.15, 0.25), (0.35, 0.90), (0.40, 1.45)],
        [(0.15, 0.25), (0.35, 0.60), (0.45, 0.85)],
        [(0.10, 0.15), (0.30, 0.45), (0.45, 0.65)],
    ],
];

/// Pole radii `(W, Wp)` for a spec, from [`POLE_TABLE`]; `(0, 0)` for FIR.
pub fn pole_table(order: u8, half_rate_zeros: u8, poles: NtfPoles) -> (f64, f64) {
    let col = match poles {
        NtfPoles::None => return (0.0, 0.0),
        NtfPoles::Sum4 => 0,
        NtfPoles::Sum8 => 1,
        NtfPoles::Sum12 => 2,
    };
    if order == 0 || order > MAX_ORDER || half_rate_zeros > MAX_HALF_RATE_ZEROS {
        return (0.0, 0.0);
    }
    let (w, wp) = POLE_TABLE[order as usize - 1][half_rate_zeros as usize][col];
    (w as f64, wp as f64)
}

/// A designed NTF: the integer coefficients the requantiser runs and the
/// bounds derived from them.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Ntf {
    taps: usize,
    c: [i32; MAX_TAPS],
    d: [i32; MAX_TAPS],
    sum_abs_h: f64,
    sum_abs_g: f64,
    osr: f64,
}

impl Ntf {
    /// Plain rounding: `NTF = 1`.
    pub const ROUND: Self = Self {
        taps: 0,
        c: [0; MAX_TAPS],
        d: [0; MAX_TAPS],
        sum_abs_h: 1.0,
        sum_abs_g: 1.0,
        osr: 0.0,
    };

    /// Design the NTF of `spec` for `update_hz` updates a second (OSR =
    /// `update_hz / (2 * BAND_HZ)`).
    ///
    /// # Errors
    /// [`ConfigError::ShaperOrder`], [`ConfigError::ShaperHalfRateZeros`]
    /// for counts out of range; [`ConfigError::ShaperBand`] when the update
    /// rate is not above twice the band; [`ConfigError::ShaperState`] if
    /// the coefficients do not fit their format or the impulse response has
    /// not decayed within [`IMPULSE_LEN`] samples.
    pub fn design(spec: NtfSpec, update_hz: f64) -> Result<Self, ConfigError> {
        let (w, wp) = pole_table(spec.order, spec.half_rate_zeros, spec.poles);
        Self::design_with_poles(spec, update_hz, w, wp)
    }

    /// [`Ntf::design`] with explicit Butterworth pole radii `w` (band
    /// zeros) and `wp` (half-rate zeros), rad/sample, 0 for none;
    /// `spec.poles` is ignored. For design studies and the table check.
    ///
    /// # Errors
    /// As [`Ntf::design`].
    pub fn design_with_poles(
        spec: NtfSpec,
        update_hz: f64,
        w: f64,
        wp: f64,
    ) -> Result<Self, ConfigError> {
        if spec.order > MAX_ORDER {
            return Err(ConfigError::ShaperOrder {
                order: spec.order,
                max: MAX_ORDER,
            });
        }
        if spec.half_rate_zeros > MAX_HALF_RATE_ZEROS {
            return Err(ConfigError::ShaperHalfRateZeros {
                zeros: spec.half_rate_zeros,
                max: MAX_HALF_RATE_ZEROS,
            });
        }
        let taps = (spec.order + spec.half_rate_zeros) as usize;
        if taps == 0 {
            return Ok(Self::ROUND);
        }
        let osr = update_hz / (2.0 * BAND_HZ);
        if !(osr > 1.0 && osr.is_finite()) {
            return Err(ConfigError::ShaperBand { update_hz });
        }
        let wb = core::f64::consts::PI / osr;
        let mut num = Poly::one();
        // In-band zeros.
        match spec.zeros {
            NtfZeros::Dc => {
                for _ in 0..spec.order {
                    num.mul1(-1.0);
                }
            }
            NtfZeros::Band => {
                if spec.order > 0 {
                    for &r in LEGENDRE_ROOTS[spec.order as usize - 1] {
                        if r == 0.0 {
                            num.mul1(-1.0);
                        } else {
                            num.mul2(-2.0 * cos(r * wb), 1.0);
                        }
                    }
                }
            }
        }
        for _ in 0..spec.half_rate_zeros {
            num.mul1(1.0);
        }
        // Poles.
        let mut den = Poly::one();
        butterworth_poles(&mut den, spec.order, w, 1.0);
        butterworth_poles(&mut den, spec.half_rate_zeros, wp, -1.0);
        // Integer coefficients: d from D, c = N - D.
        let state_err = ConfigError::ShaperState {
            order: spec.order,
            half_rate_zeros: spec.half_rate_zeros,
        };
        let mut c = [0i32; MAX_TAPS];
        let mut d = [0i32; MAX_TAPS];
        for i in 0..taps {
            d[i] = to_q(den.0[i + 1]).ok_or(state_err)?;
            c[i] = to_q(num.0[i + 1] - den.0[i + 1]).ok_or(state_err)?;
        }
        let mut ntf = Self {
            taps,
            c,
            d,
            sum_abs_h: 0.0,
            sum_abs_g: 0.0,
            osr,
        };
        let (sh, tail_h) = ntf.impulse_sum(true);
        let (sg, tail_g) = ntf.impulse_sum(false);
        if !(tail_h < 1e-12 && tail_g < 1e-12 && sh.is_finite() && sg.is_finite()) {
            return Err(state_err);
        }
        ntf.sum_abs_h = sh;
        ntf.sum_abs_g = sg;
        Ok(ntf)
    }

    /// Filter length (state words): `order + half_rate_zeros`.
    pub const fn taps(&self) -> usize {
        self.taps
    }

    /// No poles.
    pub fn is_fir(&self) -> bool {
        self.d.iter().all(|&x| x == 0)
    }

    /// Feedback coefficients `c_i = n_i - d_i`, `i = 1..=taps`, with
    /// [`COEF_FRAC_BITS`] fraction bits.
    pub const fn feedback_coefs(&self) -> &[i32; MAX_TAPS] {
        &self.c
    }

    /// Pole coefficients `d_i`, `i = 1..=taps`, with [`COEF_FRAC_BITS`]
    /// fraction bits.
    pub const fn pole_coefs(&self) -> &[i32; MAX_TAPS] {
        &self.d
    }

    /// Numerator `N(z) = D(z) + C(z)` of the implemented NTF, coefficients
    /// of `z^0 .. z^-taps` (the rest zero).
    pub fn numerator(&self) -> [f64; MAX_TAPS + 1] {
        let mut n = self.denominator();
        for i in 0..self.taps {
            n[i + 1] += self.c[i] as f64 / Q;
        }
        n
    }

    /// Denominator `D(z)` of the implemented NTF.
    pub fn denominator(&self) -> [f64; MAX_TAPS + 1] {
        let mut dd = [0.0; MAX_TAPS + 1];
        dd[0] = 1.0;
        for i in 0..self.taps {
            dd[i + 1] = self.d[i] as f64 / Q;
        }
        dd
    }

    /// Sum of |h| over the NTF's impulse response (`h[0] = 1` included):
    /// the output error is at most this times the largest quantiser error.
    pub const fn sum_abs_h(&self) -> f64 {
        self.sum_abs_h
    }

    /// Sum of |g| over the impulse response of `1 / D(z)`: bounds the
    /// filter state.
    pub const fn sum_abs_g(&self) -> f64 {
        self.sum_abs_g
    }

    /// Oversampling ratio designed for (0 for plain rounding).
    pub const fn osr(&self) -> f64 {
        self.osr
    }

    /// Sum of |response| over [`IMPULSE_LEN`] samples, and over the last
    /// 256 of them: of the NTF (`ntf = true`) or of `1/D`.
    fn impulse_sum(&self, ntf: bool) -> (f64, f64) {
        let n = self.numerator();
        let dd = self.denominator();
        let mut hist = [0.0f64; MAX_TAPS];
        let (mut sum, mut tail) = (0.0, 0.0);
        for k in 0..IMPULSE_LEN {
            // y[k] = x-part - sum d_i y[k-i], x = impulse through N (or 1).
            let mut y = if ntf {
                if k <= self.taps {
                    n[k]
                } else {
                    0.0
                }
            } else if k == 0 {
                1.0
            } else {
                0.0
            };
            for i in 0..self.taps {
                y -= dd[i + 1] * hist[i];
            }
            for i in (1..MAX_TAPS).rev() {
                hist[i] = hist[i - 1];
            }
            hist[0] = y;
            let a = if y < 0.0 { -y } else { y };
            sum += a;
            if k >= IMPULSE_LEN - 256 {
                tail += a;
            }
        }
        (sum, tail)
    }
}

const Q: f64 = (1u64 << COEF_FRAC_BITS) as f64;

fn to_q(x: f64) -> Option<i32> {
    let s = x * Q;
    if s.is_nan() || s.abs() >= i32::MAX as f64 - 1.0 {
        return None;
    }
    Some(if s >= 0.0 {
        (s + 0.5) as i32
    } else {
        -((-s + 0.5) as i32)
    })
}

/// Polynomial in `z^-1`, coefficients of `z^0 ..`.
struct Poly([f64; MAX_TAPS + 1]);

impl Poly {
    fn one() -> Self {
        let mut p = [0.0; MAX_TAPS + 1];
        p[0] = 1.0;
        Poly(p)
    }
    /// Multiply by `1 + a z^-1`.
    fn mul1(&mut self, a: f64) {
        for i in (1..=MAX_TAPS).rev() {
            self.0[i] += a * self.0[i - 1];
        }
    }
    /// Multiply by `1 + a z^-1 + b z^-2`.
    fn mul2(&mut self, a: f64, b: f64) {
        for i in (1..=MAX_TAPS).rev() {
            let two = if i >= 2 { b * self.0[i - 2] } else { 0.0 };
            self.0[i] += a * self.0[i - 1] + two;
        }
    }
}

/// Multiply `den` by the `n` poles `sign * exp(s_m)`, where `s_m` are the
/// Butterworth poles of radius `w`: `w exp(j pi (2m + n + 1) / (2n))`.
/// `w = 0` adds none.
fn butterworth_poles(den: &mut Poly, n: u8, w: f64, sign: f64) {
    if n == 0 || w <= 0.0 {
        return;
    }
    let pi = core::f64::consts::PI;
    let nf = n as f64;
    for m in 0..(n / 2) {
        let ang = pi * (2.0 * m as f64 + nf + 1.0) / (2.0 * nf);
        let (re, im) = (w * cos(ang), w * sin(ang));
        let r = exp(re);
        // (1 - p z^-1)(1 - p* z^-1), p = sign * r e^{j im}
        den.mul2(-2.0 * sign * r * cos(im), r * r);
    }
    if n % 2 == 1 {
        den.mul1(-sign * exp(-w));
    }
}

/// `cos x` for |x| <= 4 by its Taylor series (terms until below 1e-18).
pub(crate) fn cos(x: f64) -> f64 {
    alternating_series(1.0, x * x, 0.0)
}

/// `sin x` for |x| <= 4 by its Taylor series.
pub(crate) fn sin(x: f64) -> f64 {
    alternating_series(x, x * x, 1.0)
}

/// `first - first x^2 / ((k+1)(k+2)) + ...`: the cosine series from
/// `(1, k = 0)`, the sine series from `(x, k = 1)`.
fn alternating_series(first: f64, x2: f64, k0: f64) -> f64 {
    let (mut term, mut sum, mut k) = (first, first, k0);
    while k < 60.0 {
        term *= -x2 / ((k + 1.0) * (k + 2.0));
        sum += term;
        k += 2.0;
        if term.abs() < 1e-18 {
            break;
        }
    }
    sum
}

/// `exp x` for |x| <= 4 by its Taylor series.
pub(crate) fn exp(x: f64) -> f64 {
    let (mut term, mut sum, mut k) = (1.0f64, 1.0f64, 0.0f64);
    while k < 80.0 {
        k += 1.0;
        term *= x / k;
        sum += term;
        if term.abs() < 1e-18 {
            break;
        }
    }
    sum
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn series_match_std() {
        // Oracle: std's libm-backed functions.
        for i in -40..=40 {
            let x = i as f64 * 0.1;
            assert!((cos(x) - x.cos()).abs() < 1e-14, "cos {x}");
            assert!((sin(x) - x.sin()).abs() < 1e-14, "sin {x}");
            assert!((exp(x) - x.exp()).abs() < 1e-13 * x.exp(), "exp {x}");
        }
    }

    #[test]
    fn dc_fir_is_binomial() {
        // (1 - z^-1)^3 = 1 - 3 z^-1 + 3 z^-2 - z^-3 (binomial theorem),
        // sum |h| = 2^3 (REFERENCES.md section 4).
        let spec = NtfSpec {
            order: 3,
            zeros: NtfZeros::Dc,
            half_rate_zeros: 0,
            poles: NtfPoles::None,
        };
        let n = Ntf::design(spec, 768e3).unwrap();
        assert_eq!(&n.numerator()[..4], &[1.0, -3.0, 3.0, -1.0]);
        assert!((n.sum_abs_h() - 8.0).abs() < 1e-12);
    }
}
