//! The lab against the double Fourier series of PWM, exact mode.
//!
//! Sources: W. R. Bennett, Bell Syst. Tech. J. 12 (1933) (the method);
//! H. S. Black, *Modulation Theory* (1953) [memory: chapter]; D. G. Holmes &
//! T. A. Lipo, *Pulse Width Modulation for Power Converters* (2003), ch. 3
//! [memory: chapter]; check values from REFERENCES.md section 1 [computed
//! there with scipy]. Oracle: the Bessel functions of the `puruspe` crate.
//! Natural sampling: Z. Song & D. V. Sarwate, Signal Processing 83(10)
//! (2003): the baseband of naturally sampled PWM is the input itself.

use puruspe::Jn;
use std::f64::consts::PI;
use ticktone::lab::exact::ExactSampling;
use ticktone::lab::run::{measure_once, LabSpec};
use ticktone::{BridgeKind, BridgeSpec, Edge, TimerSpec, UpdateScheme};

const FC: f64 = 384e3;

#[derive(Clone, Copy, Debug, PartialEq)]
enum Variant {
    Trailing,
    Leading,
    Symmetric,
    Asymmetric,
}

fn spec(v: Variant, sampling: ExactSampling, kind: BridgeKind, f: f64, m: f64) -> LabSpec {
    let t = TimerSpec::new(98.304e6, FC);
    let timer = match v {
        Variant::Trailing => t.with_edge(Edge::Trailing),
        Variant::Leading => t.with_edge(Edge::Leading),
        Variant::Symmetric => t.with_update(UpdateScheme::Single),
        Variant::Asymmetric => t.with_update(UpdateScheme::Double),
    };
    LabSpec {
        timer,
        bridge: BridgeSpec::ideal(kind),
        sampling,
        exact: true,
        tone_hz: f,
        level_dbfs: 20.0 * m.log10(),
        // 10 ms: 1, 6 and 10 kHz fit a whole number of cycles (10, 60, 100),
        // so r = f / fc is exactly the tabulated one.
        record_s: 0.01,
        ..LabSpec::reference()
    }
}

/// Baseband harmonic amplitudes of uniformly sampled PWM, REFERENCES.md
/// section 1 (Black 1953; Holmes & Lipo 2003 ch. 3 [memory]).
fn theory(v: Variant, n: u32, r: f64, m: f64) -> f64 {
    let nf = n as f64;
    match v {
        Variant::Trailing | Variant::Leading => 2.0 / (nf * PI * r) * Jn(n, nf * PI * r * m).abs(),
        Variant::Symmetric => {
            4.0 / (nf * PI * r)
                * (Jn(n, nf * PI * r * m / 2.0) * (nf * PI * (1.0 + r) / 2.0).sin()).abs()
        }
        Variant::Asymmetric => {
            if n.is_multiple_of(2) {
                0.0
            } else {
                4.0 / (nf * PI * r) * Jn(n, nf * PI * r * m / 2.0).abs()
            }
        }
    }
}

fn db(x: f64) -> f64 {
    20.0 * x.log10()
}

/// (variant, f_o, M, A_1, H2 dBc, H3 dBc) from the REFERENCES.md section 1
/// table [computed]; `None` where the table says "none".
const TABLE: [(Variant, f64, f64, f64, Option<f64>, f64); 8] = [
    (Variant::Trailing, 1e3, 0.9, 0.8999939, Some(-48.68), -93.84),
    (Variant::Trailing, 6e3, 0.9, 0.8997804, Some(-33.12), -62.72),
    (
        Variant::Trailing,
        10e3,
        0.5,
        0.4998954,
        Some(-33.79),
        -64.05,
    ),
    (
        Variant::Symmetric,
        1e3,
        0.9,
        0.8999909,
        Some(-96.44),
        -105.88,
    ),
    (
        Variant::Symmetric,
        6e3,
        0.9,
        0.8996741,
        Some(-65.32),
        -74.77,
    ),
    (
        Variant::Symmetric,
        10e3,
        0.5,
        0.4995556,
        Some(-61.55),
        -76.15,
    ),
    (Variant::Asymmetric, 6e3, 0.9, 0.8999451, None, -74.75),
    (Variant::Asymmetric, 10e3, 0.9, 0.8998475, None, -65.88),
];

