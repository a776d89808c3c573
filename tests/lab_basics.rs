//! The lab's building blocks against their definitions: A-weighting
//! (IEC 61672-1), the analysis window, the B-spline projection, the unit
//! parser, and the switch node during dead time.

use rustfft::num_complex::Complex64;
use rustfft::FftPlanner;
use ticktone::lab::exact::ExactSampling;
use ticktone::lab::run::{render, LabSpec};
use ticktone::lab::spectrum::project;
use ticktone::lab::units::{parse_db, parse_hz, parse_seconds};
use ticktone::lab::wave::{DeadNode, Step, Wave};
use ticktone::lab::weighting::a_weighting_db;
use ticktone::lab::window::{window, BH7};
use ticktone::{BridgeKind, BridgeSpec, TimerSpec, UpdateScheme};

#[test]
fn a_weighting_matches_iec_61672_1() {
    // IEC 61672-1:2013 table 3 [memory for numbering], as quoted in
    // REFERENCES.md section 5: nominal frequency, exact base-ten exponent k
    // (f = 1000 x 10^(k/10)), tabulated A in dB (rounded to 0.1 dB).
    let table = [
        (20.0, -17, -50.5),
        (31.5, -15, -39.4),
        (63.0, -12, -26.2),
        (100.0, -10, -19.1),
        (125.0, -9, -16.1),
        (250.0, -6, -8.6),
        (500.0, -3, -3.2),
        (1000.0, 0, 0.0),
        (2000.0, 3, 1.2),
        (4000.0, 6, 1.0),
        (8000.0, 9, -1.1),
        (10000.0, 10, -2.5),
        (16000.0, 12, -6.6),
        (20000.0, 13, -9.3),
    ];
    // The annex formula written out again here from REFERENCES.md section 5.
    let formula = |f: f64| {
        let (f1, f2, f3, f4) = (20.598997f64, 107.65265f64, 737.86223f64, 12194.217f64);
        let f2_ = f * f;
        20.0 * (f4 * f4 * f2_ * f2_
            / ((f2_ + f1 * f1) * (f2_ + f2 * f2).sqrt() * (f2_ + f3 * f3).sqrt() * (f2_ + f4 * f4)))
            .log10()
            + 2.0
    };
    for (nominal, k, tab) in table {
        let f = 1000.0 * 10f64.powf(k as f64 / 10.0);
        let a = a_weighting_db(f);
        assert!(
            (a - formula(f)).abs() < 0.05,
            "{nominal} Hz: {a} vs formula"
        );
        assert!(
            (a - tab).abs() < 0.05,
            "{nominal} Hz ({f:.3}): {a:.3} vs table {tab}"
        );
    }
}

#[test]
fn window_sidelobes_and_gains() {
    // Albrecht's 7-term window [memory]: coefficients sum to 1 and the
    // highest sidelobe is near -180 dB; checked here with rustfft on the
    // window zero-padded 64 times.
    assert!((BH7.iter().sum::<f64>() - 1.0).abs() < 1e-14);
    let n = 512;
    let pad = 64;
    let w = window(n);
    let mut buf: Vec<Complex64> = w.iter().map(|&v| Complex64::new(v, 0.0)).collect();
    buf.resize(n * pad, Complex64::new(0.0, 0.0));
    FftPlanner::new()
        .plan_fft_forward(n * pad)
        .process(&mut buf);
    let peak = buf[0].norm();
    assert!((peak / n as f64 - BH7[0]).abs() < 1e-12, "coherent gain");
    // Main lobe: 7 bins each side; everything beyond is sidelobe.
    let side = buf[7 * pad..n * pad / 2]
        .iter()
        .map(|c| c.norm())
        .fold(0.0, f64::max);
    let db = 20.0 * (side / peak).log10();
    assert!(db < -175.0, "highest sidelobe {db:.1} dB");
}

/// Order-`k` cardinal B-spline integral in truncated-power form (de Boor,
/// *A Practical Guide to Splines*, 1978 [memory]): an independent
/// formula for the projection test.
fn bspline_integral(x: f64, k: usize) -> f64 {
    // Outside the support the integral is 0 or 1 (the form cancels badly
    // there).
    if x <= 0.0 || x >= k as f64 {
        return if x <= 0.0 { 0.0 } else { 1.0 };
    }
    let mut fact = 1.0;
    for i in 1..=k {
        fact *= i as f64;
    }
    let mut s = 0.0;
    let mut binom = 1.0;
    for i in 0..=k {
        let t = x - i as f64;
        if t > 0.0 {
            s += if i.is_multiple_of(2) { binom } else { -binom } * t.powi(k as i32);
        }
        binom = binom * (k - i) as f64 / (i + 1) as f64;
    }
    s / fact
}

