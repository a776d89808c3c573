//! Host-side design of the oversampler's half-band filters, in `f64`.
//!
//! The firmware ([`crate::oversample`]) carries its coefficient tables as
//! constants; this module re-derives them, so a test can check that the
//! committed tables are exactly what the design gives after quantisation,
//! and measures the response of the integer coefficients.
//!
//! # The method
//! A half-band interpolator by two, with interpolation gain 2, has the taps
//! `g[0] = 1`, `g[2j] = 0` and `g[+-(2j-1)] = c_j` for `j = 1..=K`. Its
//! amplitude response, scaled to 1 in the passband, is
//! `H(w) = 1/2 + F(w)` with `F(w) = sum_j c_j cos((2j-1) w)`, and
//! `H(pi - w) = 1 - H(w)`: whatever error `F` makes against 1/2 in the
//! passband `[0, wp]` it makes again, mirrored, in the stopband
//! `[pi - wp, pi]`. So the whole design is a one-band minimax problem:
//! choose `c` to minimise `max |F(w) - 1/2|` on `[0, wp]`. The functions
//! `cos((2j-1) w)` are odd polynomials in `cos w`, which form a Chebyshev
//! (Haar) system on `[0, wp]` for `wp < pi/2`, so the best approximation is
//! the unique one whose error alternates `K + 1` times with equal magnitude
//! (the alternation theorem), and the Remez exchange finds it. This is the
//! half-band form of the Parks-McClellan design (T. W. Parks and
//! J. H. McClellan, IEEE Trans. Circuit Theory 19(2) 1972; the half-band
//! trick after P. P. Vaidyanathan and T. Q. Nguyen, IEEE Trans. Circuits
//! Syst. 34(1) 1987 [memory for both]).
//!
//! # The stages
//! Each stage doubles the rate. The band to keep flat is 0 to 20 kHz at every
//! stage; the images to remove are those of that band around the stage's
//! input rate. The lowest supported input rate, 44.1 kHz, gives the narrowest
//! transition bands when expressed as a fraction of the rate, so the filters
//! are designed for it and serve every higher input rate with more margin.
//!
//! The interpolator by 3 of ratios 6 and 12 runs at twice the input rate,
//! after the first half-band: it keeps 0 to 20 kHz and removes the images
//! about 2 fs and 4 fs, a wide transition that a short Kaiser-windowed sinc
//! meets (41 taps, [`kaiser_third_band`]); its taps at the multiples of 3 are
//! zero, so one output in three is a plain copy.

use std::vec::Vec;

/// Top of the band kept flat, Hz.
pub const BAND_EDGE_HZ: f64 = 20_000.0;

/// The input rate the stages are designed for (the lowest supported), Hz.
pub const DESIGN_INPUT_HZ: f64 = 44_100.0;

/// Grid points per coefficient on which the Remez exchange searches the
/// error's extrema.
const GRID_PER_COEFF: usize = 128;

/// One half-band stage to design.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct HalfBandSpec {
    /// Number of non-zero coefficient pairs, `K` (the filter has `4K - 1`
    /// taps at the stage's output rate).
    pub pairs: usize,
    /// Passband edge as a fraction of the stage's output rate (below 1/4).
    pub pass_edge: f64,
}

/// The four stages of the firmware's cascade, in order. Stage `k`
/// (1-based) runs at `2^k` times the input rate; its passband edge is
/// 20 kHz at `2^k x 44.1 kHz`, its stopband starts at the image of 20 kHz
/// about its input rate.
pub fn stage_specs() -> [HalfBandSpec; 4] {
    let pairs = crate::oversample::STAGE_PAIRS;
    core::array::from_fn(|i| HalfBandSpec {
        pairs: pairs[i],
        pass_edge: BAND_EDGE_HZ / (DESIGN_INPUT_HZ * (2u32 << i) as f64),
    })
}

