//! A-weighting per IEC 61672-1:2013 (analytic form of annex E [memory for
//! the annex letter]; pole frequencies and the +2.000 dB normalisation from
//! REFERENCES.md section 5).

/// Pole frequencies f1..f4 of the A-weighting, Hz.
pub const POLES_HZ: [f64; 4] = [20.598_997, 107.652_65, 737.862_23, 12_194.217];

/// The normalisation that makes A(1 kHz) = 0 dB: +2.000 dB.
pub const A1000_DB: f64 = 2.0;

/// A-weighting in dB at `f_hz` (negative infinity at 0 Hz).
///
/// ```
/// let a = ticktone::lab::weighting::a_weighting_db(1000.0);
/// assert!(a.abs() < 0.01);
/// ```
pub fn a_weighting_db(f_hz: f64) -> f64 {
    20.0 * a_weighting_gain(f_hz).log10()
}

/// A-weighting as an amplitude gain at `f_hz`.
pub fn a_weighting_gain(f_hz: f64) -> f64 {
    let [f1, f2, f3, f4] = POLES_HZ;
    let f2_ = f_hz * f_hz;
    let ra = f4 * f4 * f2_ * f2_
        / ((f2_ + f1 * f1) * ((f2_ + f2 * f2) * (f2_ + f3 * f3)).sqrt() * (f2_ + f4 * f4));
    ra * 10f64.powf(A1000_DB / 20.0)
}
