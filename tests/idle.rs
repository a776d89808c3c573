//! Idle and low-level behaviour of the whole firmware path in the reference
//! scenario (issue 4): digital silence and a 997 Hz tone at -90 dBFS.
//!
//! With TPDF dither, no in-band spectral line may stand above -135 dBFS.
//! The dither turns the rounding error into noise independent of the
//! signal (Wannamaker, Lipshitz & Vanderkooy, "A theory of non-subtractive
//! dither", IEEE Trans. Signal Processing 48(2) 2000 [memory]: a triangular
//! dither of 2 LSB peak-to-peak makes the first two error moments
//! independent of the input), so the rounding leaves no idle tones.

use ticktone::lab::exact::ExactSampling;
use ticktone::lab::run::{measure_once, LabSpec};
use ticktone::ShaperSpec;

/// Largest in-band line in dBFS (20 Hz to 20 kHz), skipping the window's
/// main lobe around `skip_hz` if given.
fn largest_line(spec: &LabSpec, skip_hz: Option<f64>) -> (f64, f64) {
    let (_, s, m) = measure_once(spec).expect("reference scenario measures");
    let lo = s.bin_of(20.0);
    let hi = s.bin_of(spec.bandwidth_hz);
    let skip = skip_hz.map(|f| s.bin_of(f));
    let mut best = (f64::NEG_INFINITY, 0.0);
    for k in lo..=hi {
        if skip.is_some_and(|c| k.abs_diff(c) <= 12) {
            continue;
        }
        let db = 20.0 * s.amp[k].norm().max(1e-300).log10();
        if db > best.0 {
            best = (db, k as f64 * s.bin_hz);
        }
    }
    if skip.is_some() {
        // The tone itself must come through at its level.
        assert!((m.fundamental_dbfs - spec.level_dbfs).abs() < 0.5, "{m:?}");
    }
    best
}

fn reference(dither: bool, level_dbfs: f64) -> LabSpec {
    let mut spec = LabSpec::reference();
    spec.sampling = ExactSampling::Natural;
    spec.shaper = ShaperSpec::new(5).with_dither(dither);
    spec.level_dbfs = level_dbfs;
    spec.record_s = 0.5;
    spec
}

#[test]
fn dithered_idle_and_low_level_have_no_line_above_minus_135_dbfs() {
    // -400 dBFS rounds to exact zero samples: digital silence.
    let (silence, at) = largest_line(&reference(true, -400.0), None);
    println!("dither, digital silence: largest in-band line {silence:.1} dBFS at {at:.0} Hz");
    assert!(silence < -135.0, "{silence} dBFS at {at} Hz");
    let (low, at) = largest_line(&reference(true, -90.0), Some(997.0));
    println!("dither, 997 Hz at -90 dBFS: largest other line {low:.1} dBFS at {at:.0} Hz");
    assert!(low < -135.0, "{low} dBFS at {at} Hz");
}

#[test]
fn undithered_low_level_report() {
    // Without dither the issue asks only to report what appears; the
    // assertion is the same bar, which the noise shaper also meets here
    // (its error is busy enough even at -90 dBFS).
    let (silence, at) = largest_line(&reference(false, -400.0), None);
    if silence < -300.0 {
        // Zero in, zero error fed back: every update writes top / 2 on both
        // legs, whose difference has no component at all below the carrier.
        println!("no dither, digital silence: no in-band component (idle pattern exactly)");
    } else {
        println!(
            "no dither, digital silence: largest in-band line {silence:.1} dBFS at {at:.0} Hz"
        );
    }
    let (low, at) = largest_line(&reference(false, -90.0), Some(997.0));
    println!("no dither, 997 Hz at -90 dBFS: largest other line {low:.1} dBFS at {at:.0} Hz");
    assert!(low < -135.0, "{low} dBFS at {at} Hz");
}
