//! Host benchmarks: each stage and the whole chain at DMA half-buffer block
//! sizes (32 and 128 stereo input frames), and a plain f64 reference model
//! of the same chain (`benches/reference/model.rs`) in the same run.
//!
//! ```sh
//! cargo bench --bench chain              # all
//! cargo bench --bench chain -- chain     # the chain and the f64 model only
//! ```
//!
//! Throughput is in channel-updates (compare words of one audio channel for
//! one update slot). After the criterion groups, a summary prints the f64
//! model's time over the integer chain's for each configuration and block
//! size, from criterion's estimates of this run.

use std::hint::black_box;
use std::time::Duration;

use criterion::{BenchmarkId, Criterion, Throughput};

use ticktone::bridge::{Bridge, BridgeKind, DeadTimeForm};
use ticktone::edge::{EdgeSolver, Sampling};
use ticktone::ntf::COEF_FRAC_BITS;
use ticktone::requant::{Requantiser, ShaperSpec};
use ticktone::timer::{Timer, UpdateScheme};
use ticktone::Modulator;

#[allow(dead_code)]
#[path = "cortex-m4/src/workload.rs"]
mod workload;

#[allow(dead_code)]
#[path = "reference/model.rs"]
mod model;

use model::{RefBridge, RefChain, RefSampling, RefSpec};
use workload::{Config, Signal, CH, CONFIGS};

/// Input frames a block: DMA half buffers of 32 and 128 stereo frames.
const BLOCKS: [usize; 2] = [32, 128];

/// The chain configurations benchmarked against the f64 model.
const BENCHED: &[&str] = &[
    "chain-natural-ns5-full3",
    "chain-uniform-ns3-full3",
    "chain-uniform-round-full3",
    "chain-uniform-round-full3-r1",
];

fn config(name: &str) -> &'static Config {
    CONFIGS
        .iter()
        .find(|c| c.name == name)
        .expect("known config")
}

/// The f64 model of the same chain as `m`.
fn reference_of(config: &Config, m: &Modulator<CH>) -> RefSpec {
    let spec = (config.spec)();
    let timer = m.timer();
    let bridge = m.bridge();
    let (low, high) = bridge.high_count_range();
    let b = bridge.spec();
    let d = b.dead_time_ticks as f64;
    let sampling = match spec.sampling {
        Sampling::Uniform => RefSampling::Uniform,
        Sampling::Natural { order, iterations } => {
            assert_eq!(order, 3, "the f64 model interpolates with a cubic");
            RefSampling::Natural {
                iterations: iterations as u32,
            }
        }
    };
    let q = Requantiser::try_new(timer, low, high, spec.shaper).expect("config builds");
    let ntf = q.ntf();
    let taps = ntf.taps();
    let coef = |c: &[i32]| -> Vec<f64> {
        c[..taps]
            .iter()
            .map(|&c| c as f64 / (1u64 << COEF_FRAC_BITS) as f64)
            .collect()
    };
    let (in_low, in_high) = q.input_range_q16();
    let q16 = |v: i32| v as f64 / 65536.0;
    let stages = m.updates_per_frame().trailing_zeros() as usize;
    let halfbands = ticktone::oversample::stage_tables()[..stages]
        .iter()
        .map(|t| t.iter().map(|&c| c as f64 / 2f64.powi(31)).collect())
        .collect();
    RefSpec {
        top: timer.top() as f64,
        halfbands,
        sampling,
        alternate: timer.update() == UpdateScheme::Double,
        feedback: coef(ntf.feedback_coefs()),
        poles: coef(ntf.pole_coefs()),
        in_low: q16(in_low),
        in_high: q16(in_high),
        low: low as f64,
        high: high as f64,
        bridge: match (b.kind, b.form) {
            (BridgeKind::Half, _) => RefBridge::Half,
            (_, DeadTimeForm::Generator) => RefBridge::Full3,
            (_, DeadTimeForm::SeparateCompares) => RefBridge::Full3Separate {
                below: (d / 2.0).floor(),
                above: d - (d / 2.0).floor(),
            },
        },
    }
}

fn input_block(config: &Config, frames: usize) -> Vec<i32> {
    let mut v = vec![0i32; frames * CH];
    Signal::new(config.input_hz, usize::MAX).fill(&mut v);
    v
}

/// The model computes the same chain: with uniform sampling and plain
/// rounding exactly the same words; with natural sampling the same to the
/// rounding of the crossing (within one tick, mostly equal); with a noise
/// shaper the words differ update by update (the loop amplifies any
/// difference), but their mean over the block agrees within a tenth of a
/// tick.
fn check_model(config: &Config, m: &Modulator<CH>, r: &RefChain, input: &[i32], input_f: &[f64]) {
    let (mut m, mut r) = (m.clone(), r.clone());
    let mut out = vec![0u16; input.len() / CH * m.words_per_frame()];
    let mut out_f = vec![0u32; out.len()];
    m.process(input, &mut out);
    r.process(input_f, &mut out_f);
    let diffs: Vec<i64> = out
        .iter()
        .zip(&out_f)
        .map(|(&a, &b)| a as i64 - b as i64)
        .collect();
    let same = diffs.iter().filter(|&&d| d == 0).count();
    let worst = diffs.iter().map(|d| d.abs()).max().unwrap_or(0);
    let spec = (config.spec)();
    if spec.shaper != ShaperSpec::ROUND {
        let mean = |w: &mut dyn Iterator<Item = f64>| {
            let (s, n) = w.fold((0.0, 0.0), |(s, n), x| (s + x, n + 1.0));
            s / n
        };
        let a = mean(&mut out.iter().map(|&w| w as f64));
        let b = mean(&mut out_f.iter().map(|&w| w as f64));
        assert!(
            (a - b).abs() < 0.1,
            "{}: mean word {a} vs f64 model {b}",
            config.name
        );
    } else if spec.sampling == Sampling::Uniform {
        assert_eq!(same, out.len(), "{}: f64 model differs", config.name);
    } else {
        assert!(
            worst <= 1 && same * 10 >= out.len() * 9,
            "{}: f64 model differs: {same} of {} words equal, worst {worst} ticks",
            config.name,
            out.len()
        );
    }
}