/// Result of a half-band design.
#[derive(Clone, Debug, PartialEq)]
pub struct HalfBandDesign {
    /// `c_1 ..= c_K`, the coefficients of taps `+-1, +-3, ...` of the
    /// interpolator with gain 2.
    pub coeffs: Vec<f64>,
    /// The equiripple error `|delta|`: passband deviation from 1 and
    /// stopband gain, as a fraction of the passband gain.
    pub ripple: f64,
    /// Exchange iterations used.
    pub iterations: usize,
    /// `true` when the largest error on the grid equals `|delta|` to within
    /// a relative `1e-9`.
    pub converged: bool,
}

/// `F(w) = sum_j c_j cos((2j-1) w)`.
fn odd_cos_sum(c: &[f64], w: f64) -> f64 {
    c.iter()
        .enumerate()
        .map(|(j, &cj)| cj * ((2 * j + 1) as f64 * w).cos())
        .sum()
}

/// Solve `a x = b` (row-major `n x n`) by Gaussian elimination with partial
/// pivoting. `None` if the matrix is singular to working precision.
fn solve(mut a: Vec<f64>, mut b: Vec<f64>) -> Option<Vec<f64>> {
    let n = b.len();
    for col in 0..n {
        let piv =
            (col..n).max_by(|&i, &j| a[i * n + col].abs().total_cmp(&a[j * n + col].abs()))?;
        if a[piv * n + col].abs() < 1e-300 {
            return None;
        }
        if piv != col {
            for k in 0..n {
                a.swap(piv * n + k, col * n + k);
            }
            b.swap(piv, col);
        }
        for row in col + 1..n {
            let f = a[row * n + col] / a[col * n + col];
            for k in col..n {
                a[row * n + k] -= f * a[col * n + k];
            }
            b[row] -= f * b[col];
        }
    }
    let mut x = vec![0.0; n];
    for row in (0..n).rev() {
        let s: f64 = (row + 1..n).map(|k| a[row * n + k] * x[k]).sum();
        x[row] = (b[row] - s) / a[row * n + row];
    }
    Some(x)
}

/// Alternating extrema of `e` (indices), at most one per run of equal sign,
/// the largest of each run; the two ends of the grid are always candidates.
fn alternating_extrema(e: &[f64]) -> Vec<usize> {
    let n = e.len();
    let mut cand: Vec<usize> = Vec::new();
    for i in 0..n {
        let left = if i == 0 { None } else { Some(e[i - 1]) };
        let right = e.get(i + 1).copied();
        let is_max =
            e[i] > 0.0 && left.is_none_or(|l| e[i] >= l) && right.is_none_or(|r| e[i] >= r);
        let is_min =
            e[i] < 0.0 && left.is_none_or(|l| e[i] <= l) && right.is_none_or(|r| e[i] <= r);
        if is_max || is_min {
            match cand.last() {
                Some(&last) if (e[last] > 0.0) == (e[i] > 0.0) => {
                    if e[i].abs() > e[last].abs() {
                        if let Some(l) = cand.last_mut() {
                            *l = i;
                        }
                    }
                }
                _ => cand.push(i),
            }
        }
    }
    cand
}

