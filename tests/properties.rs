//! Safety and exactness properties of the firmware path over arbitrary
//! configurations and inputs, checked from the outside: compare words are
//! turned back into switch waveforms by `ticktone::rebuild` (a software
//! timer and dead-time generator) and the switch timings are measured there.

use proptest::prelude::*;
use ticktone::rebuild::{channel_wave, dead_gaps, leg_switches};
use ticktone::{
    Bridge, BridgeKind, BridgeSpec, ConfigError, DeadTimeForm, Edge, LegMode, Modulator,
    ModulatorSpec, Timer, TimerSpec, UpdateScheme,
};

/// One configuration: a carrier of 400 kHz and a clock of `period` times
/// that, so every period in range is valid by construction.
#[derive(Clone, Debug)]
struct Case {
    period: u32,
    edge: Edge,
    update: UpdateScheme,
    kind: BridgeKind,
    form: DeadTimeForm,
    dead: u32,
    min_pulse: u32,
    min_low: u32,
    natural: bool,
}

fn case() -> impl Strategy<Value = Case> {
    (
        8u32..600,
        prop_oneof![
            Just(Edge::Trailing),
            Just(Edge::Leading),
            Just(Edge::Double)
        ],
        any::<bool>(),
        prop_oneof![
            Just(BridgeKind::Half),
            Just(BridgeKind::Full2),
            Just(BridgeKind::Full3)
        ],
        any::<bool>(),
        0u32..40,
        0u32..20,
        0u32..30,
        any::<bool>(),
    )
        .prop_map(
            |(p, edge, double, kind, separate, dead, min_pulse, min_low, natural)| {
                let updown = edge == Edge::Double;
                // Up/down needs an even period; 3-level an even compare range.
                let step = match (updown, kind == BridgeKind::Full3) {
                    (true, true) => 4,
                    (true, false) | (false, true) => 2,
                    (false, false) => 1,
                };
                let period = (p / step).max(8 / step + 1) * step;
                Case {
                    period,
                    edge,
                    update: if updown && double {
                        UpdateScheme::Double
                    } else {
                        UpdateScheme::Single
                    },
                    kind,
                    form: if updown && separate {
                        DeadTimeForm::SeparateCompares
                    } else {
                        DeadTimeForm::Generator
                    },
                    dead: dead.min(period / 8),
                    min_pulse: min_pulse.min(period / 8),
                    min_low: min_low.min(period / 4),
                    natural,
                }
            },
        )
}

fn spec(c: &Case) -> ModulatorSpec {
    let carrier = 400e3;
    let timer = TimerSpec::new(carrier * c.period as f64, carrier)
        .with_edge(c.edge)
        .with_update(c.update);
    let bridge = BridgeSpec {
        kind: c.kind,
        form: c.form,
        dead_time_ticks: c.dead,
        min_pulse_ticks: c.min_pulse,
        min_low_ticks: c.min_low,
    };
    let t = Timer::try_new(timer).unwrap();
    let mut spec = ModulatorSpec::new(timer, bridge, t.update_rate_hz());
    if c.natural {
        spec.sampling = ticktone::Sampling::NATURAL;
    }
    spec
}

/// Any f32, with the awkward ones often: NaN, infinities, full scale,
/// beyond full scale, alternating extremes.
fn samples() -> impl Strategy<Value = Vec<f32>> {
    let one = prop_oneof![
        4 => -1.2f32..1.2,
        1 => Just(f32::NAN),
        1 => Just(f32::INFINITY),
        1 => Just(f32::NEG_INFINITY),
        2 => Just(1.0f32),
        2 => Just(-1.0f32),
        1 => Just(0.0f32),
        1 => prop::num::f32::ANY,
    ];
    prop_oneof![
        prop::collection::vec(one, 1..120),
        (1usize..60).prop_map(|n| (0..n)
            .map(|i| if i % 2 == 0 { 1.0 } else { -1.0 })
            .collect()),
    ]
}

