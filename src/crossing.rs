//! Where an interpolated signal crosses a carrier ramp: the arithmetic core
//! of digitally computed natural sampling (see [`crate::edge`] for how the
//! timer's slots map onto it).
//!
//! # The axis
//!
//! One update slot lies between two signal samples, *node 0* (the sample
//! taken at the start of the slot) and *node 1* (the next one). The local
//! variable is `σ`, −1 at node 0 and +1 at node 1; the neighbouring nodes
//! sit at `σ = −3` and `σ = +3`. A polynomial `p(σ)` through 2, 3 or 4 nodes
//! stands for the signal inside the slot.
//!
//! The carrier ramp used here rises from −1 at `σ = −1` to +1 at `σ = +1`,
//! so its value *is* `σ`: the edge lies where `v = p(v)`, and `v`, the
//! carrier value at the crossing, is what the edge solver turns into a high
//! count, `(1 + v) / 2 · top`. A falling ramp is the same problem with time
//! reversed ([`Poly::reversed`]); a ramp spanning half the node interval
//! uses [`Poly::first_half`] or [`Poly::second_half`].
//!
//! # The iteration
//!
//! Start from `v₀ = p(0)`, the signal interpolated at the middle of the
//! slot, which is where uniform sampling's estimate would sit after a delay
//! of half a slot. Each step is Newton-Raphson on `f(v) = v − p(v)`,
//! `v ← v + e / (1 − s)` with `e = p(v) − v` and `s = p'(v)`, the signal's
//! slope in units of the carrier's. The division is replaced by the series
//! `1 / (1 − s) ≈ 1 + s + s² + s³`, three multiply-accumulates. Seen as a
//! fixed-point iteration `v ← g(v)`, its derivative at the root is
//! `1 − (1 − s)(1 + s + s² + s³) = s⁴`: each step shrinks the error by `s⁴`
//! plus the usual Newton term `p''/2 · e²`. For audio `|s|` is small: a
//! full-scale 20 kHz sine on a 384 kHz trailing-edge carrier gives
//! `|s| ≤ 0.164` (`s⁴ < 7.3e-4`), with two updates a period half that. So
//! one step reaches the accuracy of the interpolation itself.
//!
//! # Both legs at once
//!
//! The two legs of a 3-level bridge need the crossings of `p` with the
//! rising and with the falling ramp, that is of `p` and of `p` reversed
//! (`Poly::crossing_pair27`). Both Newton steps start from the same
//! `v₀ = p(0)`, and reversal only flips the odd part of the polynomial, so
//! `p(±v₀)` and the two slopes are a shared even part plus or minus a
//! shared odd part: five multiplies instead of eight before the two
//! series, the same step to within the roundings. With two updates a
//! period the slots are half as long, so is `|s|` (0.082 for the full-scale
//! 20 kHz sine), and there the series stops at `s²`: the step then leaves
//! about `e s³ / (1 − s)` instead of `e s⁴ / (1 − s)`, below 6e-7 of full
//! scale for tones whose third harmonic is in the band (≤ 6.67 kHz),
//! for one multiply-accumulate less a leg. Measured in the reference
//! scenario (`ticktone measure`), THD −145 dB at 6 kHz and −156 dB at
//! 6.67 kHz with the shorter series, THD+N unchanged. With one update a
//! period the shorter series raised THD at 6 kHz from −132 to −120 dB, so
//! it keeps all four terms.
//!
//! # Slew limit
//!
//! A signal steeper than the carrier (`|s| ≥ 1`) can cross it several times
//! or not at all: natural sampling has no single answer there. The step
//! limits `s` to `[−1/2, 1/2)` and every iterate is saturated to
//! `[−1, 1 − 2⁻²⁷]`, so the result is always a valid carrier value (a
//! pulse edge inside the slot) whatever the input; for `|s| < 1/2` the limit
//! is never reached.
//!
//! # Formats
//!
//! Samples and `v` are Q1.31. Coefficients: `d0` Q5.27, `d1` Q4.28, `d2`
//! Q3.29, `d3` Q2.30, chosen so that every product is one 32 × 32 → high
//! 32 multiply (`SMMUL`/`SMMLA` on a Cortex-M4) with `v` in Q1.31, and so
//! that no sum can overflow for any input samples (bounds beside the code).
//! The samples enter with 26 fraction bits (2⁻²⁶ ≈ −156 dB of full scale).

