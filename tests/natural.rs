//! Natural sampling against the double Fourier series of uniform sampling
//! (REFERENCES.md section 1) and the published interpolation + Newton
//! figures (section 3).
//!
//! Harmonics are measured in closed form: the switched output `2 on(t) - 1`
//! over a coherent record has, at angular frequency `w` (radians per
//! period), the Fourier coefficient `(2 / L) sum over pulses of
//! (e^(-jwa) - e^(-jwb)) / (jw)` (the constant part integrates to zero over
//! whole cycles). Edge times are the unrounded Q16 high counts / 65536.
//! The solver is fed the analytic sine sampled at the update rate, what the
//! oversampler delivers minus its tiny error.

use proptest::prelude::*;
use puruspe::Jn;
use std::f64::consts::PI;
use ticktone::crossing::Poly;
use ticktone::edge::{EdgeSolver, Sampling};
use ticktone::timer::{Edge, Timer, TimerSpec, UpdateScheme};

const CLOCK: f64 = 98.304e6;
const FC: f64 = 384e3;
/// -1 dBFS.
fn m_1dbfs() -> f64 {
    10f64.powf(-1.0 / 20.0)
}

/// Amplitudes of harmonics 1..=3 of the two-level output with high-side
/// on-intervals `pulses` (in periods) over `len` periods, signal at `fo`.
fn harmonics(pulses: &[(f64, f64)], len: f64, fo: f64) -> [f64; 3] {
    core::array::from_fn(|i| {
        let w = 2.0 * PI * (i + 1) as f64 * fo / FC;
        let (mut re, mut im) = (0.0, 0.0);
        for &(a, b) in pulses {
            // (e^(-jwa) - e^(-jwb)) / (jw) = (sin wb - sin wa + j (cos wb - cos wa)) / w
            re += ((w * b).sin() - (w * a).sin()) / w;
            im += ((w * b).cos() - (w * a).cos()) / w;
        }
        // Peak amplitude: twice the modulus of (2 / L) * sum.
        4.0 / len * (re * re + im * im).sqrt()
    })
}

/// H2 and H3 in dB relative to the fundamental.
fn rel_db(h: [f64; 3]) -> (f64, f64) {
    (20.0 * (h[1] / h[0]).log10(), 20.0 * (h[2] / h[0]).log10())
}

/// On-interval (periods) of update `k` with high count `c` (Q16 ticks),
/// following the carrier table of `ticktone::timer`.
fn pulse(t: &Timer, k: usize, c: i32) -> (f64, f64) {
    let w = c as f64 / 65536.0 / t.top() as f64; // fraction of the slot's range
    let upp = t.updates_per_period() as usize;
    let p = (k / upp) as f64;
    match (t.edge(), upp, k % 2) {
        (Edge::Trailing, _, _) => (p, p + w),
        (Edge::Leading, _, _) => (p + 1.0 - w, p + 1.0),
        (Edge::Double, 1, _) => (p + 0.5 - w / 2.0, p + 0.5 + w / 2.0),
        (Edge::Double, _, 0) => (p + 0.5 - w / 2.0, p + 0.5),
        (Edge::Double, _, _) => (p + 0.5, p + 0.5 + w / 2.0),
    }
}

/// Run the solver on a sine of `m` at `fo` and measure. `cycles` whole
/// cycles must be a whole number of periods.
fn measure(spec: TimerSpec, sampling: Sampling, fo: f64, m: f64, cycles: usize) -> [f64; 3] {
    let t = Timer::try_new(spec).unwrap();
    let mut e = EdgeSolver::try_new(&t, sampling).unwrap();
    let fu = t.update_rate_hz();
    let slots = (cycles as f64 * fu / fo).round() as usize;
    assert!(
        ((slots as f64) * fo / fu - cycles as f64).abs() < 1e-9,
        "record not coherent"
    );
    let warm = 16; // even, longer than any delay + history
    let mut pulses = Vec::with_capacity(slots);
    for n in 0..warm + slots {
        let x = m * (2.0 * PI * fo * n as f64 / fu + 0.3).sin();
        let c = e.next((x * 2147483648.0).round() as i32);
        assert!((0..=(t.top() as i32) << 16).contains(&c));
        if n >= warm {
            pulses.push(pulse(&t, n - warm, c));
        }
    }
    harmonics(
        &pulses,
        (slots / t.updates_per_period() as usize) as f64,
        fo,
    )
}