/// The clamp rule in plain real numbers: the high count is
/// `y = (1 + x) / 2 * top` for the input as the converter sees it, and the
/// compare is the nearest tick, halves up, limited to the bridge's range.
/// `x` is exactly representable, so is `y`.
fn model(x: f32, top: u32, low: u32, high: u32) -> (u32, bool, bool, bool) {
    let bad = x.is_nan() || !(-1.0..1.0).contains(&x);
    // The f32 adapter scales by 2^31 and truncates toward zero (Q1.31).
    let q = if x.is_nan() {
        0.0
    } else {
        ((x as f64).clamp(-1.0, 1.0 - 2f64.powi(-31)) * 2f64.powi(31)).trunc() / 2f64.powi(31)
    };
    let y = (q + 1.0) / 2.0 * top as f64;
    let y = (y * 65536.0).floor() / 65536.0; // 16 fraction bits, truncated
                                             // Nearest tick, halves up: anything from low - 1/2 rounds to >= low.
    let lowc = y < low as f64 - 0.5;
    let highc = y >= high as f64 + 0.5;
    let c = ((y + 0.5).floor() as u32).clamp(low, high);
    (c, bad, lowc, highc)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, ..ProptestConfig::default() })]

    #[test]
    fn words_switches_and_counters(c in case(), input in samples()) {
        let spec = spec(&c);
        let mut m = match Modulator::<1>::try_new(spec) {
            Ok(m) => m,
            // Dead time and pulses may leave no range for small periods:
            // that must be the typed error, nothing else.
            Err(e) => {
                prop_assert!(matches!(e, ConfigError::NoUsableDuty { .. }), "{e}");
                return Ok(());
            }
        };
        let timer = *m.timer();
        let bridge = *m.bridge();
        let top = timer.top();
        let (low, high) = bridge.high_count_range();
        let mut words = vec![0u32; input.len() * m.words_per_frame()];
        prop_assert_eq!(m.process(&input, &mut words), input.len());

        // Every compare value within [0, top] (top = the auto-reload value).
        prop_assert!(words.iter().all(|&w| w <= top), "word above {top}: {words:?}");

        // Counters count exactly the clamped values, against the model
        // (uniform sampling: the model is the plain formula).
        let (mut bad, mut lows, mut highs) = (0, 0, 0);
        let mut expect_c = Vec::new();
        for &x in &input {
            let (cc, b, l, h) = model(x, top, low, high);
            bad += b as u32;
            lows += l as u32;
            highs += h as u32;
            expect_c.push(cc);
        }
        let n = m.counters();
        prop_assert_eq!(n.input_clamped, bad);
        if !c.natural {
            prop_assert_eq!((n.low_clamped, n.high_clamped), (lows, highs));
        }

        // Leg A's words decode to the model's compare value.
        let wpu = bridge.words_per_update();
        for (k, &cc) in expect_c.iter().enumerate().filter(|_| !c.natural) {
            let w = words[k * wpu];
            let got = match (c.edge, c.form) {
                (Edge::Leading, _) => timer.period_ticks() - w,
                (_, DeadTimeForm::Generator) => w,
                (_, DeadTimeForm::SeparateCompares) => w + c.dead / 2,
            };
            prop_assert_eq!(got, cc);
        }

        // Switch level: never both on; every transition separated by the
        // dead time; every interior pulse at least the minimum; the low side
        // at least the bootstrap time.
        for leg in 0..bridge.legs() {
            let sw = leg_switches(&timer, &bridge, &words, 1, 0, leg);
            let (gap, overlap) = dead_gaps(&sw);
            prop_assert!(!overlap, "shoot-through on leg {leg}");
            if let Some(g) = gap {
                prop_assert!(g >= c.dead as f64, "gap {g} < dead time {}", c.dead);
            }
            let end = sw.high.end;
            for (a, b) in sw.high.on_intervals() {
                if a > 0.0 && b < end {
                    prop_assert!(b - a >= c.min_pulse as f64, "high pulse {} < {}", b - a, c.min_pulse);
                }
            }
            for (a, b) in sw.low.on_intervals() {
                if a > 0.0 && b < end {
                    prop_assert!(
                        b - a >= c.min_pulse.max(c.min_low) as f64,
                        "low pulse {} < {}", b - a, c.min_pulse.max(c.min_low)
                    );
                }
            }
        }

        // 3-level: silence gives equal legs, switch for switch.
        if c.kind == BridgeKind::Full3 {
            let mut m0 = Modulator::<1>::try_new(spec).unwrap();
            let mut w0 = vec![0u32; 8 * m0.words_per_frame()];
            m0.process(&[0i16; 8], &mut w0);
            let a = leg_switches(&timer, &bridge, &w0, 1, 0, 0);
            let b = leg_switches(&timer, &bridge, &w0, 1, 0, 1);
            prop_assert_eq!(a, b);
        }
    }
}

