//! Coherent test tones: record planning and the sample source that feeds
//! the firmware path.
//!
//! A record holds a whole number of carrier periods and, on the firmware
//! path, a whole number of input samples; the tone is moved to the nearest
//! frequency with a whole number of cycles in the record (AES17's 997 Hz in
//! a 1 s record stays 997 Hz). On the firmware path the cycle count is also
//! made coprime with the number of input samples (common practice), so
//! that no two samples of the record hold the same phase of the tone and
//! the rounding error does not repeat within the record. The frequency
//! actually used is reported.

use std::vec::Vec;

use crate::lab::LabError;
use crate::timer::Timer;

/// Fewest tone cycles a record must hold: the analysis window spreads a
/// tone over +/- 6 bins, so the fundamental must sit at bin 7 or above.
pub const MIN_CYCLES: u64 = 7;

/// A planned coherent record.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RecordPlan {
    /// Carrier periods in the record.
    pub periods: u64,
    /// Tone cycles in the record.
    pub cycles: u64,
    /// The tone frequency used, Hz (`cycles / record_s`).
    pub tone_hz: f64,
    /// Record length, s.
    pub record_s: f64,
    /// Input samples in the record (firmware path), or 0 (exact mode).
    pub input_samples: u64,
    /// Updates per input sample (firmware path), or 0.
    pub ratio: u64,
}

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 {
        a
    } else {
        gcd(b, a % b)
    }
}

/// Plan a record of about `record_s` for a tone near `tone_hz`.
///
/// `input_rate_hz` is the rate of the firmware path's input (`None` for
/// exact mode); it must divide the update rate.
///
/// # Errors
/// [`LabError::Record`] if the record holds fewer than [`MIN_CYCLES`]
/// cycles, the tone is above half the input rate, or the rates do not lock.
pub fn plan(
    timer: &Timer,
    input_rate_hz: Option<f64>,
    record_s: f64,
    tone_hz: f64,
) -> Result<RecordPlan, LabError> {
    let fc = timer.carrier_hz();
    let upp = timer.updates_per_period() as u64;
    if !(record_s.is_finite() && record_s > 0.0 && tone_hz.is_finite() && tone_hz > 0.0) {
        return Err(LabError::Record(format!(
            "record {record_s} s and tone {tone_hz} Hz must be positive"
        )));
    }
    let (align, ratio) = match input_rate_hz {
        None => (1, 0),
        Some(fs) => {
            let r = timer.update_rate_hz() / fs;
            let ri = r.round();
            if !(fs > 0.0 && ri >= 1.0 && (r - ri).abs() < 1e-9 * r) {
                return Err(LabError::Record(format!(
                    "input rate {fs} Hz does not divide the update rate {} Hz",
                    timer.update_rate_hz()
                )));
            }
            if tone_hz >= fs / 2.0 {
                return Err(LabError::Record(format!(
                    "tone {tone_hz} Hz is not below half the input rate {fs} Hz"
                )));
            }
            let ri = ri as u64;
            // Periods a whole number of input samples span: ratio / gcd.
            (ri / gcd(ri, upp), ri)
        }
    };
    let periods = (((record_s * fc) / align as f64).round() as u64).max(1) * align;
    let record_s = periods as f64 / fc;
    let input_samples = (periods * upp).checked_div(ratio).unwrap_or(0);
    let mut cycles = (tone_hz * record_s).round().max(1.0) as u64;
    if input_samples > 0 {
        let base = cycles;
        let mut d = 0u64;
        loop {
            if gcd(base + d, input_samples) == 1 {
                cycles = base + d;
                break;
            }
            if d > 0 && d < base && gcd(base - d, input_samples) == 1 {
                cycles = base - d;
                break;
            }
            d += 1;
        }
    }
    if cycles < MIN_CYCLES {
        return Err(LabError::Record(format!(
            "a record of {record_s} s holds {cycles} cycles of {tone_hz} Hz; at least {MIN_CYCLES} are needed (lengthen the record)"
        )));
    }
    Ok(RecordPlan {
        periods,
        cycles,
        tone_hz: cycles as f64 / record_s,
        record_s,
        input_samples,
        ratio,
    })
}

/// Input samples (Q1.31, left-justified 32-bit) of the tone
/// `amplitude * sin(2 pi cycles n / input_samples)` for sample indices
/// `first .. first + count` (negative indices come before the record: the
/// settling lead-in). The phase is computed from the exact integer product
/// `cycles * n` modulo the record, so it never drifts.
pub fn q31_samples(plan: &RecordPlan, amplitude: f64, first: i64, count: usize) -> Vec<i32> {
    let n_rec = plan.input_samples as i64;
    (0..count as i64)
        .map(|i| {
            let n = first + i;
            let k = (plan.cycles as i64 % n_rec * n.rem_euclid(n_rec)).rem_euclid(n_rec);
            let ph = 2.0 * std::f64::consts::PI * k as f64 / n_rec as f64;
            let v = amplitude * ph.sin() * 2_147_483_648.0;
            v.round().clamp(i32::MIN as f64, i32::MAX as f64) as i32
        })
        .collect()
}
