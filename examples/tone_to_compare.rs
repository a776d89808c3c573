//! Turn a short test tone into compare values for one timer and bridge, and
//! print what the firmware would write and what the switches would do.
//!
//! ```text
//! cargo run --example tone_to_compare
//! ```
//!
//! The scenario is invented for the demo: a 98.304 MHz timer clock, a
//! 384 kHz carrier, up/down counting with one update a period, a 3-level
//! full bridge with 20 ns dead time, a 60 ns minimum pulse and a 1 kHz tone
//! at -6 dBFS.

use ticktone::rebuild::{dead_gaps, leg_switches};
use ticktone::{
    BridgeKind, BridgeSpec, DeadTimeForm, Edge, Modulator, ModulatorSpec, Timer, TimerSpec,
    UpdateScheme,
};

fn main() -> Result<(), ticktone::ConfigError> {
    let timer_spec = TimerSpec::new(98.304e6, 384e3)
        .with_edge(Edge::Double)
        .with_update(UpdateScheme::Single);
    let timer = Timer::try_new(timer_spec)?;
    let bridge = BridgeSpec::from_ns(
        &timer,
        BridgeKind::Full3,
        DeadTimeForm::Generator,
        20.0,
        60.0,
        0.0,
    )?;
    let rate = timer.update_rate_hz(); // input at the update rate: no oversampling
    let mut m = Modulator::<1>::try_new(ModulatorSpec::new(timer_spec, bridge, rate))?;

    let (tone, level_db) = (1000.0, -6.0);
    let amp = 10f64.powf(level_db / 20.0);
    let n = (rate / tone) as usize; // one cycle of the tone
    let input: Vec<i16> = (0..n)
        .map(|k| {
            (amp * (2.0 * std::f64::consts::PI * tone * k as f64 / rate).sin() * 32767.0).round()
                as i16
        })
        .collect();
    let mut words = vec![0u16; n * m.words_per_frame()];
    m.process(&input, &mut words);

    let b = *m.bridge();
    let (low, high) = b.high_count_range();
    println!(
        "ticktone: {tone} Hz tone at {level_db} dBFS -> compare values (input at {} kHz)",
        rate / 1e3
    );
    println!(
        "timer     {} MHz clock, {} kHz carrier, {:?} counting, {:?} edge, {} update(s) a period",
        timer.clock_hz() / 1e6,
        timer.carrier_hz() / 1e3,
        timer.counting(),
        timer.edge(),
        timer.updates_per_period()
    );
    println!(
        "          period {} ticks, compare 0..={}, {} positions per edge ({:.1} bits)",
        timer.period_ticks(),
        timer.top(),
        timer.levels_per_edge(),
        (timer.levels_per_edge() as f64).log2()
    );
    println!(
        "bridge    {:?}, dead time {} ticks ({:.1} ns) by the timer's generator, high count kept in {low}..={high}",
        b.spec().kind,
        b.dead_time_ticks(),
        b.dead_time_ticks() as f64 * 1e9 / timer.clock_hz()
    );
    println!("\n update   input   leg A  leg B");
    for k in (0..n).step_by(n / 12) {
        println!(
            "{k:>7} {:>7}  {:>6} {:>6}",
            input[k],
            words[2 * k],
            words[2 * k + 1]
        );
    }
    let a: Vec<u16> = words.iter().step_by(2).copied().collect();
    println!(
        "\nleg A compare range used: {}..={} of 0..={}",
        a.iter().min().unwrap_or(&0),
        a.iter().max().unwrap_or(&0),
        timer.top()
    );
    let c = m.counters();
    println!(
        "clamped: {} input samples, {} updates raised to the minimum, {} lowered to the maximum",
        c.input_clamped, c.low_clamped, c.high_clamped
    );
    let w32: Vec<u32> = words.iter().map(|&w| w as u32).collect();
    for leg in 0..b.legs() {
        let sw = leg_switches(&timer, &b, &w32, 1, 0, leg);
        let (gap, overlap) = dead_gaps(&sw);
        println!(
            "leg {}: rebuilt switches: shortest off-to-on gap {} ticks, both on at once: {}",
            ["A", "B"][leg],
            gap.map_or("none".into(), |g| format!("{g}")),
            if overlap { "YES (fault)" } else { "never" }
        );
    }
    println!(
        "\nCaution: check dead time and minimum pulse against your gate driver and switches, \
         limit current, and follow local electrical codes for anything on mains."
    );
    Ok(())
}
