//! 3-level full bridge, natural sampling, exact mode: the carrier bands.
//!
//! Source: REFERENCES.md section 2 [derived from Holmes & Lipo 2003, ch. 4,
//! memory]: with leg A from +x and leg B from -x on the same carrier the
//! differential output has no component at the carrier, and at
//! 2 f_c +/- f_o it holds (4/pi) J_1(pi M) in units where each leg swings
//! +/-1 (0.72170 at M = 0.5). Section 1 [computed]: one leg, natural double
//! edge, M = 0.5: (4/pi) J_0(pi/4) = 1.084331 at f_c and (2/pi) J_1(pi/2) =
//! 0.360851 at 2 f_c +/- f_o. Oracle: `puruspe` Bessel functions.

use puruspe::Jn;
use std::f64::consts::PI;
use ticktone::lab::exact::ExactSampling;
use ticktone::lab::plot::wideband;
use ticktone::lab::run::{render, LabSpec};
use ticktone::{BridgeKind, BridgeSpec, TimerSpec, UpdateScheme};

fn spec(kind: BridgeKind) -> LabSpec {
    LabSpec {
        timer: TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Single),
        bridge: BridgeSpec::ideal(kind),
        sampling: ExactSampling::Natural,
        exact: true,
        tone_hz: 1e3,
        level_dbfs: 20.0 * 0.5f64.log10(),
        record_s: 0.01,
        ..LabSpec::reference()
    }
}

fn db(x: f64) -> f64 {
    20.0 * x.log10()
}

#[test]
fn three_level_carrier_bands() {
    let m = 0.5;
    let r = render(&spec(BridgeKind::Full3)).unwrap();
    let cyc_c = r.plan.periods as f64; // carrier cycles in the record
    let cyc_o = r.plan.cycles as f64;
    assert_eq!(r.plan.tone_hz, 1e3);
    // The lab's output is (A - B)/2 in +/-1 leg units: A - B is twice it.
    let diff = |cycles: f64| 2.0 * r.output.coefficient(cycles).norm();
    let expect = 4.0 / PI * Jn(1, PI * m);
    assert!(
        (expect - 0.72170).abs() < 5e-6,
        "oracle vs REFERENCES.md: {expect}"
    );
    // No differential component at the carrier (closed form from the edges).
    assert!(diff(cyc_c) < 1e-9, "at f_c: {}", diff(cyc_c));
    for side in [-1.0, 1.0] {
        let got = diff(2.0 * cyc_c + side * cyc_o);
        eprintln!(
            "3-level 2fc{side:+}fo: {got:.6} (0.72170), at fc {:.2e}",
            diff(cyc_c)
        );
        assert!(db(got / 0.72170).abs() < 0.1, "2fc{side:+}fo: {got}");
        assert!(
            db(got / expect).abs() < 1e-3,
            "2fc{side:+}fo: {got} vs Bessel {expect}"
        );
    }
    // The same through the lab's wideband spectrum (grid, window, FFT).
    let w = wideband(&r);
    let k = |f: f64| w.bin_of(f);
    let fc = r.timer.carrier_hz();
    let at_fc = 2.0 * w.amp[k(fc)].norm();
    assert!(db(at_fc) < -120.0, "wideband at f_c: {:.1} dB", db(at_fc));
    for f in [2.0 * fc - 1e3, 2.0 * fc + 1e3] {
        let got = 2.0 * w.amp[k(f)].norm();
        eprintln!("wideband {f} Hz: {got:.6}; at f_c {:.1} dB", db(at_fc));
        assert!(db(got / 0.72170).abs() < 0.1, "wideband at {f}: {got}");
    }
    // The baseband stays the input: M at f_o.
    assert!((r.output.coefficient(cyc_o).norm() / m - 1.0).abs() < 1e-9);
}

#[test]
fn half_bridge_carrier_bands() {
    let m: f64 = 0.5;
    let r = render(&spec(BridgeKind::Half)).unwrap();
    let (cyc_c, cyc_o) = (r.plan.periods as f64, r.plan.cycles as f64);
    let c = |cycles: f64| r.output.coefficient(cycles).norm();
    let at_fc = 4.0 / PI * Jn(0, PI * m / 2.0);
    assert!((at_fc - 1.084331).abs() < 5e-6);
    assert!(db(c(cyc_c) / 1.084331).abs() < 0.01, "f_c: {}", c(cyc_c));
    let side = 2.0 / PI * Jn(1, PI * m);
    assert!((side - 0.360851).abs() < 5e-6);
    for s in [-1.0, 1.0] {
        let got = c(2.0 * cyc_c + s * cyc_o);
        assert!(db(got / 0.360851).abs() < 0.01, "2fc{s:+}fo: {got}");
    }
}
