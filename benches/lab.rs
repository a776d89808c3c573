//! Speed of the measurement lab: a 1 s record at a 384 kHz carrier
//! (98.304 MHz clock, up/down, two updates a period, 3-level full bridge,
//! about 1.5 million output edges) measured in the audio band.
//!
//! `analyse`: bridge output -> B-spline projection -> window -> FFT ->
//! metrics. `rebuild_and_analyse`: compare words -> switch waveforms ->
//! bridge output -> the same. Run: `cargo bench --bench lab`.
//!
//! Measured on the 2-core development machine while other builds ran
//! (load average about 4): `analyse` 140 ms (127 to 158 ms),
//! `rebuild_and_analyse` 408 ms (384 to 438 ms) for the 1 s record.

// `criterion_group!` defines an undocumented function.
#![allow(missing_docs)]

use criterion::{criterion_group, criterion_main, Criterion};
use ticktone::lab::exact::ExactSampling;
use ticktone::lab::metrics::analyse;
use ticktone::lab::run::{band_spectrum, render, LabSpec};
use ticktone::lab::wave::{bridge_output, DeadNode};
use ticktone::rebuild::leg_switches;
use ticktone::{Bridge, Modulator, ModulatorSpec, Timer};

fn spec() -> LabSpec {
    // Input at the update rate (768 kHz): the oversampler is not needed
    // for the lab's speed.
    LabSpec {
        input_rate_hz: 768e3,
        sampling: ExactSampling::Uniform,
        record_s: 1.0,
        ..LabSpec::reference()
    }
}

fn bench(c: &mut Criterion) {
    let s = spec();
    let r = render(&s).expect("render");
    eprintln!(
        "record: {} periods, {} output edges",
        r.plan.periods,
        r.output.steps.len()
    );
    let mut g = c.benchmark_group("lab_1s_384kHz");
    g.sample_size(10);
    g.bench_function("analyse", |b| {
        b.iter(|| {
            let sp = band_spectrum(&r, s.bandwidth_hz);
            analyse(&sp, r.plan.tone_hz, 20.0, s.bandwidth_hz)
        })
    });
    // Words as the firmware writes them, made once.
    let timer = Timer::try_new(s.timer).unwrap();
    let bridge = Bridge::try_new(s.bridge, &timer).unwrap();
    let mut m =
        Modulator::<1>::try_new(ModulatorSpec::new(s.timer, s.bridge, s.input_rate_hz)).unwrap();
    let n = r.plan.input_samples as usize;
    let input = ticktone::lab::tone::q31_samples(&r.plan, 10f64.powf(-1.0 / 20.0), 0, n);
    let mut words = vec![0u32; n * m.words_per_frame()];
    m.process(&input, &mut words);
    g.bench_function("rebuild_and_analyse", |b| {
        b.iter(|| {
            let legs: Vec<_> = (0..2)
                .map(|leg| leg_switches(&timer, &bridge, &words, 1, 0, leg))
                .collect();
            let mut rr = r.clone();
            rr.output = bridge_output(s.bridge.kind, &legs, DeadNode::Midpoint);
            let sp = band_spectrum(&rr, s.bandwidth_hz);
            analyse(&sp, rr.plan.tone_hz, 20.0, s.bandwidth_hz)
        })
    });
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