/// Mean duty equals a DC input within half a compare step, for every edge
/// kind and update scheme, measured on the rebuilt reference waveform.
/// (Rounding to the nearest of `top + 1` levels errs by at most half a
/// level: the duty of a pulse-width modulator is the compare value over the
/// range, e.g. Holmes & Lipo 2003, ch. 3 [memory for chapter].)
#[test]
fn dc_mean_duty() {
    for (edge, update) in [
        (Edge::Trailing, UpdateScheme::Single),
        (Edge::Leading, UpdateScheme::Single),
        (Edge::Double, UpdateScheme::Single),
        (Edge::Double, UpdateScheme::Double),
    ] {
        let timer = TimerSpec::new(98.304e6, 384e3)
            .with_edge(edge)
            .with_update(update);
        let t = Timer::try_new(timer).unwrap();
        let spec = ModulatorSpec::new(
            timer,
            BridgeSpec::ideal(BridgeKind::Half),
            t.update_rate_hz(),
        );
        for &x in &[-0.99f32, -0.5, -0.123_456, 0.0, 0.3, 0.777, 0.999] {
            let mut m = Modulator::<1>::try_new(spec).unwrap();
            let n = 64;
            let mut words = vec![0u32; n];
            m.process(&vec![x; n], &mut words);
            let mode = m.bridge().leg_mode(0);
            let wave = channel_wave(&t, words.iter().copied(), mode);
            let duty = wave.on_time() / wave.end;
            let want = (1.0 + x as f64) / 2.0;
            let step = 1.0 / t.top() as f64;
            assert!(
                (duty - want).abs() <= 0.5 * step + 1e-12,
                "{edge:?} {update:?} x={x}: duty {duty} want {want}"
            );
            assert_eq!(
                mode,
                if edge == Edge::Leading {
                    LegMode::HighAtOrAbove
                } else {
                    LegMode::HighBelow
                }
            );
        }
    }
}

/// The worked example of the docs, by hand: 256-tick period, trailing edge,
/// x = +0.5 -> high for (1 + 0.5) / 2 * 256 = 192 ticks -> compare 192; the
/// leading edge writes 256 - 192 = 64; up/down (top 128) writes 96.
#[test]
fn worked_example_by_hand() {
    for (edge, want) in [
        (Edge::Trailing, 192u32),
        (Edge::Leading, 64),
        (Edge::Double, 96),
    ] {
        let timer = TimerSpec::new(98.304e6, 384e3).with_edge(edge);
        let spec = ModulatorSpec::new(timer, BridgeSpec::ideal(BridgeKind::Half), 384e3);
        let mut m = Modulator::<1>::try_new(spec).unwrap();
        let mut w = [0u16; 1];
        m.process(&[0x4000i16], &mut w);
        assert_eq!(w[0] as u32, want, "{edge:?}");
    }
}