/// High 32 bits of a 32 × 32 product: `SMMUL` on Armv7E-M.
#[inline(always)]
pub(crate) fn mulh(a: i32, b: i32) -> i32 {
    ((a as i64 * b as i64) >> 32) as i32
}

/// [`mulh`] rounded to nearest (halves up): `SMMULR` on Armv7E-M.
#[inline(always)]
pub(crate) fn mulh_round(a: i32, b: i32) -> i32 {
    ((a as i64 * b as i64 + (1 << 31)) >> 32) as i32
}

/// Q5.27 to Q1.31, saturated to `[−1, 1 − 2⁻²⁷]` (`SSAT` + shift).
#[inline(always)]
fn to_q31(a: i32) -> i32 {
    a.clamp(-(1 << 27), (1 << 27) - 1) << 4
}

/// `round(2^32 / 3)`: multiply by 1/3 with [`mulh`].
pub(crate) const THIRD: i32 = 1_431_655_765;

/// An interpolating polynomial over one node interval,
/// `p(σ) = d0 + d1 σ + d2 σ² + d3 σ³` (axis and formats in the module docs).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Poly {
    d0: i32,
    d1: i32,
    d2: i32,
    d3: i32,
}

impl Poly {
    /// The line through node 0 and node 1 (Q1.31 samples).
    #[inline(always)]
    pub fn linear(x0: i32, x1: i32) -> Self {
        Self::linear26(x0 >> 5, x1 >> 5)
    }

    /// The parabola through the node before the slot, node 0 and node 1
    /// (`σ = −3, −1, 1`): Lagrange interpolation needing no later sample.
    #[inline(always)]
    pub fn quadratic(xm1: i32, x0: i32, x1: i32) -> Self {
        Self::quadratic26(xm1 >> 5, x0 >> 5, x1 >> 5)
    }

    /// The cubic through four nodes (`σ = −3, −1, 1, 3`): Lagrange
    /// interpolation centred on the slot.
    #[inline(always)]
    pub fn cubic(xm1: i32, x0: i32, x1: i32, x2: i32) -> Self {
        Self::cubic26(xm1 >> 5, x0 >> 5, x1 >> 5, x2 >> 5)
    }

    /// [`Poly::linear`] from samples already shifted to Q26 (`x >> 5`).
    #[inline(always)]
    pub(crate) fn linear26(s0: i32, s1: i32) -> Self {
        Self {
            d0: s0 + s1,        // (x0 + x1) / 2 in Q27, |.| <= 1
            d1: (s1 - s0) << 1, // (x1 - x0) / 2 in Q28, |.| <= 1
            d2: 0,
            d3: 0,
        }
    }

    /// [`Poly::quadratic`] from Q26 samples.
    #[inline(always)]
    pub(crate) fn quadratic26(sm: i32, s0: i32, s1: i32) -> Self {
        Self {
            // (-xm1 + 6 x0 + 3 x1) / 8: the Q26 sum (|.| <= 10) is 8 d0.
            d0: (3 * (s0 + s0 + s1) - sm) >> 2,
            d1: (s1 - s0) << 1,
            // (xm1 - 2 x0 + x1) / 8: the Q26 sum (|.| <= 4) is d2 in Q29.
            d2: sm - 2 * s0 + s1,
            d3: 0,
        }
    }

    /// [`Poly::cubic`] from Q26 samples.
    #[inline(always)]
    pub(crate) fn cubic26(sm: i32, s0: i32, s1: i32, s2: i32) -> Self {
        let (sum_in, sum_out) = (s0 + s1, sm + s2); // Q26, |.| <= 2
        let (dif_in, dif_out) = (s1 - s0, s2 - sm);
        // d3 = (dif_out - 3 dif_in) / 48; the Q26 difference (|.| <= 8)
        // divided by 3 is d3 in Q30 (|d3| <= 1/6).
        let d3 = mulh(dif_out - 3 * dif_in, THIRD);
        Self {
            // (9 sum_in - sum_out) / 16: the Q26 sum (|.| <= 20) is d0 in Q30.
            d0: (9 * sum_in - sum_out) >> 3,
            // (27 dif_in - dif_out) / 48 = dif_in / 2 - d3, |.| <= 7/6.
            d1: (dif_in << 1) - (d3 >> 2),
            // (sum_out - sum_in) / 16: the Q26 sum (|.| <= 4) is d2 in Q30.
            d2: (sum_out - sum_in) >> 1,
            d3,
        }
    }

    /// The same curve with time reversed, `p(−σ)`: turns a falling ramp
    /// into the rising one [`Poly::crossing`] solves.
    #[inline(always)]
    pub fn reversed(self) -> Self {
        Self {
            d1: -self.d1,
            d3: -self.d3,
            ..self
        }
    }