fn trailing() -> TimerSpec {
    TimerSpec::new(CLOCK, FC).with_edge(Edge::Trailing)
}
fn leading() -> TimerSpec {
    TimerSpec::new(CLOCK, FC).with_edge(Edge::Leading)
}
fn symmetric() -> TimerSpec {
    TimerSpec::new(CLOCK, FC)
}
fn asymmetric() -> TimerSpec {
    TimerSpec::new(CLOCK, FC).with_update(UpdateScheme::Double)
}

/// Uniform-sampling amplitudes A_1..A_3, REFERENCES.md section 1 (Bennett
/// 1933; Holmes & Lipo 2003 ch. 3 [memory]), Bessel functions from puruspe.
fn uniform_theory(kind: &str, fo: f64, m: f64) -> [f64; 3] {
    let r = fo / FC;
    core::array::from_fn(|i| {
        let n = (i + 1) as f64;
        let x = n * PI * r;
        match kind {
            "trailing" => 2.0 / x * Jn(n as u32, x * m).abs(),
            "symmetric" => {
                4.0 / x * (Jn(n as u32, x * m / 2.0) * (n * PI * (1.0 + r) / 2.0).sin()).abs()
            }
            _ if i % 2 == 1 => 0.0,
            _ => 4.0 / x * Jn(n as u32, x * m / 2.0).abs(),
        }
    })
}

#[test]
fn uniform_sampling_matches_the_double_fourier_series() {
    // Checks the measurement and the carrier conventions before anything
    // is compared with them: the crate's uniform mode against the closed
    // forms (REFERENCES.md section 1), within 0.05 dB.
    let m = m_1dbfs();
    for (kind, spec) in [
        ("trailing", trailing()),
        ("trailing", leading()), // same magnitudes as trailing [derived]
        ("symmetric", symmetric()),
        ("asymmetric", asymmetric()),
    ] {
        let got = rel_db(measure(spec, Sampling::Uniform, 10e3, m, 5));
        let want = rel_db(uniform_theory(kind, 10e3, m));
        eprintln!(
            "uniform {kind} {:?}: measured {got:.2?}, theory {want:.2?}",
            spec.edge
        );
        assert!(
            (got.1 - want.1).abs() < 0.05,
            "{kind} H3 {got:?} vs {want:?}"
        );
        if kind == "asymmetric" {
            // Even harmonics exactly zero [Holmes & Lipo]: only the Q31
            // rounding of the input and the Q16 truncation are left.
            assert!(got.0 < -150.0, "asymmetric H2 {}", got.0);
        } else {
            assert!(
                (got.0 - want.0).abs() < 0.05,
                "{kind} H2 {got:?} vs {want:?}"
            );
        }
    }
}

