//! Noise-shaped requantiser: NTF design, measured in-band noise against the
//! NTF integral, no-overload property, dither statistics.

use proptest::prelude::*;
use rustfft::{num_complex::Complex, FftPlanner};
use std::f64::consts::PI;
use ticktone::dither::{Tpdf, TPDF_PEAK_Q16};
use ticktone::edge::FRAC_BITS;
use ticktone::ntf::{
    Ntf, NtfPoles, NtfSpec, NtfZeros, LEGENDRE_ROOTS, MAX_HALF_RATE_ZEROS, MAX_ORDER, POLE_TABLE,
};
use ticktone::requant::{ClampCounts, Requantiser};
use ticktone::timer::{Timer, TimerSpec, UpdateScheme};
use ticktone::ShaperSpec;

const ONE: f64 = (1u32 << FRAC_BITS) as f64;
const HALF: i32 = 1 << (FRAC_BITS - 1);

/// Reference scenario timer: 98.304 MHz, 384 kHz, up/down, two updates a
/// period: 128 ticks an edge, 768 kHz updates, OSR 19.2.
fn reference_timer() -> Timer {
    Timer::try_new(TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Double)).unwrap()
}

/// |NTF(e^{jw})|^2 from numerator and denominator coefficients.
fn ntf_power(n: &[f64], d: &[f64], w: f64) -> f64 {
    let eval = |p: &[f64]| {
        let (mut re, mut im) = (0.0, 0.0);
        for (k, &c) in p.iter().enumerate() {
            re += c * (k as f64 * w).cos();
            im -= c * (k as f64 * w).sin();
        }
        re * re + im * im
    };
    eval(n) / eval(d)
}