    /// Reversed if `mask` is −1, unchanged if 0 (branch-free).
    #[inline(always)]
    pub(crate) fn reversed_if(self, mask: i32) -> Self {
        Self {
            d1: (self.d1 ^ mask) - mask,
            d3: (self.d3 ^ mask) - mask,
            ..self
        }
    }

    /// The curve over the first half of the interval (`σ` from −1 to 0),
    /// re-parametrised so that this half spans `σ = −1 .. 1`.
    pub fn first_half(self) -> Self {
        self.half(-1)
    }

    /// The curve over the second half of the interval (`σ` from 0 to 1),
    /// re-parametrised so that this half spans `σ = −1 .. 1`.
    pub fn second_half(self) -> Self {
        self.half(1)
    }

    /// Taylor shift to `c = sg / 2` and scaling by 1/2: with
    /// `σ = c + τ / 2`, the coefficients in `τ` are `p(c)`, `p'(c) / 2`,
    /// `p''(c) / 8`, `d3 / 8`. Each term is bounded by the original ones.
    fn half(self, sg: i32) -> Self {
        let Self { d0, d1, d2, d3 } = self;
        Self {
            d0: d0 + sg * (d1 >> 2) + (d2 >> 4) + sg * (d3 >> 6),
            d1: (d1 >> 1) + sg * (d2 >> 2) + 3 * (d3 >> 5),
            d2: (d2 >> 2) + sg * 3 * (d3 >> 4),
            d3: d3 >> 3,
        }
    }

    /// `p(σ)` for `σ` in Q1.31, saturated to Q1.31.
    pub fn value(self, sigma: i32) -> i32 {
        let Self { d0, d1, d2, d3 } = self;
        to_q31(d0 + mulh(sigma, d1 + mulh(sigma, d2 + mulh(sigma, d3))))
    }

    /// The carrier value `v` (Q1.31) where the ramp rising from −1 at node
    /// 0 to +1 at node 1 meets the curve, `v = p(v)`, after `iterations`
    /// Newton steps from `p(0)` (method, accuracy and slew limit in the
    /// module docs). Always within `[−1, 1)`.
    #[inline(always)]
    pub fn crossing(self, iterations: u32) -> i32 {
        let Self { d0, d1, d2, d3 } = self;
        let mut v = to_q31(d0);
        for _ in 0..iterations {
            // Bounds for any input samples, halves included: |d0| <= 2,
            // |d1| <= 7/6, |d2| <= 1/2, |d3| <= 1/6, |v| <= 1.
            let m = mulh(v, d3); // Q29, |.| <= 1/6
            let t = d2 + m; // Q29, |.| <= 2/3
            let q = d0 + mulh(v, d1 + mulh(v, t)); // p(v), Q27, |.| < 4
            let s = d1 + mulh(v, 2 * t + m); // p'(v), Q28, |.| < 3
            let s = s.clamp(-(1 << 27), (1 << 27) - 1) << 4; // Q32, [-1/2, 1/2)
            let e = q - (v >> 4); // residual, Q27, |.| < 5
                                  // v + e (1 + s + s^2 + s^3) = q + s e (1 + s (1 + s)), |.| < 9
            v = to_q31(q + mulh(e + mulh(e + mulh(e, s), s), s));
        }
        v
    }