#[test]
fn natural_sampling_is_40_db_below_uniform_at_10_khz() {
    // Issue 4: H2 and H3 at least 40 dB below the uniform values of
    // REFERENCES.md section 1 for the same edge kind, 10 kHz at -1 dBFS,
    // f_c = 384 kHz, cubic interpolation and one Newton step.
    let m = m_1dbfs();
    for (kind, spec) in [
        ("trailing", trailing()),
        ("trailing", leading()),
        ("symmetric", symmetric()),
        ("asymmetric", asymmetric()),
    ] {
        let h = measure(spec, Sampling::NATURAL, 10e3, m, 5);
        let (h2, h3) = rel_db(h);
        let (u2, u3) = rel_db(uniform_theory(kind, 10e3, m));
        eprintln!(
            "natural {kind} {:?}: H2 {h2:.1} dB (uniform {u2:.1}), H3 {h3:.1} dB (uniform {u3:.1}), A1 {:.6}",
            spec.edge, h[0]
        );
        assert!(h3 <= u3 - 40.0, "{kind}: H3 {h3} vs uniform {u3}");
        if kind == "asymmetric" {
            // Uniform H2 is exactly zero here, and so is natural sampling's:
            // with a time-symmetric interpolator the rising and falling
            // slots are mirror images [derived]; only rounding is left.
            assert!(h2 < -140.0, "{kind}: H2 {h2}");
        } else {
            assert!(h2 <= u2 - 40.0, "{kind}: H2 {h2} vs uniform {u2}");
        }
        // Natural sampling keeps A1 = M (Song & Sarwate 2003): the
        // interpolator's droop at 10 kHz is below 1e-5.
        assert!((h[0] / m - 1.0).abs() < 2e-5, "{kind}: A1 {}", h[0]);
    }
}

#[test]
fn lower_orders_and_iterations_rank_as_expected() {
    // More order or more steps never makes H3 worse by more than noise,
    // and order 3 with one step beats order 1 by a wide margin (the
    // interpolation error falls as (w T)^(order+1)) [derived].
    let m = m_1dbfs();
    for spec in [trailing(), asymmetric()] {
        let mut h3 = [[0.0; 4]; 4];
        for order in 1..=3u8 {
            for it in 0..=3u8 {
                let s = Sampling::Natural {
                    order,
                    iterations: it,
                };
                let (a, b) = rel_db(measure(spec, s, 10e3, m, 5));
                h3[order as usize][it as usize] = b;
                eprintln!(
                    "{:?} {:?} order {order} iterations {it}: H2 {a:.1} H3 {b:.1}",
                    spec.edge, spec.update
                );
            }
        }
        assert!(h3[3][1] < h3[1][1] - 30.0, "{:?}", h3);
        assert!(h3[3][1] < h3[3][0] - 30.0, "{:?}", h3);
    }
    // One update a period: no iterations is uniform sampling; orders 1-2
    // keep the first correction term, order 3 both (crate docs, edge.rs).
    let u = rel_db(uniform_theory("symmetric", 10e3, m));
    let mut h = [(0.0, 0.0); 4];
    for order in 1..=3u8 {
        h[order as usize] = rel_db(measure(
            symmetric(),
            Sampling::Natural {
                order,
                iterations: 1,
            },
            10e3,
            m,
            5,
        ));
        eprintln!(
            "symmetric order {order}: H2 {:.1} H3 {:.1}",
            h[order as usize].0, h[order as usize].1
        );
    }
    let h0 = rel_db(measure(
        symmetric(),
        Sampling::Natural {
            order: 3,
            iterations: 0,
        },
        10e3,
        m,
        5,
    ));
    assert!(
        (h0.0 - u.0).abs() < 0.05 && (h0.1 - u.1).abs() < 0.05,
        "{h0:?} vs {u:?}"
    );
    assert!(h[1].0 < u.0 - 40.0 && h[1].1 < u.1 - 25.0, "{:?}", h[1]);
    assert!(h[3].1 < h[1].1 - 20.0, "{h:?}");
}

