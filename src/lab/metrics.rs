//! The audio trade's figures from a spectrum, AES17 conventions.
//!
//! All levels are against full scale: a sine of amplitude 1 (modulation
//! index 1) is 0 dBFS, its power 1/2.
//!
//! - **Fundamental**: amplitude read at the tone's bin (exact on a coherent
//!   record, see [`crate::lab::window`]).
//! - **Harmonics** 2..9 that fall inside the band, in dB re the
//!   fundamental; **THD** is their power sum re the fundamental.
//! - **Residual**: everything in the band (20 Hz to `bandwidth`, from bin 7
//!   up so that the DC's window lobe stays out) except the fundamental's 13
//!   bins. The bins a notch removes are made up for by scaling the rest to
//!   the full band width (the noise is taken as flat over the notch).
//! - **THD+N** (AES17): residual re the total in-band power. A-weighted
//!   THD+N weighs the residual with the IEC 61672-1 curve and compares it
//!   with the unweighted total.
//! - **Noise**: the residual less the harmonics' bins; **SNR** is a
//!   full-scale sine re that noise (unweighted and A-weighted).
//! - **Dynamic range** (AES17, the -60 dBFS method): A-weighted THD+N of a
//!   -60 dBFS tone, re full scale: `-(thdn_a_db + fundamental_dbfs)` of that
//!   measurement. See [`dynamic_range_db`].

use serde::Serialize;
use std::vec::Vec;

use crate::lab::spectrum::Spectrum;
use crate::lab::weighting::a_weighting_gain;
use crate::lab::window::LOBE_BINS;

/// AES17 stimulus frequency, Hz.
pub const AES17_TONE_HZ: f64 = 997.0;
/// AES17 band, Hz.
pub const AES17_BAND_HZ: (f64, f64) = (20.0, 20_000.0);

/// One harmonic.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Harmonic {
    /// Order (2 = second harmonic).
    pub order: u32,
    /// Frequency, Hz.
    pub hz: f64,
    /// Level re the fundamental, dB.
    pub dbc: f64,
}

/// The figures of one measurement.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Metrics {
    /// Tone frequency, Hz.
    pub fundamental_hz: f64,
    /// Tone level, dBFS (0 dBFS = modulation index 1).
    pub fundamental_dbfs: f64,
    /// Harmonics 2..9 inside the band.
    pub harmonics: Vec<Harmonic>,
    /// THD (harmonics 2..9 in band), dB re the fundamental.
    pub thd_db: f64,
    /// THD as a percentage.
    pub thd_pct: f64,
    /// THD+N, dB re the total in-band power.
    pub thdn_db: f64,
    /// THD+N as a percentage.
    pub thdn_pct: f64,
    /// A-weighted THD+N, dB.
    pub thdn_a_db: f64,
    /// In-band noise (harmonics excluded), dBFS.
    pub noise_dbfs: f64,
    /// A-weighted in-band noise, dBFS.
    pub noise_a_dbfs: f64,
    /// Full-scale sine re the in-band noise, dB.
    pub snr_db: f64,
    /// Full-scale sine re the A-weighted in-band noise, dB.
    pub snr_a_db: f64,
    /// Lower band edge, Hz.
    pub band_low_hz: f64,
    /// Upper band edge (the measurement bandwidth), Hz.
    pub bandwidth_hz: f64,
    /// Bin spacing, Hz.
    pub bin_hz: f64,
    /// Proven bound on aliased power in the band, dBFS.
    pub alias_bound_dbfs: f64,
}

fn db10(x: f64) -> f64 {
    10.0 * x.max(1e-300).log10()
}

/// Measure the spectrum `s` of a record holding a tone at `tone_hz`, over
/// `[band_low_hz, bandwidth_hz]`.
pub fn analyse(s: &Spectrum, tone_hz: f64, band_low_hz: f64, bandwidth_hz: f64) -> Metrics {
    let k0 = s.bin_of(tone_hz);
    let lo = ((band_low_hz / s.bin_hz).ceil() as usize).max(LOBE_BINS + 1);
    let hi = ((bandwidth_hz / s.bin_hz).floor() as usize).min(s.amp.len() - 1);
    let a1 = s.amp[k0].norm();
    let near = |k: usize, c: usize| k.abs_diff(c) <= LOBE_BINS;
    let harm_bins: Vec<(u32, usize)> = (2..=9u32)
        .map(|n| (n, n as usize * k0))
        .filter(|&(_, k)| k <= hi && k >= lo)
        .collect();
    let harmonics: Vec<Harmonic> = harm_bins
        .iter()
        .map(|&(n, k)| Harmonic {
            order: n,
            hz: k as f64 * s.bin_hz,
            dbc: 20.0 * (s.amp[k].norm() / a1).max(1e-300).log10(),
        })
        .collect();
    let harm_power: f64 = harm_bins
        .iter()
        .map(|&(_, k)| s.amp[k].norm_sqr() / 2.0)
        .sum();
    let (mut resid, mut resid_a, mut noise, mut noise_a) = (0.0, 0.0, 0.0, 0.0);
    let (mut n_resid, mut n_noise) = (0usize, 0usize);
    for k in lo..=hi {
        if near(k, k0) {
            continue;
        }
        let p = s.power(k);
        let wa = a_weighting_gain(k as f64 * s.bin_hz).powi(2);
        resid += p;
        resid_a += p * wa;
        n_resid += 1;
        if !harm_bins.iter().any(|&(_, c)| near(k, c)) {
            noise += p;
            noise_a += p * wa;
            n_noise += 1;
        }
    }
    let n_band = (hi + 1 - lo) as f64;
    let fill = |v: f64, n: usize| if n > 0 { v * n_band / n as f64 } else { 0.0 };
    let (resid, resid_a) = (fill(resid, n_resid), fill(resid_a, n_resid));
    let (noise, noise_a) = (fill(noise, n_noise), fill(noise_a, n_noise));
    let p1 = a1 * a1 / 2.0;
    let thd = harm_power / p1;
    let thdn = resid / (resid + p1);
    let thdn_a = resid_a / (resid + p1);
    Metrics {
        fundamental_hz: k0 as f64 * s.bin_hz,
        fundamental_dbfs: 20.0 * a1.max(1e-300).log10(),
        harmonics,
        thd_db: db10(thd),
        thd_pct: 100.0 * thd.sqrt(),
        thdn_db: db10(thdn),
        thdn_pct: 100.0 * thdn.sqrt(),
        thdn_a_db: db10(thdn_a),
        noise_dbfs: db10(noise / 0.5),
        noise_a_dbfs: db10(noise_a / 0.5),
        snr_db: -db10(noise / 0.5),
        snr_a_db: -db10(noise_a / 0.5),
        band_low_hz: lo as f64 * s.bin_hz,
        bandwidth_hz: hi as f64 * s.bin_hz,
        bin_hz: s.bin_hz,
        alias_bound_dbfs: s.alias_bound_dbfs,
    }
}

/// Dynamic range by the AES17 -60 dBFS method from the metrics of a
/// measurement at -60 dBFS: the A-weighted THD+N re full scale, negated.
/// `None` if the tone did not come through within 3 dB of -60 dBFS (for
/// example lost in the dead zone of undithered rounding): the method then
/// says nothing.
pub fn dynamic_range_db(at_minus_60: &Metrics) -> Option<f64> {
    if (at_minus_60.fundamental_dbfs + 60.0).abs() > 3.0 {
        return None;
    }
    Some(-(at_minus_60.thdn_a_db + at_minus_60.fundamental_dbfs))
}