    /// Both crossings of the slot in one evaluation, one Newton step each:
    /// `(v₊, v₋)`, `v₊` where the rising ramp meets `p` (as
    /// [`Poly::crossing`]`(1)` with `TERMS = 4`) and `v₋` where it meets `p`
    /// reversed, in Q5.27 saturated to `[−1, 1 − 2⁻²⁷]`. Both steps start
    /// from the same `v₀ = p(0)`, and reversal flips the sign of the odd
    /// part only, so `p(±v₀)` and the slopes are the shared even part plus
    /// or minus the shared odd part: five multiplies for both legs where two
    /// separate evaluations take eight (module docs). `TERMS` (3 or 4) is
    /// the length of the series for `1 / (1 − s)`.
    #[inline(always)]
    pub(crate) fn crossing_pair27<const TERMS: u32>(self) -> (i32, i32) {
        let Self { d0, d1, d2, d3 } = self;
        let v = to_q31(d0);
        // Bounds for any input samples as in `crossing`; |v| <= 1. Horner
        // in v rather than via v²: LLVM knows v² >= 0 and then misses the
        // 32 x 32 -> high 32 multiply on Armv7E-M.
        // d2 v, Q28, |.| <= 1/2; d3 v², Q28, |.| <= 1/6; odd Q28, <= 4/3.
        let a2 = mulh(v, d2);
        let m = mulh(v, mulh(v, d3));
        let odd = d1 + m;
        // p(±v): even part (d0 + d2 v², Q27, |.| <= 5/2) plus or minus the
        // odd part (d1 v + d3 v³, Q27, |.| <= 4/3).
        let pe = d0 + mulh(v, a2);
        let po = mulh(v, odd);
        // Slopes p'(±v) (as seen by each ramp): 2 d2 v plus or minus
        // d1 + 3 d3 v², Q28, |.| <= 1 and 5/3.
        let se = a2 << 1;
        let so = odd + 2 * m;
        let step = |q: i32, s: i32| {
            // s in Q32, [-1/2, 1/2); residual e = p(v) − v, Q27, |.| < 5;
            // v + e (1 + s + s² + s³) = q + s e (1 + s (1 + s)), |.| < 9.
            let s = s.clamp(-(1 << 27), (1 << 27) - 1) << 4;
            let e = q - (v >> 4);
            let w = if TERMS == 4 {
                q + mulh(e + mulh(e + mulh(e, s), s), s)
            } else {
                q + mulh(e + mulh(e, s), s)
            };
            w.clamp(-(1 << 27), (1 << 27) - 1)
        };
        (step(pe + po, se + so), step(pe - po, se - so))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const ONE: f64 = 2147483648.0;

    fn q(x: f64) -> i32 {
        (x * ONE).round().clamp(i32::MIN as f64, i32::MAX as f64) as i32
    }

    fn at(p: Poly, s: f64) -> f64 {
        p.value(q(s)) as f64 / ONE
    }

    /// p(σ) in f64 from the coefficients, any σ.
    fn f(p: Poly, s: f64) -> f64 {
        p.d0 as f64 / (1u64 << 27) as f64
            + p.d1 as f64 / (1u64 << 28) as f64 * s
            + p.d2 as f64 / (1u64 << 29) as f64 * s * s
            + p.d3 as f64 / (1u64 << 30) as f64 * s * s * s
    }

    #[test]
    fn curves_pass_through_their_nodes() {
        // Lagrange interpolation reproduces the samples at its nodes
        // (definition); allowed error: the 2^-26 input truncation.
        let (a, b, c, d) = (0.31, -0.72, 0.93, -0.15);
        let near = |u: f64, w: f64| (u - w).abs() < 1e-7;
        let cu = Poly::cubic(q(a), q(b), q(c), q(d));
        let qu = Poly::quadratic(q(a), q(b), q(c));
        let li = Poly::linear(q(b), q(c));
        for (s, w) in [(-3.0, a), (-1.0, b), (1.0, c), (3.0, d)] {
            assert!(near(f(cu, s), w), "cubic at {s}");
        }
        for (s, w) in [(-3.0, a), (-1.0, b), (1.0, c)] {
            assert!(near(f(qu, s), w), "quadratic at {s}");
        }
        assert!(near(f(li, -1.0), b) && near(f(li, 1.0), c));
        // value() agrees with the coefficients inside [-1, 1).
        assert!(near(at(cu, -1.0), b) && near(at(cu, 0.3), f(cu, 0.3)));
        // Halves meet in the middle of the interval; reversal mirrors.
        for p in [cu, qu, li] {
            let (h1, h2, r) = (p.first_half(), p.second_half(), p.reversed());
            assert!(near(f(h1, -1.0), f(p, -1.0)) && near(f(h1, 1.0), f(p, 0.0)));
            assert!(near(f(h2, -1.0), f(p, 0.0)) && near(f(h2, 1.0), f(p, 1.0)));
            assert!(near(f(h1, 0.0), f(p, -0.5)) && near(f(h2, 0.4), f(p, 0.7)));
            assert!(near(f(r, -1.0), f(p, 1.0)) && near(f(r, 3.0), f(p, -3.0)));
        }
    }

    #[test]
    fn line_crossing_is_exact() {
        // v = d0 + d1 v  =>  v = d0 / (1 - d1) (closed form). Three steps
        // from d0 leave (d1^4)^3 of the error: below the Q27 step here.
        let (x0, x1) = (-0.2, 0.35);
        let p = Poly::linear(q(x0), q(x1));
        let (d0, d1) = ((x0 + x1) / 2.0, (x1 - x0) / 2.0);
        let exact = d0 / (1.0 - d1);
        let v = p.crossing(3) as f64 / ONE;
        assert!((v - exact).abs() < 1e-7, "{v} vs {exact}");
        // One step: error about (exact - d0) d1^4.
        let v1 = p.crossing(1) as f64 / ONE;
        let bound = (exact - d0).abs() * d1.powi(4) * 1.5 + 1e-7;
        assert!((v1 - exact).abs() < bound, "{v1} vs {exact}");
    }

    /// Root of v = p(v) in [-1, 1] by bisection in f64 (the slope stays
    /// below 1 here, so the root is unique).
    fn root(p: Poly) -> f64 {
        let (mut lo, mut hi) = (-1.0, 1.0);
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if mid - f(p, mid) < 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }

    #[test]
    fn pair_matches_two_single_crossings() {
        // The pair is the same Newton step as `crossing(1)` on `p` and on
        // `p` reversed, with shared terms: agreement to a few units of
        // 2^-27 (roundings). Against the exact root (bisection), the error
        // of one step from v0 = p(0) with e0 = p(v0) - v0 and s = p'(v0):
        // the Newton term |p''| / 2 (e0 / (1 - s))^2 (textbook) and the
        // truncated series' |s|^n |e0| / (1 - s) for n terms (crossing
        // docs), each allowed 1.5 times, plus 1e-7 of roundings.
        let mut worst = 0.0f64;
        for k in 0..400 {
            let t = k as f64 * 0.731;
            let samples = [0, 1, 2, 3].map(|j| {
                let u = t + j as f64 * (0.05 + 0.1 * (k % 4) as f64);
                q(0.9 * u.sin() + 0.05 * (3.7 * u).cos())
            });
            let [a, b, c, d] = samples;
            for p in [
                Poly::cubic(a, b, c, d),
                Poly::quadratic(a, b, c),
                Poly::linear(b, c),
            ] {
                let (vp, vm) = p.crossing_pair27::<4>();
                let (sp, sm) = (p.crossing(1) >> 4, p.reversed().crossing(1) >> 4);
                assert!((vp - sp).abs() <= 4 && (vm - sm).abs() <= 4, "{p:?}");
                let (wp, wm) = p.crossing_pair27::<3>();
                let r = p.reversed();
                for (v, p, terms) in [(vp, p, 4), (vm, r, 4), (wp, p, 3), (wm, r, 3)] {
                    let v0 = f(p, 0.0);
                    let e0 = f(p, v0) - v0;
                    let c2 = p.d2 as f64 / (1u64 << 29) as f64;
                    let c3 = p.d3 as f64 / (1u64 << 30) as f64;
                    let s = p.d1 as f64 / (1u64 << 28) as f64 + 2.0 * c2 * v0 + 3.0 * c3 * v0 * v0;
                    let p2 = 2.0 * c2 + 6.0 * c3 * v0;
                    if s.abs() > 0.3 || v0.abs() > 0.99 {
                        continue;
                    }
                    let newton = p2.abs() / 2.0 * (e0 / (1.0 - s)).powi(2);
                    let series = s.abs().powi(terms) * e0.abs() / (1.0 - s);
                    let bound = 1.5 * (newton + series) + 1e-7;
                    let err = (v as f64 / (1u64 << 27) as f64 - root(p)).abs();
                    worst = worst.max(err / bound);
                    assert!(err < bound, "{p:?}: {err} > {bound}");
                }
            }
        }
        println!("largest error / bound: {worst:.2}");
    }

    #[test]
    fn extremes_stay_in_range() {
        let xs = [i32::MIN, i32::MAX, 0, -1, 1];
        for &a in &xs {
            for &b in &xs {
                for &c in &xs {
                    for &d in &xs {
                        for p in [
                            Poly::cubic(a, b, c, d),
                            Poly::quadratic(a, b, c),
                            Poly::linear(b, c),
                        ] {
                            for p in [p, p.reversed(), p.first_half(), p.second_half()] {
                                for it in 0..4 {
                                    let _ = p.crossing(it); // no overflow panic (debug)
                                }
                                // The range holds by construction (the
                                // solver clamps its result); what this
                                // loop tests is that no step overflows.
                                let one = 1 << 27;
                                for (vp, vm) in [p.crossing_pair27::<3>(), p.crossing_pair27::<4>()]
                                {
                                    assert!((-one..one).contains(&vp) && (-one..one).contains(&vm));
                                }
                            }
                        }
                    }
                }
            }
        }
    }
}