/// Configuration errors name the parameter and the limit.
#[test]
fn typed_errors() {
    let base = TimerSpec::new(98.304e6, 384e3);
    let e = |s: TimerSpec| Timer::try_new(s).unwrap_err();
    assert_eq!(
        e(TimerSpec {
            clock_hz: 0.0,
            ..base
        }),
        ConfigError::ClockNotPositive { clock_hz: 0.0 }
    );
    assert!(matches!(
        e(TimerSpec {
            clock_hz: f64::NAN,
            ..base
        }),
        ConfigError::ClockNotPositive { .. }
    ));
    assert!(matches!(
        e(TimerSpec { carrier_hz: 20e6, ..base }),
        ConfigError::CarrierTooHigh { max_hz, .. } if max_hz == 98.304e6 / 8.0
    ));
    // 390 kHz at 98.304 MHz: 252.06 ticks; up/down needs even: 252 and 254.
    let err = e(TimerSpec {
        carrier_hz: 390e3,
        ..base
    });
    assert_eq!(
        err,
        ConfigError::PeriodNotWhole {
            clock_hz: 98.304e6,
            carrier_hz: 390e3,
            below: 254,
            above: 252
        }
    );
    let text = err.to_string();
    assert!(
        text.contains("390000 Hz") && text.contains("254 ticks") && text.contains("252 ticks"),
        "{text}"
    );
    assert_eq!(
        e(TimerSpec {
            compare_bits: 6,
            ..base
        }),
        ConfigError::CompareWidth { bits: 6 }
    );
    // 100 kHz at 98.304 MHz up-counting: 983.04 ticks, needs 10 bits.
    let up = TimerSpec::new(98.304e6 * 1000.0 / 983.04, 100e3).with_edge(Edge::Trailing);
    assert!(Timer::try_new(up).is_ok());
    assert_eq!(
        Timer::try_new(TimerSpec {
            compare_bits: 9,
            ..up
        }),
        Err(ConfigError::CompareTooNarrow {
            bits: 9,
            needs: 1000
        })
    );
    assert_eq!(
        e(base
            .with_edge(Edge::Trailing)
            .with_update(UpdateScheme::Double)),
        ConfigError::DoubleUpdateNeedsUpDown
    );
    assert_eq!(
        e(TimerSpec {
            counting: ticktone::Counting::Up,
            ..base
        }),
        ConfigError::EdgeNeedsCounting {
            needs_up_down: true
        }
    );
    let t = Timer::try_new(base).unwrap();
    assert_eq!(t.ticks_from_ns(-1.0), Err(ConfigError::DeadTimeInvalid));
    // An odd compare range cannot give equal 3-level legs at silence.
    let odd = Timer::try_new(TimerSpec::new(400e3 * 254.0, 400e3)).unwrap();
    assert_eq!(
        Bridge::try_new(BridgeSpec::ideal(BridgeKind::Full3), &odd),
        Err(ConfigError::ThreeLevelOddTop { top: 127 })
    );
    let spec = ModulatorSpec::new(base, BridgeSpec::ideal(BridgeKind::Half), 47e3);
    assert!(matches!(
        Modulator::<1>::try_new(spec),
        Err(ConfigError::RatesNotLocked { .. })
    ));
}

/// Block API: only whole frames, the rest left alone; stereo interleaving.
#[test]
fn block_layout() {
    let timer = TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Trailing);
    let spec = ModulatorSpec::new(timer, BridgeSpec::ideal(BridgeKind::Full3), 384e3);
    let mut m = Modulator::<2>::try_new(spec).unwrap();
    assert_eq!(m.words_per_frame(), 4);
    let mut out = [7u16; 10];
    // Two stereo frames and a half frame in; room for two and a half out.
    let n = m.process(&[0.5f32, -0.5, 0.0, 0.25, 0.9], &mut out);
    assert_eq!(n, 2);
    // left +0.5: A 192, B 64; right -0.5: A 64, B 192; then 128/128, 160/96.
    assert_eq!(out, [192, 64, 64, 192, 128, 128, 160, 96, 7, 7]);
}

proptest! {
    /// Underrun never leaves a rail on: whatever the last frame, an empty
    /// queue reaches exact silence within the fade length, moving
    /// monotonically toward zero, and every empty call is counted.
    #[test]
    fn underrun_fades_to_silence(
        frames in prop::collection::vec(any::<[i32; 2]>(), 0..6),
        fade in 1u32..50,
        extra in 0u32..20,
    ) {
        use heapless::spsc::Queue;
        let mut q: Queue<[i32; 2], 8> = Queue::new();
        let (mut p, c) = q.split();
        let mut feed = ticktone::queue::Feeder::new(c, fade);
        for f in &frames {
            p.enqueue(*f).unwrap();
        }
        let mut last = [0i32; 2];
        for f in &frames {
            last = feed.next_frame();
            prop_assert_eq!(&last, f);
        }
        for k in 0..fade + extra {
            let now = feed.next_frame();
            for ch in 0..2 {
                prop_assert!(now[ch].unsigned_abs() <= last[ch].unsigned_abs());
                prop_assert!(now[ch] == 0 || now[ch].signum() == last[ch].signum());
            }
            if k + 1 >= fade {
                prop_assert_eq!(now, [0, 0]);
            }
            last = now;
        }
        prop_assert_eq!(feed.underruns(), fade + extra);
    }
}