#[test]
fn references_section_3_figures() {
    // REFERENCES.md section 3, all three [computed] there: f_c = 384 kHz,
    // M = 0.9, 10 kHz, double edge, one sample a period (at the period
    // start), both crossings of each period solved with one Newton step
    // and placed freely. Linear about -62/-75 dB, quadratic -84/-97,
    // cubic -108/-123 (H2/H3). Same method here through crossing::Poly:
    // the falling half of the carrier is the first half of the node
    // interval, time-reversed; the rising half the second.
    let (fo, m, periods) = (10e3, 0.9, 192);
    let q = |k: isize| {
        ((m * (2.0 * PI * fo * k as f64 / FC + 0.3).sin()) * 2147483648.0).round() as i32
    };
    let want = [(-62.0, -75.0), (-84.0, -97.0), (-108.0, -123.0)];
    for (order, (w2, w3)) in (1..=3).zip(want) {
        let mut free = Vec::new();
        let mut centred = Vec::new();
        for k in 0..periods as isize {
            let p = match order {
                1 => Poly::linear(q(k), q(k + 1)),
                2 => Poly::quadratic(q(k - 1), q(k), q(k + 1)),
                _ => Poly::cubic(q(k - 1), q(k), q(k + 1), q(k + 2)),
            };
            let v1 = p.first_half().reversed().crossing(1) as f64 / 2147483648.0;
            let v2 = p.second_half().crossing(1) as f64 / 2147483648.0;
            // Carrier 1 - 4u on the first half, -3 + 4u on the second.
            let (u1, u2) = ((1.0 - v1) / 4.0, (3.0 + v2) / 4.0);
            free.push((k as f64 + u1, k as f64 + u2));
            let w = u2 - u1;
            centred.push((k as f64 + 0.5 - w / 2.0, k as f64 + 0.5 + w / 2.0));
        }
        let (h2, h3) = rel_db(harmonics(&free, periods as f64, fo));
        eprintln!("section 3, order {order}: H2 {h2:.2} H3 {h3:.2} (published {w2}/{w3})");
        assert!(
            (h2 - w2).abs() < 2.0 && (h3 - w3).abs() < 2.0,
            "order {order}: {h2} {h3}"
        );
        if order == 3 {
            // The natural width written as a centred pulse (one compare
            // value) is worse than uniform sampling by 6 dB: moving the
            // pulse to the centre adds -2 times the uniform error
            // [derived in ticktone::edge; an analysis, not a publication].
            let (c2, c3) = rel_db(harmonics(&centred, periods as f64, fo));
            let (u2, u3) = rel_db(uniform_theory("symmetric", fo, m));
            eprintln!("natural width centred: H2 {c2:.2} H3 {c3:.2}; uniform {u2:.2} {u3:.2}");
            assert!((c2 - u2 - 6.02).abs() < 0.5, "{c2} vs {u2}");
            assert!((c3 - u3 - 6.02).abs() < 1.0, "{c3} vs {u3}");
        }
    }
}

fn all_configs() -> Vec<(Timer, Sampling)> {
    let mut v = Vec::new();
    for spec in [trailing(), leading(), symmetric(), asymmetric()] {
        let t = Timer::try_new(spec).unwrap();
        v.push((t, Sampling::Uniform));
        for order in 1..=3 {
            for iterations in 0..=3 {
                v.push((t, Sampling::Natural { order, iterations }));
            }
        }
    }
    v
}

#[test]
fn full_scale_alternation_stays_in_range() {
    // A slew far beyond the carrier's: natural sampling has no answer, the
    // solver must still give a high count within [0, top << 16] (issue 4,
    // crate docs) and not overflow (this runs in debug: overflow panics).
    for (t, s) in all_configs() {
        let mut e = EdgeSolver::try_new(&t, s).unwrap();
        for k in 0..64 {
            let x = [i32::MIN, i32::MAX, i32::MAX, i32::MIN, 0][k % 5];
            let x = if k > 32 {
                [i32::MIN, i32::MAX][k % 2]
            } else {
                x
            };
            let c = e.next(x);
            assert!((0..=(t.top() as i32) << 16).contains(&c), "{s:?}: {c}");
        }
    }
}

proptest! {
    #[test]
    fn any_input_stays_in_range(xs in proptest::collection::vec(any::<i32>(), 1..48)) {
        for (t, s) in all_configs() {
            let mut e = EdgeSolver::try_new(&t, s).unwrap();
            for &x in &xs {
                let c = e.next(x);
                prop_assert!((0..=(t.top() as i32) << 16).contains(&c), "{:?}: {}", s, c);
            }
        }
    }
}
