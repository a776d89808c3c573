//! The analysis window: a 7-term minimum-sidelobe Blackman-Harris window.
//!
//! `w[n] = sum_j (-1)^j a_j cos(2 pi j n / N)`, `j = 0..=6`, periodic (DFT
//! even) form. Coefficients: H.-H. Albrecht, "Tailoring of minimum sidelobe
//! cosine-sum windows for high-resolution measurements", The Open Signal
//! Processing Journal 3 (2010) \[memory\], highest sidelobe about -180 dB
//! (checked numerically in `tests/lab_window.rs`).
//!
//! # Why this window on a coherent record
//!
//! The lab measures coherent records: the record holds a whole number of
//! carrier periods and of tone cycles, so every periodic component sits on
//! a bin. For such a component a cosine-sum window of 7 terms spreads it
//! over exactly 13 bins (`k - 6 ..= k + 6`) and nowhere else, with the
//! centre bin weighted by `a_0`: reading the centre bin and dividing by
//! `a_0` gives the amplitude exactly, provided no other component lies
//! within 6 bins. What is *not* periodic in the record (shaped noise,
//! dither, a settling transient) leaks through sidelobes below -180 dB,
//! where a rectangular window would leak at -6 dB an octave.

use std::vec::Vec;

/// The coefficients `a_0 ..= a_6` (they sum to 1).
pub const BH7: [f64; 7] = [
    0.271_051_400_693_424,
    0.433_297_939_234_486,
    0.218_122_999_543_110,
    0.065_925_446_388_031,
    0.010_811_742_098_371,
    0.000_776_584_825_226,
    0.000_013_887_217_352,
];

/// Bins on each side of a bin-centred tone that the window spreads it to.
pub const LOBE_BINS: usize = BH7.len() - 1;

/// The window of length `n` (periodic form).
pub fn window(n: usize) -> Vec<f64> {
    let step = 2.0 * std::f64::consts::PI / n as f64;
    (0..n)
        .map(|i| {
            let x = step * i as f64;
            BH7.iter()
                .enumerate()
                .map(|(j, a)| {
                    let s = if j.is_multiple_of(2) { 1.0 } else { -1.0 };
                    s * a * (j as f64 * x).cos()
                })
                .sum()
        })
        .collect()
}

/// Multiply `y` by the window of its length, in place (one cosine a
/// sample; the higher harmonics by the Chebyshev recurrence
/// `cos(j x) = 2 cos(x) cos((j-1) x) - cos((j-2) x)`, and the window's
/// symmetry `w[N - n] = w[n]`).
pub fn apply(y: &mut [f64]) {
    let n = y.len();
    let step = 2.0 * std::f64::consts::PI / n as f64;
    for i in 0..=n / 2 {
        let c1 = (step * i as f64).cos();
        let (mut prev, mut cur) = (1.0, c1);
        let mut w = BH7[0] - BH7[1] * c1;
        for (j, a) in BH7.iter().enumerate().skip(2) {
            let next = 2.0 * c1 * cur - prev;
            prev = cur;
            cur = next;
            w += if j.is_multiple_of(2) { *a } else { -a } * cur;
        }
        y[i] *= w;
        if i != 0 && n - i != i {
            y[n - i] *= w;
        }
    }
}

/// Coherent gain `sum(w) / N`: exactly `a_0` for the periodic form.
pub const fn coherent_gain() -> f64 {
    BH7[0]
}

/// Mean square `sum(w^2) / N = a_0^2 + (1/2) sum_{j>0} a_j^2`.
pub fn mean_square() -> f64 {
    BH7[0] * BH7[0] + BH7[1..].iter().map(|a| a * a).sum::<f64>() / 2.0
}

/// Equivalent noise bandwidth in bins, `N sum(w^2) / sum(w)^2`.
pub fn enbw_bins() -> f64 {
    mean_square() / (coherent_gain() * coherent_gain())
}