/// Minimax half-band design by the Remez exchange (module docs).
///
/// `pairs` >= 1 and `0 < pass_edge < 1/4`; outside that the result has
/// `converged == false`.
pub fn remez_half_band(pairs: usize, pass_edge: f64) -> HalfBandDesign {
    let k = pairs;
    let failed = HalfBandDesign {
        coeffs: vec![0.0; k],
        ripple: f64::INFINITY,
        iterations: 0,
        converged: false,
    };
    if k == 0 || !(pass_edge > 0.0 && pass_edge < 0.25) {
        return failed;
    }
    let wp = 2.0 * core::f64::consts::PI * pass_edge;
    let n_grid = GRID_PER_COEFF * k + 1;
    let grid: Vec<f64> = (0..n_grid)
        .map(|i| wp * i as f64 / (n_grid - 1) as f64)
        .collect();
    // Start from points clustered towards both ends, as equiripple extrema are.
    let mut reference: Vec<usize> = (0..=k)
        .map(|i| {
            let t = (1.0 - (core::f64::consts::PI * i as f64 / k as f64).cos()) / 2.0;
            (t * (n_grid - 1) as f64).round() as usize
        })
        .collect();
    let mut best = failed;
    for iteration in 1..=100 {
        let m = k + 1;
        let mut a = vec![0.0; m * m];
        for (row, &gi) in reference.iter().enumerate() {
            for j in 0..k {
                a[row * m + j] = ((2 * j + 1) as f64 * grid[gi]).cos();
            }
            a[row * m + k] = if row % 2 == 0 { 1.0 } else { -1.0 };
        }
        let Some(x) = solve(a, vec![0.5; m]) else {
            return best;
        };
        let coeffs = x[..k].to_vec();
        let delta = x[k].abs();
        let err: Vec<f64> = grid
            .iter()
            .map(|&w| odd_cos_sum(&coeffs, w) - 0.5)
            .collect();
        let max_err = err.iter().fold(0.0f64, |m, e| m.max(e.abs()));
        let converged = max_err - delta <= 1e-9 * delta;
        best = HalfBandDesign {
            coeffs,
            ripple: max_err,
            iterations: iteration,
            converged,
        };
        if converged {
            break;
        }
        let mut ext = alternating_extrema(&err);
        while ext.len() > m {
            if err[ext[0]].abs() < err[ext[ext.len() - 1]].abs() {
                ext.remove(0);
            } else {
                ext.pop();
            }
        }
        if ext.len() < m {
            break;
        }
        reference = ext;
    }
    best
}

/// Round coefficients to Q1.31 (`c x 2^31`, to nearest, ties away from
/// zero). Coefficients must lie in (-1, 1).
pub fn quantise_q31(coeffs: &[f64]) -> Vec<i32> {
    coeffs
        .iter()
        .map(|&c| {
            (c * 2_147_483_648.0)
                .round()
                .clamp(i32::MIN as f64, i32::MAX as f64) as i32
        })
        .collect()
}

/// The design of stage `stage` (0-based) of [`stage_specs`], quantised as
/// the firmware stores it.
pub fn design_stage_q31(stage: usize) -> Option<Vec<i32>> {
    let spec = *stage_specs().get(stage)?;
    let d = remez_half_band(spec.pairs, spec.pass_edge);
    d.converged.then(|| quantise_q31(&d.coeffs))
}

/// Kaiser window shape parameter of the third-band stage: the best image
/// rejection for its 41 taps (about -117 dB; 11 and 13 give about -108 and
/// -89 dB).
pub const THIRD_BETA: f64 = 12.0;

/// Zeroth-order modified Bessel function of the first kind, by its power
/// series `sum ((x/2)^k / k!)^2` (Abramowitz & Stegun 9.6.12), summed until
/// the terms no longer change the sum.
pub fn bessel_i0(x: f64) -> f64 {
    let (mut sum, mut term) = (1.0, 1.0);
    let q = x * x / 4.0;
    for k in 1..500 {
        term *= q / (k * k) as f64;
        sum += term;
        if term < sum * 1e-17 {
            break;
        }
    }
    sum
}

/// Branch-1 taps `d[i] = h[3(i - P) + 1]`, `i = 0..2P`, of a Kaiser-windowed
/// sinc interpolator by 3 with `6P - 1` taps and gain 3:
/// `h[n] = sinc(n/3) I0(beta sqrt(1 - (n/3P)^2)) / I0(beta)`, which is 1 at
/// `n = 0` and 0 at the other multiples of 3 (a third-band or Nyquist(3)
/// filter: one output in three is a copy of the input). The window method
/// after J. F. Kaiser, Proc. IEEE ISCAS 1974 \[memory\].
pub fn kaiser_third_band(p: usize, beta: f64) -> Vec<f64> {
    let half = 3.0 * p as f64;
    (0..2 * p)
        .map(|i| {
            let n = 3.0 * (i as f64 - p as f64) + 1.0;
            let x = core::f64::consts::PI * n / 3.0;
            let sinc = x.sin() / x;
            let r = n / half;
            sinc * bessel_i0(beta * (1.0 - r * r).sqrt()) / bessel_i0(beta)
        })
        .collect()
}