/// (1/pi) int_0^wb |NTF|^2 dw by composite Simpson, `m` (even) intervals:
/// the in-band fraction of the power of white noise passed through the NTF.
fn band_integral(ntf: &Ntf, wb: f64, m: usize) -> f64 {
    let (n, d) = (ntf.numerator(), ntf.denominator());
    let h = wb / m as f64;
    let mut s = ntf_power(&n, &d, 0.0) + ntf_power(&n, &d, wb);
    for i in 1..m {
        s += ntf_power(&n, &d, i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
    }
    s * h / 3.0 / PI
}

fn spec(order: u8, zeros: NtfZeros, k: u8, poles: NtfPoles) -> NtfSpec {
    NtfSpec {
        order,
        zeros,
        half_rate_zeros: k,
        poles,
    }
}

fn db(x: f64) -> f64 {
    10.0 * x.log10()
}

#[test]
fn legendre_roots_are_roots() {
    // Source: Bonnet's recursion (n+1) P_{n+1} = (2n+1) x P_n - n P_{n-1}
    // (Abramowitz & Stegun 22.7.10 [memory]); P_L has L simple roots in
    // (-1, 1), symmetric about 0.
    for l in 1..=MAX_ORDER as usize {
        let roots = LEGENDRE_ROOTS[l - 1];
        let count: usize = roots.iter().map(|&r| if r == 0.0 { 1 } else { 2 }).sum();
        assert_eq!(count, l, "P_{l} root count");
        for &r in roots {
            let (mut p0, mut p1) = (1.0f64, r);
            for n in 1..l {
                let p2 = ((2 * n + 1) as f64 * r * p1 - n as f64 * p0) / (n + 1) as f64;
                p0 = p1;
                p1 = p2;
            }
            assert!(p1.abs() < 1e-14, "P_{l}({r}) = {p1}");
            assert!((0.0..1.0).contains(&r));
        }
    }
}

#[test]
fn optimised_zeros_gain_over_dc_zeros() {
    // Source: REFERENCES.md section 4 (Schreier & Temes table 4.1,
    // [memory]): 3.52, 7.96, 12.82, 17.93, 23.19 dB for L = 2..6. Those
    // are the small-angle values; the exact integrals at OSR 19.2 differ by
    // under 0.01 dB [computed here with numpy, exact integral], so 0.02 dB.
    let gains = [3.52, 7.96, 12.82, 17.93, 23.19];
    let wb = PI / 19.2;
    for l in 2..=6u8 {
        let band = Ntf::design(spec(l, NtfZeros::Band, 0, NtfPoles::None), 768e3).unwrap();
        let dc = Ntf::design(spec(l, NtfZeros::Dc, 0, NtfPoles::None), 768e3).unwrap();
        let gain = db(band_integral(&dc, wb, 2000) / band_integral(&band, wb, 2000));
        let want = gains[l as usize - 2];
        assert!((gain - want).abs() < 0.02, "L={l}: {gain:.3} dB vs {want}");
    }
}

#[test]
fn dc_zeros_in_band_integral_closed_form() {
    // Source: REFERENCES.md section 4 (Schreier & Temes ch. 4):
    // IBN/(D^2/12) = (1/pi) int_0^wb (2 sin(w/2))^(2L) dw ~ pi^(2L) /
    // ((2L+1) OSR^(2L+1)). Exact closed form [derived]: (2 - 2cos w)^L =
    // sum_k (-1)^k C(2L, L+k) e^{jkw}, so the integral is
    // (1/pi) [C(2L,L) wb + 2 sum_{k=1..L} (-1)^k C(2L,L+k) sin(k wb)/k].
    let binom =
        |n: u64, k: u64| -> f64 { (1..=k).fold(1.0, |a, i| a * (n - k + i) as f64 / i as f64) };
    for &osr in &[9.6, 19.2] {
        let wb = PI / osr;
        for l in 1..=5u64 {
            let ntf =
                Ntf::design(spec(l as u8, NtfZeros::Dc, 0, NtfPoles::None), osr * 40e3).unwrap();
            let numeric = band_integral(&ntf, wb, 2000);
            let mut exact = binom(2 * l, l) * wb;
            let mut terms = exact;
            for k in 1..=l {
                let sign = if k % 2 == 1 { -1.0 } else { 1.0 };
                let t = 2.0 * binom(2 * l, l + k) * (k as f64 * wb).sin() / k as f64;
                exact += sign * t;
                terms += t;
            }
            exact /= PI;
            // The closed form cancels terms of size `terms` down to `exact`:
            // allow a few ulps of `terms`, and 1e-7 for Simpson.
            let tol = 1e-7 * exact + 8.0 * f64::EPSILON * terms / PI;
            assert!(
                (numeric - exact).abs() < tol,
                "L={l} OSR={osr}: {numeric} vs {exact}"
            );
            // The approximation drops the O(wb^2) term [derived: (2 sin(w/2))^2L
            // = w^2L (1 - L w^2/12 + ...)], so approx/exact = 1 + L(2L+1)
            // wb^2 / (12 (2L+3)) + O(wb^4).
            let approx = PI.powi(2 * l as i32) / ((2 * l + 1) as f64 * osr.powi(2 * l as i32 + 1));
            let lf = l as f64;
            let first = lf * (2.0 * lf + 1.0) * wb * wb / (12.0 * (2.0 * lf + 3.0));
            let resid = approx / exact - 1.0 - first;
            assert!(resid.abs() < 3e-3, "L={l} OSR={osr}: {resid}");
        }
    }
}

/// Run the requantiser alone on a busy signal; returns (measured in-band
/// power of q - v, in tick^2; variance of the quantiser error, tick^2).
fn measure_in_band(q: &mut Requantiser, top: u32, wb: f64, len: usize) -> (f64, f64) {
    let amp = 0.9 * q.max_modulation() as f64 * top as f64 / 2.0;
    let mid = top as f64 / 2.0;
    let warm = 2048;
    let mut y = Vec::with_capacity(len);
    let mut evar = 0.0;
    for n in 0..(warm + len) {
        let t = n as f64;
        // Three incommensurate tones and a slow drift: a busy signal.
        let x = 0.5 * (2.0 * PI * 0.001_298_7 * t).sin()
            + 0.3 * (2.0 * PI * 0.017_453_3 * t + 1.0).sin()
            + 0.15 * (2.0 * PI * 0.000_031_4 * t).sin()
            + 0.05 * (2.0 * PI * 0.211_12 * t).sin();
        let v = ((mid + amp * x) * ONE).round() as i32;
        let (out, r) = q.quantise_traced(v);
        if n >= warm {
            y.push(out as f64 - v as f64 / ONE);
            evar += (r as f64 / ONE).powi(2);
        }
    }
    // Nuttall window, continuous first derivative (A. H. Nuttall, IEEE
    // Trans. ASSP 29(1) 1981): -93 dB side lobes falling 18 dB/octave, so
    // the large shaped noise above the band does not leak into it.
    let a = [0.355_768, 0.487_396, 0.144_232, 0.012_604];
    let nf = len as f64;
    let mut buf: Vec<Complex<f64>> = Vec::with_capacity(len);
    let mut w2 = 0.0;
    for (i, &v) in y.iter().enumerate() {
        let p = 2.0 * PI * i as f64 / nf;
        let w = a[0] - a[1] * p.cos() + a[2] * (2.0 * p).cos() - a[3] * (3.0 * p).cos();
        w2 += w * w;
        buf.push(Complex::new(v * w, 0.0));
    }
    FftPlanner::new().plan_fft_forward(len).process(&mut buf);
    // White noise of variance s2 gives E|X_k|^2 = s2 sum w^2, and the band
    // holds 2 kb of the N two-sided bins: power = 2 sum |X_k|^2 / (N sum w^2).
    let kb = (wb / (2.0 * PI) * nf) as usize;
    let p: f64 = buf[1..=kb].iter().map(|c| c.norm_sqr()).sum::<f64>() * 2.0 / (nf * w2);
    (p, evar / len as f64)
}

#[test]
fn measured_in_band_noise_matches_ntf_integral() {
    // Source: the linear model q - v = NTF(z) e with e white of variance
    // sigma_e^2 (REFERENCES.md section 4; Schreier & Temes ch. 4): in-band
    // power = sigma_e^2 (1/pi) int_0^wb |NTF|^2 dw. Bar (issue 4): within
    // 2 dB for orders 1..5, for the NTF as implemented.
    let timer = reference_timer();
    let top = timer.top();
    let wb = PI / 19.2;
    let families = [
        ("band iir sum8", NtfZeros::Band, 0, NtfPoles::Sum8),
        ("band iir sum8 k=2", NtfZeros::Band, 2, NtfPoles::Sum8),
        ("band fir", NtfZeros::Band, 0, NtfPoles::None),
        ("dc fir", NtfZeros::Dc, 0, NtfPoles::None),
    ];
    for (name, zeros, k, poles) in families {
        for order in 1..=5u8 {
            let s = ShaperSpec::new(order)
                .with_zeros(zeros)
                .with_half_rate_zeros(k)
                .with_poles(poles);
            let mut q = Requantiser::try_new(&timer, 0, top, s).unwrap();
            let (measured, evar) = measure_in_band(&mut q, top, wb, 1 << 15);
            // Plus the fixed-point floor: the feedback sum is rounded to Q16
            // (and, with poles, the state too), a white error of 2^-32/12
            // tick^2 that reaches the output unshaped ((NTF - 1) ~ -1 in
            // band for the state rounding): about -153 dB re full scale.
            let lsb2 = (1.0 / ONE).powi(2) / 12.0;
            let floor = lsb2 * wb / PI * if q.ntf().is_fir() { 1.0 } else { 2.0 };
            let predicted = evar * band_integral(q.ntf(), wb, 2000) + floor;
            let diff = db(measured / predicted);
            eprintln!(
                "{name} L={order}: sum|h| {:.2}, in-band {:.1} dB re 1 tick^2, predicted {:.1}, diff {diff:+.2} dB, sigma_e^2 {evar:.4}",
                q.ntf().sum_abs_h(),
                db(measured),
                db(predicted)
            );
            assert!(diff.abs() < 2.0, "{name} L={order}: {diff:.2} dB");
            // Uniform rounding error: variance 1/12 tick^2 (Bennett 1948, as
            // in Schreier & Temes ch. 2 [memory]).
            assert!((evar * 12.0 - 1.0).abs() < 0.05, "sigma_e^2 {evar}");
            assert_eq!(q.counts(), ClampCounts::default());
        }
    }
}

#[test]
fn pole_table_meets_its_rule() {
    // Source: the rule stated at ntf::POLE_TABLE: minimise the band (and,
    // for k > 0, mixed-back) noise metric at OSR 19.2 subject to sum |h| <=
    // budget, on the grid {0.05 .. 2.00 step 0.05, none}. Checks: the
    // budget holds (except the two documented entries), and no grid
    // neighbour that keeps the budget has a lower metric by more than
    // 0.05 dB (the table was chosen from unquantised coefficients).
    let wb = PI / 19.2;
    let grid: Vec<f64> = (1..=40).map(|i| i as f64 * 0.05).chain([0.0]).collect();
    let idx = |x: f32| {
        grid.iter()
            .position(|&g| (g - x as f64).abs() < 1e-6)
            .unwrap()
    };
    let metric = |ntf: &Ntf, k: u8| {
        let (n, d) = (ntf.numerator(), ntf.denominator());
        let m = 400;
        let mut s = 0.0;
        for i in 0..m {
            let w = wb * i as f64 / (m - 1) as f64;
            let mut f = ntf_power(&n, &d, w);
            if k > 0 {
                f += 0.89f64.powi(2) / 8.0 * w * w * ntf_power(&n, &d, PI - w);
            }
            s += if i == 0 || i == m - 1 { f / 2.0 } else { f };
        }
        s
    };
    let budgets = [4.0, 8.0, 12.0];
    for l in 1..=MAX_ORDER {
        for k in 0..=MAX_HALF_RATE_ZEROS {
            for (col, &budget) in budgets.iter().enumerate() {
                let (w, wp) = POLE_TABLE[l as usize - 1][k as usize][col];
                let sp = spec(l, NtfZeros::Band, k, NtfPoles::None);
                let mk = |a: usize, b: usize| {
                    Ntf::design_with_poles(sp, 768e3, grid[a], grid[b]).unwrap()
                };
                let (iw, iwp) = (idx(w), idx(wp));
                let base = mk(iw, iwp);
                let exception = l >= 5 && k == 4 && col == 0;
                let limit = if exception { 4.25 } else { budget + 0.01 };
                assert!(
                    base.sum_abs_h() <= limit,
                    "L={l} k={k} budget {budget}: {}",
                    base.sum_abs_h()
                );
                if exception {
                    continue;
                }
                let m0 = metric(&base, k);
                let mut neighbours = vec![];
                for dw in [-1i32, 1] {
                    let j = iw as i32 + dw;
                    if (0..grid.len() as i32).contains(&j) {
                        neighbours.push((j as usize, iwp));
                    }
                    let j = iwp as i32 + dw;
                    if k > 0 && (0..grid.len() as i32).contains(&j) {
                        neighbours.push((iw, j as usize));
                    }
                }
                for (a, b) in neighbours {
                    let n = mk(a, b);
                    if n.sum_abs_h() <= budget {
                        let m1 = metric(&n, k);
                        assert!(
                            db(m0 / m1) < 0.05,
                            "L={l} k={k} budget {budget}: neighbour ({}, {}) better by {:.2} dB",
                            grid[a],
                            grid[b],
                            db(m0 / m1)
                        );
                    }
                }
            }
        }
    }
}

fn any_shaper() -> impl Strategy<Value = ShaperSpec> {
    (
        0..=MAX_ORDER,
        0..=MAX_HALF_RATE_ZEROS,
        prop_oneof![Just(NtfZeros::Dc), Just(NtfZeros::Band)],
        prop_oneof![
            Just(NtfPoles::None),
            Just(NtfPoles::Sum4),
            Just(NtfPoles::Sum8),
            Just(NtfPoles::Sum12)
        ],
        any::<bool>(),
    )
        .prop_map(|(order, k, zeros, poles, dither)| {
            ShaperSpec::new(order)
                .with_half_rate_zeros(k)
                .with_zeros(zeros)
                .with_poles(poles)
                .with_dither(dither)
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    /// Source: the no-overload bound (REFERENCES.md section 4, after Kenney
    /// & Carley): inputs within the exposed maximum modulation never leave
    /// the quantiser's error beyond half a tick; beyond it the clamp is
    /// counted and the error stays bounded, so the shaper recovers.
    #[test]
    fn no_overload_within_max_modulation(
        shaper in any_shaper(),
        low in 0u32..12,
        high in 116u32..=128,
        xs in prop::collection::vec(-1.0f64..=1.0, 50..400),
        over in prop::collection::vec(-1.6f64..=1.6, 20..100),
        seed in any::<u32>(),
    ) {
        let timer = reference_timer();
        let top = timer.top() as f64;
        let q = Requantiser::try_new(&timer, low, high, shaper);
        let mut q = match q { Ok(q) => q, Err(_) => return Ok(()) };
        q.reseed(seed);
        let (in_lo, in_hi) = q.input_range_q16();
        // Inputs over the whole accepted range (not only the symmetric part).
        let to_v = |x: f64| {
            let c = (in_lo as f64 + in_hi as f64) / 2.0 + x * (in_hi as f64 - in_lo as f64) / 2.0;
            (c.round() as i64).clamp(in_lo as i64, in_hi as i64) as i32
        };
        let check = |q: &mut Requantiser, v: i32| -> Result<(), TestCaseError> {
            let (out, r) = q.quantise_traced(v);
            prop_assert!(r > -HALF && r <= HALF, "error {} Q16", r);
            prop_assert!(out >= low && out <= high);
            Ok(())
        };
        for &x in &xs { check(&mut q, to_v(x))?; }
        prop_assert_eq!(q.counts(), ClampCounts::default());
        // The symmetric modulation the requantiser exposes fits that range.
        let m = q.max_modulation() as f64;
        let mid = top / 2.0 * ONE;
        prop_assert!(mid - m * mid * 1.0 >= in_lo as f64 - 1.0 || m == 0.0);
        // Beyond the range: clamped and counted, never overloaded.
        let mut outside = 0;
        for &x in &over {
            let c = (in_lo as f64 + in_hi as f64) / 2.0 + x * (in_hi as f64 - in_lo as f64) / 2.0;
            let v = c.round() as i32;
            if v < in_lo || v > in_hi { outside += 1; }
            check(&mut q, v)?;
        }
        let c = q.counts();
        prop_assert_eq!(c.low + c.high, outside);
        prop_assert_eq!(c.overload, 0);
        // Back in range: still within half a tick, no new clamps.
        for &x in &xs { check(&mut q, to_v(x))?; }
        prop_assert_eq!(q.counts().low + q.counts().high, outside);
    }
}

#[test]
fn max_modulation_from_headroom() {
    // Source: REFERENCES.md section 4 bound, sum |h| = 2^L for (1 - z^-1)^L:
    // headroom (2^L - 1)/2 ticks (+ rounding margin) each side, so with
    // [0, 128] ticks the largest modulation is about 1 - (2^L - 2)/128.
    let timer = reference_timer();
    for l in 1..=5u8 {
        let s = ShaperSpec::new(l)
            .with_zeros(NtfZeros::Dc)
            .with_poles(NtfPoles::None);
        let q = Requantiser::try_new(&timer, 0, 128, s).unwrap();
        let want = 1.0 - ((1u32 << l) as f64 - 2.0) / 128.0;
        let got = q.max_modulation() as f64;
        assert!(
            got <= want.min(1.0) + 1e-6 && got > want - 1e-3,
            "L={l}: {got} vs {want}"
        );
    }
    // Order 5 with dither: max|e| = 1.5 ticks, headroom 1.5*32 - 0.5 ... no
    // room for 32 ticks of feedback plus dither in a 12-tick range.
    let s = ShaperSpec::new(5)
        .with_zeros(NtfZeros::Dc)
        .with_poles(NtfPoles::None)
        .with_dither(true);
    assert!(matches!(
        Requantiser::try_new(&timer, 58, 70, s),
        Err(ticktone::ConfigError::ShaperHeadroom { .. })
    ));
}

#[test]
fn tpdf_statistics() {
    // Source: TPDF dither is the sum of two independent uniform variables of
    // one LSB each: triangular on (-1, 1) LSB, mean 0, variance 1/6 LSB^2
    // (S. P. Lipshitz, R. A. Wannamaker, J. Vanderkooy, J. Audio Eng. Soc.
    // 40(5) 1992 [memory]). For 16-bit halves the exact variance is
    // 2 (65536^2 - 1)/12 / 65536^2.
    let n = 1 << 20;
    let mut d = Tpdf::new(7);
    let mut hist = [0u64; 16];
    let (mut sum, mut sum2, mut lag) = (0.0, 0.0, 0.0);
    let mut prev = 0.0;
    for _ in 0..n {
        let x = d.next_q16();
        assert!(x.abs() <= TPDF_PEAK_Q16);
        let t = x as f64 / ONE;
        sum += t;
        sum2 += t * t;
        lag += t * prev;
        prev = t;
        hist[(((t + 1.0) * 8.0) as usize).min(15)] += 1;
    }
    let nf = n as f64;
    let var_exact = 2.0 * (ONE * ONE - 1.0) / 12.0 / (ONE * ONE);
    let sd = var_exact.sqrt();
    assert!((sum / nf).abs() < 4.0 * sd / nf.sqrt(), "mean {}", sum / nf);
    assert!(
        (sum2 / nf / var_exact - 1.0).abs() < 0.01,
        "variance {}",
        sum2 / nf
    );
    assert!((lag / nf / var_exact).abs() < 0.01, "lag-1 correlation");
    // Triangular pdf 1 - |t|: bin [a, a + 1/8] holds int of (1 - |t|).
    for (i, &h) in hist.iter().enumerate() {
        let a = -1.0 + i as f64 / 8.0;
        let b = a + 0.125;
        let cdf = |t: f64| {
            if t < 0.0 {
                (1.0 + t).powi(2) / 2.0
            } else {
                1.0 - (1.0 - t).powi(2) / 2.0
            }
        };
        let p = cdf(b) - cdf(a);
        let expect = p * nf;
        assert!(
            (h as f64 - expect).abs() < 5.0 * expect.sqrt() + 2.0,
            "bin {i}: {h} vs {expect:.0}"
        );
    }
}

#[test]
fn dither_is_bit_exact_and_seeded() {
    // Source: Marsaglia, J. Stat. Softw. 8(14) 2003, xorshift32 (13, 17, 5)
    // recomputed here in u64 arithmetic as an independent model.
    let mut d = Tpdf::new(0);
    let mut model = Tpdf::new(0).next_u32(); // first output via the type
    let mut again = Tpdf::new(0);
    assert_eq!(again.next_u32(), model);
    let _ = d.next_u32();
    for _ in 0..1000 {
        let mut x = model as u64;
        x ^= (x << 13) & 0xFFFF_FFFF;
        x ^= x >> 17;
        x ^= (x << 5) & 0xFFFF_FFFF;
        model = x as u32;
        assert_eq!(d.next_u32(), model);
    }
    assert_ne!(Tpdf::new(1).next_u32(), Tpdf::new(2).next_u32());
}

#[test]
fn block_and_sample_paths_are_bit_exact() {
    // Source: the contract of Requantiser::process (same arithmetic as
    // quantise, value by value), checked on a busy input with clamps, for
    // every filter size and with and without poles and dither.
    let timer = reference_timer();
    for order in 0..=MAX_ORDER {
        for k in [0u8, 2, 4] {
            for poles in [NtfPoles::None, NtfPoles::Sum8] {
                for dither in [false, true] {
                    let s = ShaperSpec::new(order)
                        .with_half_rate_zeros(k)
                        .with_poles(poles)
                        .with_dither(dither);
                    let Ok(mut a) = Requantiser::try_new(&timer, 2, 126, s) else {
                        continue;
                    };
                    a.reseed(9);
                    let mut b = a.clone();
                    let input: Vec<i32> = (0..3000)
                        .map(|n| {
                            let x =
                                (n as f64 * 0.0123).sin() * 1.05 + 0.3 * (n as f64 * 0.31).sin();
                            ((64.0 + 60.0 * x) * ONE) as i32
                        })
                        .collect();
                    let want: Vec<i32> = input.iter().map(|&v| a.quantise(v) as i32).collect();
                    let mut got = input.clone();
                    for chunk in got.chunks_mut(7) {
                        b.process(chunk);
                    }
                    assert_eq!(got, want, "order {order} k {k} {poles:?} dither {dither}");
                    assert_eq!(a.counts(), b.counts());
                    assert!(a.counts().low + a.counts().high > 0);
                }
            }
        }
    }
}
