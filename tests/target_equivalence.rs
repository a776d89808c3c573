//! Bit-exact host/target equivalence.
//!
//! The emulated Cortex-M4 firmware in `benches/cortex-m4` and this host test
//! run the same workload (`benches/cortex-m4/src/workload.rs`, included
//! here): the same configurations, the same integer input generator, the
//! same checksum of every compare word. Both are compared against the
//! committed golden file `benches/cortex-m4/checksums.txt`:
//!
//! - this test: host == golden (every `cargo test`);
//! - `benches/cortex-m4/run-check.sh` (CI): target == golden.
//!
//! So host == target, and any drift of either fails. When a change of the
//! output is intended, rewrite the golden file with
//! `benches/cortex-m4/run-check.sh --bless` (emulator) or
//! `TICKTONE_BLESS=1 cargo test --test target_equivalence -- --test-threads=1`
//! (host; CI then still checks the target against it).
//!
//! A second test recomputes the plain-rounding configurations from the
//! conventions in `src/timer.rs` and `src/bridge.rs` with an independent
//! f64 model, so the golden values of those are checked against a source
//! and not only against themselves.

#[allow(dead_code)]
#[path = "../benches/cortex-m4/src/workload.rs"]
mod workload;

use std::collections::BTreeMap;

use workload::{Checksum, Signal, CH, CHECK_FRAMES, CONFIGS};

const GOLDEN: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/benches/cortex-m4/checksums.txt"
);

/// `checksum <name> <hex>` lines of a text, by name.
fn parse(text: &str) -> BTreeMap<String, String> {
    text.lines()
        .filter_map(|l| {
            let mut it = l.split_whitespace();
            match (it.next(), it.next(), it.next()) {
                (Some("checksum"), Some(name), Some(hex)) => Some((name.into(), hex.into())),
                _ => None,
            }
        })
        .collect()
}

fn host_lines() -> String {
    let mut s = String::new();
    for c in CONFIGS {
        let r = workload::run_checksum(c)
            .unwrap_or_else(|e| panic!("configuration {} does not build: {e}", c.name));
        s += &format!("checksum {} {:016x}\n", c.name, r.checksum);
    }
    s
}

#[test]
fn host_checksums_equal_golden_file() {
    let host = host_lines();
    if std::env::var_os("TICKTONE_BLESS").is_some() {
        std::fs::write(GOLDEN, &host).expect("write golden file");
    }
    let golden = std::fs::read_to_string(GOLDEN).expect("read golden file");
    let (host, golden) = (parse(&host), parse(&golden));
    assert!(
        golden.len() >= 3,
        "at least three configurations are checked"
    );
    assert_eq!(
        host, golden,
        "host checksums differ from {GOLDEN}; if the change is intended, re-bless \
         (see the module docs of tests/target_equivalence.rs)"
    );
}

/// One configuration of the independent model.
struct Plain {
    name: &'static str,
    /// Largest compare value: P/2 for up/down, P for up-counting.
    top: u32,
    /// Dead time, minimum pulse, minimum low-side time, in ticks.
    d: u32,
    min_pulse: u32,
    min_low: u32,
    up_down: bool,
    /// Legs: 1 (half bridge) or 2 (3-level full bridge, leg B from -x).
    legs: u32,
    /// Dead time in the compare values (two words a leg).
    separate: bool,
}

/// Checksum of a plain-rounding configuration computed from the documented
/// conventions only:
/// - `src/timer.rs`: high count c = (1 + x) / 2 * top;
/// - `src/requant.rs`: nearest tick, halves up, clamped to the bridge range,
///   a clamp counted when the rounded value would leave the range;
/// - `src/bridge.rs`: range low = ceil((d + min_pulse)/2) and
///   top - ceil((d + max(min_pulse, min_low))/2) for up/down with a dead-time
///   generator (d + min_pulse and top - (d + ...) for up-counting), made
///   symmetric for a full bridge; leg B of a 3-level bridge is top - c; with
///   separate compares each leg writes r - floor(d/2), r + ceil(d/2).
fn plain_model(p: &Plain) -> u64 {
    let low_min = p.min_pulse.max(p.min_low);
    let (mut low, mut high) = if p.up_down {
        (
            (p.d + p.min_pulse).div_ceil(2),
            p.top - (p.d + low_min).div_ceil(2),
        )
    } else {
        (p.d + p.min_pulse, p.top - (p.d + low_min))
    };
    if p.legs == 2 {
        low = low.max(p.top - high);
        high = p.top - low;
    }
    let input_hz = CONFIGS.iter().find(|c| c.name == p.name).unwrap().input_hz;
    let mut sig = Signal::new(input_hz, CHECK_FRAMES);
    let mut sum = Checksum::default();
    let (mut words, mut n_low, mut n_high) = (0u32, 0u32, 0u32);
    for _ in 0..CHECK_FRAMES {
        for x in sig.frame() {
            // Exact in f64: (x + 2^31) * top < 2^46.
            let c = (x as f64 + 2f64.powi(31)) * p.top as f64 / 2f64.powi(32);
            if c < low as f64 - 0.5 {
                n_low += 1;
            }
            if c >= high as f64 + 0.5 {
                n_high += 1;
            }
            let r = ((c + 0.5).floor() as u32).clamp(low, high);
            let legs = [r, p.top - r];
            for &leg in &legs[..p.legs as usize] {
                if p.separate {
                    sum.word(leg - p.d / 2);
                    sum.word(leg + p.d.div_ceil(2));
                    words += 2;
                } else {
                    sum.word(leg);
                    words += 1;
                }
            }
        }
    }
    sum.word(words);
    sum.word(0); // integer input: never clamped
    sum.word(n_low);
    sum.word(n_high);
    sum.value()
}

#[test]
fn plain_rounding_configurations_match_an_independent_model() {
    // Parameters as in workload.rs: 98.304 MHz, 384 kHz carrier (256 ticks),
    // dead time 2 ticks, minimum pulse 4 ticks.
    let plain = [
        Plain {
            name: "chain-uniform-round-full3-r1",
            top: 128,
            d: 2,
            min_pulse: 4,
            min_low: 0,
            up_down: true,
            legs: 2,
            separate: false,
        },
        Plain {
            name: "chain-uniform-round-full3sep-r1",
            top: 128,
            d: 2,
            min_pulse: 4,
            min_low: 0,
            up_down: true,
            legs: 2,
            separate: true,
        },
        Plain {
            name: "chain-uniform-round-half-trailing-r1",
            top: 256,
            d: 2,
            min_pulse: 4,
            min_low: 8,
            up_down: false,
            legs: 1,
            separate: false,
        },
    ];
    let golden = parse(&std::fs::read_to_string(GOLDEN).expect("read golden file"));
    for p in &plain {
        let model = format!("{:016x}", plain_model(p));
        assert_eq!(golden.get(p.name), Some(&model), "{}", p.name);
        // And the crate itself, so a failure says which side moved.
        let c = CONFIGS.iter().find(|c| c.name == p.name).unwrap();
        let host = workload::run_checksum(c).unwrap().checksum;
        assert_eq!(format!("{host:016x}"), model, "{}", p.name);
    }
    // The test signal overloads in its last quarter: the clamps were used.
    let c = CONFIGS.iter().find(|c| c.name == plain[0].name).unwrap();
    let r = workload::run_checksum(c).unwrap();
    assert!(
        r.counters.low_clamped > 0 && r.counters.high_clamped > 0,
        "{:?}",
        r.counters
    );
    assert_eq!(r.words as usize, CHECK_FRAMES * CH * 2);
}