#[test]
fn uniform_sampling_matches_the_double_fourier_series() {
    for &(v, f, m, a1_table, h2_table, h3_table) in &TABLE {
        let (r, s, met) =
            measure_once(&spec(v, ExactSampling::Uniform, BridgeKind::Half, f, m)).unwrap();
        assert_eq!(r.plan.tone_hz, f, "{v:?}: record must hold whole cycles");
        let ratio = f / FC;
        let k0 = s.bin_of(f);
        let a1 = s.amp[k0].norm();
        // Fundamental within 1e-4 relative of the table and of the Bessel oracle.
        assert!(
            (a1 / a1_table - 1.0).abs() < 1e-4,
            "{v:?} {f}: A1 {a1} vs table {a1_table}"
        );
        let a1_theory = theory(v, 1, ratio, m);
        assert!(
            (a1 / a1_theory - 1.0).abs() < 1e-6,
            "{v:?} {f}: A1 {a1} vs Bessel {a1_theory}"
        );
        // The closed-form coefficient from the edges agrees with the spectrum.
        let c1 = r.output.coefficient(r.plan.cycles as f64).norm();
        assert!(
            (c1 / a1 - 1.0).abs() < 1e-9,
            "{v:?} {f}: closed form {c1} vs spectrum {a1}"
        );
        for (n, table) in [(2u32, h2_table), (3, Some(h3_table))] {
            let k = n as usize * k0;
            // In band from the lab's spectrum; above the band (H3 of 10 kHz)
            // from the lab's closed-form coefficient of the edges.
            let hn = if k as f64 * s.bin_hz > 20e3 {
                db(r.output
                    .coefficient((n as u64 * r.plan.cycles) as f64)
                    .norm()
                    / a1)
            } else {
                db(s.amp[k].norm() / a1)
            };
            let t = theory(v, n, ratio, m);
            eprintln!(
                "{v:?} {f} Hz M {m}: A1 {a1:.7} (table {a1_table}), H{n} {hn:.3} dBc (table {table:?}, Bessel {:.3})",
                db(t / a1_theory)
            );
            if let Some(tab) = table {
                // H2/H3 within 0.2 dB of the table (REFERENCES.md section 1).
                assert!(
                    (hn - tab).abs() < 0.2,
                    "{v:?} {f} H{n}: {hn:.3} dBc vs table {tab}"
                );
            }
            if t > 0.0 && db(t / a1_theory) > -130.0 {
                // ... and of the Bessel oracle.
                let th = db(t / a1_theory);
                assert!(
                    (hn - th).abs() < 0.2,
                    "{v:?} {f} H{n}: {hn:.3} dBc vs Bessel {th:.3}"
                );
            }
        }
        // The metrics report the same harmonics.
        let h3 = met.harmonics.iter().find(|h| h.order == 3).map(|h| h.dbc);
        if let Some(h3) = h3 {
            assert!((h3 - h3_table).abs() < 0.2, "{v:?} {f}: metrics H3 {h3}");
        }
    }
}

#[test]
fn leading_edge_has_the_trailing_edge_magnitudes() {
    // REFERENCES.md section 1 [derived]: leading edge = trailing edge magnitudes.
    for &(f, m) in &[(6e3, 0.9), (10e3, 0.5)] {
        let (_, s, _) = measure_once(&spec(
            Variant::Leading,
            ExactSampling::Uniform,
            BridgeKind::Half,
            f,
            m,
        ))
        .unwrap();
        let k0 = s.bin_of(f);
        for n in 1..=3u32 {
            let k = n as usize * k0;
            if k as f64 * s.bin_hz > 20e3 {
                continue;
            }
            let t = theory(Variant::Trailing, n, f / FC, m);
            let got = s.amp[k].norm();
            assert!((db(got / t)).abs() < 0.01, "leading {f} H{n}: {got} vs {t}");
        }
    }
}

#[test]
fn asymmetric_sampling_has_no_even_harmonics() {
    // REFERENCES.md section 1: asymmetric double edge, even n exactly 0.
    // The lab must show them below -150 dBc (its floor).
    for &(f, m) in &[(1e3, 0.9), (6e3, 0.9), (10e3, 0.9)] {
        let (_, s, _) = measure_once(&spec(
            Variant::Asymmetric,
            ExactSampling::Uniform,
            BridgeKind::Half,
            f,
            m,
        ))
        .unwrap();
        let k0 = s.bin_of(f);
        let a1 = s.amp[k0].norm();
        for n in (2..=9usize).step_by(2) {
            if (n * k0) as f64 * s.bin_hz > 20e3 {
                break;
            }
            let h = db(s.amp[n * k0].norm() / a1);
            assert!(h < -150.0, "asymmetric {f} H{n}: {h:.1} dBc");
        }
    }
}

#[test]
fn natural_sampling_has_no_in_band_harmonics() {
    // Song & Sarwate 2003: naturally sampled PWM has the input as its
    // baseband; every in-band harmonic must read below -150 dBc.
    let cases = [
        (Variant::Trailing, BridgeKind::Half),
        (Variant::Leading, BridgeKind::Half),
        (Variant::Symmetric, BridgeKind::Half),
        (Variant::Asymmetric, BridgeKind::Full3),
        (Variant::Symmetric, BridgeKind::Full2),
    ];
    for &(v, kind) in &cases {
        for &(f, m) in &[(1e3, 0.9), (6e3, 0.9), (10e3, 0.9)] {
            let (_, s, met) = measure_once(&spec(v, ExactSampling::Natural, kind, f, m)).unwrap();
            // A1 = M exactly (REFERENCES.md section 1).
            let a1 = s.amp[s.bin_of(f)].norm();
            assert!((a1 / m - 1.0).abs() < 1e-9, "{v:?} {kind:?} {f}: A1 {a1}");
            for h in &met.harmonics {
                assert!(
                    h.dbc < -150.0,
                    "{v:?} {kind:?} {f}: H{} {:.1} dBc",
                    h.order,
                    h.dbc
                );
            }
            assert!(
                met.thd_db < -150.0 && met.thdn_db < -150.0,
                "{v:?} {kind:?} {f}: {met:?}"
            );
        }
    }
}