/// The firmware's third-band tables from branch-1 taps `d` (length `2P`):
/// `((d[i] + d[2P-1-i]) / 2, (d[i] - d[2P-1-i]) / 2)` for `i < P`,
/// quantised to Q1.31.
pub fn third_band_q31(d: &[f64]) -> (Vec<i32>, Vec<i32>) {
    let p = d.len() / 2;
    let sum: Vec<f64> = (0..p).map(|i| (d[i] + d[2 * p - 1 - i]) / 2.0).collect();
    let diff: Vec<f64> = (0..p).map(|i| (d[i] - d[2 * p - 1 - i]) / 2.0).collect();
    (quantise_q31(&sum), quantise_q31(&diff))
}

/// The third-band stage's design, quantised as the firmware stores it.
pub fn design_third_q31() -> (Vec<i32>, Vec<i32>) {
    third_band_q31(&kaiser_third_band(
        crate::oversample::THIRD_SUM.len(),
        THIRD_BETA,
    ))
}

/// Amplitude response of the third-band stage with tables `sum`, `diff`
/// (Q1.31), at `f` as a fraction of its output rate, scaled to 1 in the
/// passband: `(1 + 2 sum_k b[k] cos(2 pi f (3k + 1))) / 3` with the
/// branch-1 taps `b` rebuilt exactly as the firmware applies them.
pub fn third_band_gain_q31(sum: &[i32], diff: &[i32], f: f64) -> f64 {
    let p = sum.len();
    let mut d = vec![0i64; 2 * p];
    for i in 0..p {
        d[i] = sum[i] as i64 + diff[i] as i64;
        d[2 * p - 1 - i] = sum[i] as i64 - diff[i] as i64;
    }
    let w = 2.0 * core::f64::consts::PI * f;
    let s: f64 = d
        .iter()
        .enumerate()
        .map(|(i, &di)| {
            let n = 3.0 * (i as f64 - p as f64) + 1.0;
            di as f64 / 2_147_483_648.0 * (w * n).cos()
        })
        .sum();
    (1.0 + 2.0 * s) / 3.0
}

/// Amplitude response of a half-band stage with Q1.31 coefficients `c`, at
/// `f` as a fraction of the stage's output rate, scaled so that the ideal
/// passband gain is 1 (signed: negative values are phase reversals).
pub fn half_band_gain_q31(c: &[i32], f: f64) -> f64 {
    let w = 2.0 * core::f64::consts::PI * f;
    let s: f64 = c
        .iter()
        .enumerate()
        .map(|(j, &cj)| cj as f64 / 2_147_483_648.0 * ((2 * j + 1) as f64 * w).cos())
        .sum();
    0.5 + s
}

/// Magnitude response of the firmware's cascade for `ratio` (1, 2, 4, 6,
/// 8, 12 or 16), computed from its integer coefficient tables, at `f` as a
/// fraction of the *input* rate, scaled so that the ideal passband gain is
/// 1. `None` for an unsupported ratio.
pub fn cascade_gain(ratio: u32, f: f64) -> Option<f64> {
    let t = crate::oversample::stage_tables();
    let third = |rate: f64| {
        third_band_gain_q31(
            &crate::oversample::THIRD_SUM,
            &crate::oversample::THIRD_DIFF,
            f / rate,
        )
        .abs()
    };
    let half = |k: usize, rate: f64| half_band_gain_q31(t[k], f / rate).abs();
    Some(match ratio {
        1 => 1.0,
        2 => half(0, 2.0),
        4 => half(0, 2.0) * half(1, 4.0),
        8 => half(0, 2.0) * half(1, 4.0) * half(2, 8.0),
        16 => half(0, 2.0) * half(1, 4.0) * half(2, 8.0) * half(3, 16.0),
        6 => half(0, 2.0) * third(6.0),
        12 => half(0, 2.0) * third(6.0) * half(2, 12.0),
        _ => return None,
    })
}
