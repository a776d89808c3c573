//! The planner's prediction against the textbook figures, and against the
//! lab's measurement of the firmware path.

use ticktone::lab::exact::ExactSampling;
use ticktone::lab::run::{measure_once, LabSpec};
use ticktone::ntf::{NtfPoles, NtfZeros};
use ticktone::plan::{nearest_lock, plan, predicted_snr_db, PlanSpec};
use ticktone::requant::Requantiser;
use ticktone::{BridgeKind, Edge, ShaperSpec, Timer, TimerSpec, UpdateScheme};

fn dc_fir(order: u8) -> ShaperSpec {
    ShaperSpec {
        order,
        dither: false,
        zeros: NtfZeros::Dc,
        half_rate_zeros: 0,
        poles: NtfPoles::None,
    }
}

/// Ideal SQNR of `(1 - z^-1)^L` noise shaping with 256 levels, REFERENCES.md
/// section 4 table [computed there by the exact integral], after Schreier &
/// Temes 2005 ch. 4 [memory]; order 0 is 6.02 log2(256) + 1.76 +
/// 10 log10(OSR).
#[test]
fn matches_the_textbook_table() {
    let table: [(u8, f64, f64); 6] = [
        (0, 59.75, 62.76),
        (1, 74.25, 83.26),
        (2, 86.20, 101.21),
        (3, 97.40, 118.40),
        (4, 108.23, 135.22),
        (5, 118.84, 151.83),
    ];
    // 256 levels: trailing edge with a 256-tick period; OSR 9.6 at a
    // 384 kHz update rate, 19.2 at 768 kHz, band 20 kHz.
    for (carrier, col) in [(384e3, 1), (768e3, 2)] {
        let t = Timer::try_new(TimerSpec::new(256.0 * carrier, carrier).with_edge(Edge::Trailing))
            .unwrap();
        for &(l, a, b) in &table {
            let q = Requantiser::try_new(&t, 0, 256, dc_fir(l)).unwrap();
            let got = predicted_snr_db(&t, &q, 20e3);
            let want = if col == 1 { a } else { b };
            assert!(
                (got - want).abs() < 0.05,
                "L={l} carrier {carrier}: {got:.2} vs {want}"
            );
        }
    }
}

fn reference_plan() -> PlanSpec {
    PlanSpec {
        input_rate_hz: 48e3,
        clocks_hz: vec![98.304e6],
        carrier_min_hz: 200e3,
        carrier_max_hz: 800e3,
        band_hz: 20e3,
        target_snr_db: 110.0,
        bridge: BridgeKind::Full3,
        max_order: 5,
    }
}

/// The reference timer is among the plans, and the prediction for it
/// agrees with the lab's measurement of the firmware path (uniform
/// sampling, where the in-band error is mostly the shaped rounding): within
/// 1 dB at order 3 (measured 121.0 predicted, 120.8 lab). At order 5 the lab
/// reads 3.5 dB lower: the prediction is the quantisation bound, and at
/// -143 dBFS other floors (the shaper's 16 fraction bits, about -153 dBFS,
/// and PWM's mixing of shaped noise) add up; the test holds the lab below
/// the bound and within 4 dB of it.
#[test]
fn prediction_agrees_with_the_lab() {
    let rows = plan(&reference_plan()).unwrap();
    let row = rows
        .iter()
        .find(|c| c.carrier_hz == 384e3 && c.update == UpdateScheme::Double)
        .expect("384 kHz, two updates a period locks to 48 kHz at 16x");
    assert_eq!((row.ratio, row.top, row.period_ticks), (16, 128, 256));
    assert!(row.meets(110.0), "{row:?}");
    for order in [3u8, 5] {
        let t = Timer::try_new(row.timer_spec()).unwrap();
        let q = Requantiser::try_new(&t, 0, 128, ShaperSpec::new(order)).unwrap();
        let predicted = predicted_snr_db(&t, &q, 20e3);
        let mut lab = LabSpec::reference();
        lab.sampling = ExactSampling::Uniform;
        lab.shaper = ShaperSpec::new(order);
        lab.record_s = 0.5;
        let (_, _, m) = measure_once(&lab).unwrap();
        println!(
            "order {order}: predicted {predicted:.1} dB, lab {:.1} dB",
            m.snr_db
        );
        let (below, above) = if order <= 3 { (1.0, 1.0) } else { (4.0, 0.5) };
        assert!(
            m.snr_db > predicted - below && m.snr_db < predicted + above,
            "order {order}: predicted {predicted} vs lab {}",
            m.snr_db
        );
    }
    // Sorted: rows that reach the target first, lowest carrier first.
    let first_miss = rows
        .iter()
        .position(|c| !c.meets(110.0))
        .unwrap_or(rows.len());
    assert!(rows[..first_miss]
        .windows(2)
        .all(|w| w[0].carrier_hz <= w[1].carrier_hz));
}

/// A 100 MHz clock locks no carrier to 48 kHz: the nearest clock that does
/// is 98.304 MHz (2048 x 48 kHz), 17 252 ppm away; 98.304 MHz locks exactly.
#[test]
fn rate_lock() {
    let spec = reference_plan();
    let (clock, ppm) = nearest_lock(&spec, 98.304e6).unwrap();
    assert!((clock - 98.304e6).abs() < 1e-3 && ppm.abs() < 1e-9);
    let spec = PlanSpec {
        clocks_hz: vec![100e6],
        ..reference_plan()
    };
    assert!(plan(&spec).unwrap().is_empty());
    let (clock, ppm) = nearest_lock(&spec, 100e6).unwrap();
    // 100e6 / 98.304e6 - 1 = 17 252 ppm; any locking clock is a multiple
    // of 48 kHz times a ratio, so the nearest is within half a step.
    assert!((clock - 100e6).abs() < 384e3 / 2.0 * 1.01, "{clock}");
    assert!((ppm - (100e6 - clock) / clock * 1e6).abs() < 1e-6);
}