fn bench_chain(c: &mut Criterion) {
    for &frames in &BLOCKS {
        let mut g = c.benchmark_group(format!("chain-{frames}"));
        for name in BENCHED {
            let config = config(name);
            let mut m = config.modulator().expect("config builds");
            let spec = reference_of(config, &m);
            let mut r = RefChain::new(spec, CH);
            let input = input_block(config, frames);
            let input_f: Vec<f64> = input.iter().map(|&x| x as f64 / 2f64.powi(31)).collect();
            let mut out = vec![0u16; frames * m.words_per_frame()];
            let mut out_f = vec![0u32; out.len()];
            check_model(config, &m, &r, &input, &input_f);
            let updates = (frames * m.updates_per_frame() * CH) as u64;
            g.throughput(Throughput::Elements(updates));
            g.bench_function(BenchmarkId::new("int", name), |b| {
                b.iter(|| m.process(black_box(&input), black_box(&mut out)))
            });
            g.bench_function(BenchmarkId::new("f64", name), |b| {
                b.iter(|| r.process(black_box(&input_f), black_box(&mut out_f)))
            });
        }
        g.finish();
    }
}

fn bench_stages(c: &mut Criterion) {
    let timer = Timer::try_new(workload::timer_updown_double()).unwrap();
    let bridge = Bridge::try_new(workload::bridge_full3(), &timer).unwrap();
    let (low, high) = bridge.high_count_range();
    for &frames in &BLOCKS {
        let mut g = c.benchmark_group(format!("stage-{frames}"));
        // Stage inputs at the update rate: one block's channel-updates at
        // 16x oversampling.
        let n = frames * 16 * CH;
        let mut xs = vec![0i32; n];
        let mut sig = Signal::new(768_000, usize::MAX);
        for x in xs.iter_mut() {
            *x = sig.frame()[0];
        }
        g.throughput(Throughput::Elements(n as u64));

        let mut edge = EdgeSolver::try_new(&timer, Sampling::Uniform).unwrap();
        let hs: Vec<i32> = xs.iter().map(|&x| edge.next(x)).collect();
        g.bench_function("edge-uniform", |b| {
            b.iter(|| {
                let mut acc = 0i32;
                for &x in black_box(&xs) {
                    acc ^= edge.next(x);
                }
                acc
            })
        });

        let mut q = Requantiser::try_new(&timer, low, high, ShaperSpec::ROUND).unwrap();
        let cs: Vec<u32> = hs.iter().map(|&h| q.quantise(h)).collect();
        g.bench_function("requant-round", |b| {
            b.iter(|| {
                let mut acc = 0u32;
                for &h in black_box(&hs) {
                    acc ^= q.quantise(h);
                }
                acc
            })
        });

        let mut words = vec![0u16; n * 2];
        g.bench_function("bridge-full3", |b| {
            b.iter(|| {
                for (&c, w) in black_box(&cs).iter().zip(words.chunks_exact_mut(2)) {
                    let v = bridge.words(c);
                    w[0] = v[0] as u16;
                    w[1] = v[1] as u16;
                }
                black_box(&mut words);
            })
        });
        g.finish();
    }
}

/// Median time of one criterion benchmark of this run, in ns.
fn median_ns(group: &str, function: &str, param: &str) -> Option<f64> {
    let dir = std::env::var_os("CARGO_TARGET_DIR")
        .map(std::path::PathBuf::from)
        .unwrap_or_else(|| "target".into());
    let path = dir
        .join("criterion")
        .join(group)
        .join(function)
        .join(param)
        .join("new/estimates.json");
    let text = std::fs::read_to_string(path).ok()?;
    let v: serde_json::Value = serde_json::from_str(&text).ok()?;
    v["median"]["point_estimate"].as_f64()
}

fn summary() {
    println!("\nf64 model time / integer chain time (criterion medians of this run):");
    for &frames in &BLOCKS {
        let group = format!("chain-{frames}");
        for name in BENCHED {
            if let (Some(i), Some(f)) = (
                median_ns(&group, "int", name),
                median_ns(&group, "f64", name),
            ) {
                println!("ratio {name} {frames} frames: {:.1}x", f / i);
            }
        }
    }
}

fn main() {
    let mut c = Criterion::default()
        .sample_size(30)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(2))
        .configure_from_args();
    bench_chain(&mut c);
    bench_stages(&mut c);
    c.final_summary();
    summary();
}