#[test]
fn projection_equals_the_integral_against_the_b_spline() {
    // A waveform with steps anywhere, also on grid points and near the end
    // (the record wraps around), projected with orders 1 to 6.
    let h = 0.75;
    let n = 40;
    let end = n as f64 * h;
    let steps = [
        (0.3, 1.0),
        (3.0, -0.5),
        (7.2, 0.25),
        (12.0 * h, -1.5),
        (25.1, 0.8),
        (29.9, 0.4),
    ];
    let w = Wave {
        start: 0.2,
        steps: steps.iter().map(|&(t, d)| Step { t, delta: d }).collect(),
        end,
    };
    for order in 1..=6 {
        let y = project(&w, h, n, order);
        for (i, &yi) in y.iter().enumerate() {
            // Direct: sum over the constant pieces of the periodic extension
            // of value x (C((b - t0)/h) - C((a - t0)/h)).
            let t0 = i as f64 * h;
            let mut direct = 0.0;
            for rep in 0..2 {
                let off = rep as f64 * end;
                let mut a = off;
                let mut v = w.start;
                for s in w
                    .steps
                    .iter()
                    .map(|s| (s.t + off, s.delta))
                    .chain([(end + off, 0.0)])
                {
                    direct += v
                        * (bspline_integral((s.0 - t0) / h, order)
                            - bspline_integral((a - t0) / h, order));
                    a = s.0;
                    v += s.1;
                }
            }
            assert!(
                (yi - direct).abs() < 1e-12,
                "order {order} sample {i}: {yi} vs {direct}"
            );
        }
    }
}

#[test]
fn units_parse() {
    // SI prefixes (BIPM SI brochure).
    assert_eq!(parse_hz("98.304MHz"), Ok(98.304e6));
    assert_eq!(parse_hz("384kHz"), Ok(384e3));
    assert_eq!(parse_hz("48k"), Ok(48e3));
    assert_eq!(parse_hz("997"), Ok(997.0));
    assert_eq!(parse_hz("1.5 GHz"), Ok(1.5e9));
    assert!((parse_seconds("20ns").unwrap() - 20e-9).abs() < 1e-24);
    assert!((parse_seconds("1.5us").unwrap() - 1.5e-6).abs() < 1e-21);
    assert!((parse_seconds("2ms").unwrap() - 2e-3).abs() < 1e-18);
    assert_eq!(parse_seconds("1s"), Ok(1.0));
    assert_eq!(parse_seconds("1e-3"), Ok(1e-3));
    assert_eq!(parse_db("-1dBFS"), Ok(-1.0));
    assert_eq!(parse_db("-60 dB"), Ok(-60.0));
    assert!(parse_hz("12 parsecs").is_err());
    assert!(parse_hz("fast").is_err());
    assert!(parse_seconds("3 xs").is_err());
    assert!(parse_db("-1 V").is_err());
}

#[test]
fn dead_time_node_models() {
    // Half bridge, exact natural sampling, near-silent tone, dead time d
    // from a generator. Murai et al. 1987 / Mohan et al. 2003 ch. 8
    // [memory], REFERENCES.md section 6: with the current flowing out of
    // the leg the node sits low through both dead intervals, and the mean
    // output drops by 2 t_d f_s in +/-1 units; into the leg it rises by the
    // same; the ideal (mid-point) node keeps the mean.
    let d = 3u32;
    let base = LabSpec {
        timer: TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Single),
        bridge: BridgeSpec {
            dead_time_ticks: d,
            ..BridgeSpec::ideal(BridgeKind::Half)
        },
        sampling: ExactSampling::Natural,
        exact: true,
        level_dbfs: -120.0,
        tone_hz: 1e3,
        record_s: 0.01,
        ..LabSpec::reference()
    };
    let expect = 2.0 * d as f64 / 256.0;
    for (node, sign) in [
        (DeadNode::Low, -1.0),
        (DeadNode::High, 1.0),
        (DeadNode::Midpoint, 0.0),
    ] {
        let r = render(&LabSpec {
            dead_node: node,
            ..base
        })
        .unwrap();
        let mean = r.output.mean();
        assert!(
            (mean - sign * expect).abs() < 1e-5,
            "{node:?}: mean {mean}, expected {}",
            sign * expect
        );
    }
}

#[test]
fn window_in_place_equals_the_definition() {
    // The fast in-place form against the cosine-sum definition.
    for n in [7usize, 64, 1001] {
        let mut y = vec![1.0; n];
        ticktone::lab::window::apply(&mut y);
        for (a, b) in y.iter().zip(window(n)) {
            assert!((a - b).abs() < 1e-14, "{n}: {a} vs {b}");
        }
    }
}
