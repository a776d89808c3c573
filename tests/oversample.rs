//! The oversampler: committed tables against their design, frequency
//! response of the integer cascade, real signals measured with an FFT
//! (rustfft as the independent oracle), delay, saturation and the integer
//! arithmetic.

use rustfft::{num_complex::Complex, FftPlanner};
use ticktone::oversample::{
    stage_tables, Oversampler, MAX_RATIO, STAGE_PAIRS, THIRD_DIFF, THIRD_SUM,
};
use ticktone::oversample_design::{
    bessel_i0, cascade_gain, design_stage_q31, design_third_q31, half_band_gain_q31,
    kaiser_third_band, remez_half_band, stage_specs, third_band_gain_q31, BAND_EDGE_HZ, THIRD_BETA,
};
use ticktone::ConfigError;

const RATIOS: [u32; 6] = [2, 4, 6, 8, 12, 16];
const Q31: f64 = 2_147_483_648.0;

fn db(x: f64) -> f64 {
    20.0 * x.log10()
}

/// Every output of `o` for `input`, in order.
fn run(o: &mut Oversampler, input: &[i32]) -> Vec<i32> {
    let mut out = Vec::with_capacity(input.len() * o.ratio());
    let mut buf = [0i32; MAX_RATIO];
    for &x in input {
        o.push(x, &mut buf);
        out.extend_from_slice(&buf[..o.ratio()]);
    }
    out
}

/// One stage of a cascade, for the test models.
#[derive(Clone, Copy)]
enum Stage {
    /// Half-band by 2 with these Q1.31 pair coefficients.
    Half(&'static [i32]),
    /// The third-band stage by 3.
    Third,
}

/// The stages the firmware documents for each ratio.
fn plan(ratio: u32) -> Vec<Stage> {
    let t = stage_tables();
    match ratio {
        6 => vec![Stage::Half(t[0]), Stage::Third],
        12 => vec![Stage::Half(t[0]), Stage::Third, Stage::Half(t[2])],
        r => t[..r.trailing_zeros() as usize]
            .iter()
            .map(|&c| Stage::Half(c))
            .collect(),
    }
}

/// Branch-1 taps of the third band, rebuilt from the sum/difference tables.
fn third_branch() -> Vec<i64> {
    let p = THIRD_SUM.len();
    let mut d = vec![0i64; 2 * p];
    for i in 0..p {
        d[i] = THIRD_SUM[i] as i64 + THIRD_DIFF[i] as i64;
        d[2 * p - 1 - i] = THIRD_SUM[i] as i64 - THIRD_DIFF[i] as i64;
    }
    d
}

/// Full causal tap array of a stage (interpolation gain included) and its
/// factor.
fn taps(stage: Stage) -> (usize, Vec<f64>) {
    match stage {
        Stage::Half(c) => {
            let k = c.len();
            let mut g = vec![0.0; 4 * k - 1];
            g[2 * k - 1] = 1.0;
            for (j, &cj) in c.iter().enumerate() {
                g[2 * k - 2 - 2 * j] = cj as f64 / Q31;
                g[2 * k + 2 * j] = cj as f64 / Q31;
            }
            (2, g)
        }
        Stage::Third => {
            // Taps n = -(3P-1) ..= 3P-1: h[0] = 1, h[3k+1] = b[k],
            // h[3k+2] = b[-k-1] (symmetry), b[k] = d[k + P].
            let d = third_branch();
            let p = d.len() / 2;
            let c = 3 * p - 1;
            let mut g = vec![0.0; 2 * c + 1];
            g[c] = 1.0;
            for (i, &di) in d.iter().enumerate() {
                let n = 3 * (i as isize - p as isize) + 1;
                g[(c as isize + n) as usize] = di as f64 / Q31;
                g[(c as isize - n) as usize] = di as f64 / Q31;
            }
            (3, g)
        }
    }
}

/// Straightforward f64 model of the cascade: per stage, insert zeros after
/// every sample and convolve with the full causal tap array.
fn reference(ratio: u32, x: &[f64]) -> Vec<f64> {
    let mut s = x.to_vec();
    for stage in plan(ratio) {
        let (l, g) = taps(stage);
        let mut u = vec![0.0; l * s.len()];
        for (i, &v) in s.iter().enumerate() {
            u[l * i] = v;
        }
        s = (0..u.len())
            .map(|t| (0..g.len().min(t + 1)).map(|i| g[i] * u[t - i]).sum())
            .collect();
    }
    s
}

fn spectrum(x: &[f64]) -> Vec<f64> {
    let mut buf: Vec<Complex<f64>> = x.iter().map(|&v| Complex::new(v, 0.0)).collect();
    FftPlanner::new()
        .plan_fft_forward(buf.len())
        .process(&mut buf);
    buf.iter().map(|c| c.norm()).collect()
}

#[test]
fn committed_tables_are_the_design() {
    // The firmware's constants must be exactly the quantised Remez design.
    for (k, table) in stage_tables().iter().enumerate() {
        let design = design_stage_q31(k).expect("design converges");
        assert_eq!(&design[..], *table, "stage {}", k + 1);
        assert_eq!(table.len(), STAGE_PAIRS[k]);
    }
    let (sum, diff) = design_third_q31();
    assert_eq!(sum, THIRD_SUM);
    assert_eq!(diff, THIRD_DIFF);
}

#[test]
fn third_band_design_checks() {
    // I0 against its tabulated values (Abramowitz & Stegun table 9.8 gives
    // e^-x I0(x); I0(1) = 1.266065878, I0(5) = 27.23987182 [memory]).
    assert!((bessel_i0(0.0) - 1.0).abs() < 1e-15);
    assert!((bessel_i0(1.0) - 1.266_065_878).abs() < 1e-8);
    assert!((bessel_i0(5.0) - 27.239_871_82).abs() < 1e-6);
    // A Nyquist(3) filter: the taps at multiples of 3 are zero by
    // construction, so the three polyphase branches sum to a flat response:
    // H(f) + H(f + 1/3) + H(f + 2/3) = 1 [derived from the definition].
    for i in 0..40 {
        let f = i as f64 / 80.0;
        let s: f64 = (0..3)
            .map(|m| third_band_gain_q31(&THIRD_SUM, &THIRD_DIFF, f + m as f64 / 3.0))
            .sum();
        assert!((s - 1.0).abs() < 1e-8, "{s}");
    }
    // The window's sinc: d[P] is the tap at n = 1, sinc(1/3) w(1).
    let d = kaiser_third_band(THIRD_SUM.len(), THIRD_BETA);
    let p = THIRD_SUM.len();
    let x = std::f64::consts::PI / 3.0;
    let r = 1.0 / (3 * p) as f64;
    let w = bessel_i0(THIRD_BETA * (1.0 - r * r).sqrt()) / bessel_i0(THIRD_BETA);
    assert!((d[p] - x.sin() / x * w).abs() < 1e-15);
}

#[test]
fn designs_are_equiripple() {
    // Chebyshev alternation theorem (the basis of Parks & McClellan 1972):
    // the minimax approximation by K functions of a Haar system has an error
    // reaching its maximum with alternating sign at K + 1 points or more.
    // Checked on a grid 50x finer than the design's.
    for spec in stage_specs() {
        let d = remez_half_band(spec.pairs, spec.pass_edge);
        assert!(d.converged);
        let wp = 2.0 * std::f64::consts::PI * spec.pass_edge;
        let n = 6400 * spec.pairs;
        let err: Vec<f64> = (0..=n)
            .map(|i| {
                let w = wp * i as f64 / n as f64;
                let f: f64 = d
                    .coeffs
                    .iter()
                    .enumerate()
                    .map(|(j, c)| c * ((2 * j + 1) as f64 * w).cos())
                    .sum();
                f - 0.5
            })
            .collect();
        let max = err.iter().fold(0.0f64, |m, e| m.max(e.abs()));
        assert!(
            (max - d.ripple).abs() < 1e-3 * d.ripple,
            "{max} vs {}",
            d.ripple
        );
        let mut sign = 0.0;
        let mut count = 0;
        for &e in &err {
            if e.abs() >= 0.999 * max && e.signum() != sign {
                sign = e.signum();
                count += 1;
            }
        }
        assert!(
            count > spec.pairs,
            "{count} alternations for K = {}",
            spec.pairs
        );
    }
}

#[test]
fn first_stage_length_matches_kaiser_estimate() {
    // Kaiser's length estimate for an equiripple low-pass, N = (-20 log10
    // sqrt(dp ds) - 13) / (14.6 df) + 1 (J. F. Kaiser, in Digital Signal
    // Processing, IEEE Press 1975 [memory]; common practice: good to a few
    // per cent for long filters). Half-band: dp = ds = ripple.
    let spec = stage_specs()[0];
    let d = remez_half_band(spec.pairs, spec.pass_edge);
    // Transition width as a fraction of the rate: stop edge 1/2 - pass edge.
    let df = 0.5 - 2.0 * spec.pass_edge;
    let est = (-db(d.ripple) - 13.0) / (14.6 * df) + 1.0;
    let n = (4 * spec.pairs - 1) as f64;
    println!(
        "stage 1: {} taps, ripple {:.2} dB, Kaiser estimate {est:.1}",
        n,
        db(d.ripple)
    );
    assert!((n - est).abs() < 0.05 * est, "{n} taps vs estimate {est}");
}

/// Image bands of 0..20 kHz: `m fs +- 20 kHz`, m >= 1, below half the
/// update rate, sampled every `step` Hz.
fn image_band_points(fs: f64, ratio: u32, step: f64) -> Vec<f64> {
    let top = fs * ratio as f64 / 2.0;
    let mut v = Vec::new();
    for m in 1..=ratio / 2 {
        let centre = m as f64 * fs;
        let mut f = centre - BAND_EDGE_HZ;
        while f <= (centre + BAND_EDGE_HZ).min(top) {
            v.push(f);
            f += step;
        }
    }
    v
}

#[test]
fn cascade_response_meets_the_bars() {
    // Issue 4: passband flat within +-0.01 dB to 20 kHz; images at least
    // 100 dB down from fs - 20 kHz to half the update rate. Computed from the
    // integer coefficient tables.
    for fs in [44_100.0, 48_000.0, 88_200.0, 96_000.0, 176_400.0, 192_000.0] {
        for ratio in RATIOS {
            let mut ripple = 0.0f64;
            for i in 0..=2000 {
                let f = BAND_EDGE_HZ * i as f64 / 2000.0;
                let g = cascade_gain(ratio, f / fs).unwrap();
                ripple = ripple.max(db(g).abs());
            }
            let pts = image_band_points(fs, ratio, 5.0);
            assert!(!pts.is_empty());
            let worst = pts
                .iter()
                .map(|&f| cascade_gain(ratio, f / fs).unwrap())
                .fold(0.0f64, f64::max);
            println!(
                "fs {fs} ratio {ratio}: passband +-{ripple:.6} dB, images {:.1} dB",
                db(worst)
            );
            assert!(ripple <= 0.01, "ripple {ripple} dB");
            assert!(db(worst) <= -100.0, "images {} dB", db(worst));
        }
    }
}

#[test]
fn impulse_response_fft_agrees_and_is_centred_on_the_delay() {
    // The integer oversampler's impulse response, transformed by rustfft,
    // against the analytic response of the tables; and linear phase about
    // delay_updates(): h[D - t] == h[D + t] (to rounding).
    for ratio in RATIOS {
        let mut o = Oversampler::try_new(ratio).unwrap();
        let d = o.delay_updates() as usize;
        let n_in = (2 * d + 1) / ratio as usize + 8;
        let mut input = vec![0i32; n_in];
        input[0] = 1 << 30; // 0.5
        let y: Vec<f64> = run(&mut o, &input)
            .iter()
            .map(|&v| v as f64 / Q31 / 0.5)
            .collect();
        let peak = (0..y.len()).max_by(|&a, &b| y[a].total_cmp(&y[b])).unwrap();
        assert_eq!(peak, d, "ratio {ratio}");
        for t in 1..=d {
            assert!((y[d - t] - y[d + t]).abs() < 4e-8, "ratio {ratio} t {t}");
        }
        assert!(y[2 * d + 1..].iter().all(|v| v.abs() < 1e-8));
        let len = 1 << 16;
        let mut h = y[..2 * d + 1].to_vec();
        h.resize(len, 0.0);
        let mag = spectrum(&h);
        let mut worst = 0.0f64;
        for b in (0..len / 2).step_by(7) {
            // Frequency as a fraction of the input rate.
            let f = b as f64 * ratio as f64 / len as f64;
            let g = cascade_gain(ratio, f).unwrap();
            // mag is the gain times `ratio` (interpolation gain).
            worst = worst.max((mag[b] / ratio as f64 - g).abs());
        }
        assert!(worst < 1e-6, "ratio {ratio}: FFT vs tables {worst}");
    }
}

/// Quantise `a sin(2 pi k n / n_in)` to Q1.31.
fn sine_q31(a: f64, k: usize, n_in: usize, len: usize) -> Vec<i32> {
    (0..len)
        .map(|n| {
            let v = a * (2.0 * std::f64::consts::PI * (k * n % n_in) as f64 / n_in as f64).sin();
            (v * Q31).round().clamp(i32::MIN as f64, i32::MAX as f64) as i32
        })
        .collect()
}

#[test]
fn sines_level_images_and_integer_snr() {
    // Coherent sines (a whole number of cycles in the record) so every line
    // sits on one FFT bin: no window, no leakage. Level from the tables'
    // response; images at bins m N +- k; integer arithmetic error against
    // the f64 direct-convolution model of the same coefficients.
    let n_in = 4096;
    let amp = 10f64.powf(-1.0 / 20.0); // -1 dBFS
    for (fs, k) in [
        (48_000.0, 85),
        (48_000.0, 1706),
        (44_100.0, 92),
        (44_100.0, 1857),
    ] {
        for ratio in [6u32, 8, 12, 16] {
            let r = ratio as usize;
            let mut o = Oversampler::try_new(ratio).unwrap();
            // Past the start-up transient: the whole impulse response (2D + 1).
            let warm = 2 * o.delay_updates() as usize / r + 8;
            let x = sine_q31(amp, k, n_in, warm + n_in);
            let y = run(&mut o, &x);
            assert_eq!(o.clamped(), 0);
            let yf: Vec<f64> = y[warm * r..].iter().map(|&v| v as f64 / Q31).collect();
            let len = yf.len();
            let mag = spectrum(&yf);
            let a1 = mag[k] * 2.0 / len as f64;
            let xa = x[warm..]
                .iter()
                .map(|&v| v as f64 / Q31)
                .collect::<Vec<_>>();
            let ain = spectrum(&xa)[k] * 2.0 / n_in as f64;
            let gain = db(a1 / ain);
            let expect = db(cascade_gain(ratio, k as f64 / n_in as f64).unwrap());
            assert!((gain - expect).abs() < 1e-4, "gain {gain} vs {expect}");
            assert!(gain.abs() <= 0.01, "level {gain} dB");
            let mut img = 0.0f64;
            for m in 1..r {
                for b in [m * n_in - k, m * n_in + k] {
                    if b <= len / 2 {
                        img = img.max(mag[b]);
                    }
                }
            }
            let img_db = db(img / mag[k]);
            // In-band bins other than the tone: what the integer arithmetic
            // (and the input's quantisation to Q1.31) adds in 0..20 kHz.
            let top = (BAND_EDGE_HZ / (fs * ratio as f64) * len as f64) as usize;
            let noise: f64 = (1..=top).filter(|&b| b != k).map(|b| mag[b] * mag[b]).sum();
            let inband_db = 10.0 * (noise / (mag[k] * mag[k])).log10();
            // Error against the f64 model, over the whole band.
            let full: Vec<f64> = x.iter().map(|&v| v as f64 / Q31).collect();
            let refy = reference(ratio, &full);
            let (mut e2, mut s2) = (0.0, 0.0);
            for (i, &v) in yf.iter().enumerate() {
                let rv = refy[warm * r + i];
                e2 += (v - rv) * (v - rv);
                s2 += rv * rv;
            }
            let snr = 10.0 * (s2 / e2).log10();
            println!(
                "fs {fs} f {:.1} Hz ratio {ratio}: level {gain:+.5} dB, images {img_db:.1} dB, \
                 in-band residue {inband_db:.1} dB, integer SNR {snr:.1} dB",
                k as f64 * fs / n_in as f64
            );
            assert!(img_db <= -100.0);
            assert!(inband_db < -130.0);
            assert!(snr > 130.0);
        }
    }
}

/// The documented integer arithmetic, written out directly: Q2.30 delay
/// lines, pre-added pairs, exact i64 sums, high word (floor), saturation
/// to [-2^29, 2^29 - 1], scaling by 2 (next stage) or 4 (output). The third
/// band is written here in its plain form, each branch its own dot product
/// over the rebuilt taps, which must give the same sums as the firmware's
/// sum/difference form.
fn integer_model(ratio: u32, x: &[i32]) -> (Vec<i32>, u32) {
    let stages = plan(ratio);
    let mut s: Vec<i32> = x.iter().map(|&v| v >> 1).collect();
    let mut sat = vec![false; x.len()];
    let mut per_push = 1usize; // stage inputs per input sample
    for (n, &stage) in stages.iter().enumerate() {
        let last = n + 1 == stages.len();
        let sh = if last { 2 } else { 1 };
        let clamp = |hi: i32, flag: &mut bool| {
            let cl = hi.clamp(-(1 << 29), (1 << 29) - 1);
            *flag |= cl != hi;
            cl << sh
        };
        let at = |i: isize| if i < 0 { 0 } else { s[i as usize] };
        let mut next = Vec::new();
        for i in 0..s.len() as isize {
            let src = i as usize / per_push;
            match stage {
                Stage::Half(c) => {
                    let k = c.len();
                    let w = |j: usize| at(i - 2 * k as isize + 1 + j as isize);
                    let mut acc: i64 = 0;
                    for j in 0..k {
                        acc += (w(k - 1 - j) as i64 + w(k + j) as i64) * c[j] as i64;
                    }
                    next.push(clamp((acc >> 32) as i32, &mut sat[src]));
                    next.push(w(k) << (sh - 1));
                }
                Stage::Third => {
                    let d = third_branch();
                    let p = d.len() / 2;
                    let w = |j: usize| at(i - 2 * p as isize + 1 + j as isize) as i64;
                    // Branch 1 takes w reversed, branch 2 w in order.
                    let y1: i64 = (0..2 * p).map(|j| d[j] * w(2 * p - 1 - j)).sum();
                    let y2: i64 = (0..2 * p).map(|j| d[j] * w(j)).sum();
                    next.push(clamp((y1 >> 32) as i32, &mut sat[src]));
                    next.push(clamp((y2 >> 32) as i32, &mut sat[src]));
                    next.push((w(p) as i32) << (sh - 1));
                }
            }
        }
        per_push *= next.len() / s.len();
        s = next;
    }
    (s, sat.iter().filter(|&&b| b).count() as u32)
}

#[test]
fn bit_exact_against_the_written_out_arithmetic() {
    // Random full-range input plus full-scale steps (which overshoot and
    // saturate): every output word and the saturation count must match.
    let mut seed = 0x1234_5678_9abc_def0u64;
    let mut x: Vec<i32> = (0..600)
        .map(|_| {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 32) as i32
        })
        .collect();
    x.extend((0..200).map(|n| if (n / 5) % 2 == 0 { i32::MAX } else { i32::MIN }));
    for ratio in RATIOS {
        let mut o = Oversampler::try_new(ratio).unwrap();
        let y = run(&mut o, &x);
        let (m, sat) = integer_model(ratio, &x);
        assert_eq!(y, m, "ratio {ratio}");
        assert_eq!(o.clamped(), sat, "ratio {ratio}");
        assert!(sat > 0, "full-scale steps must overshoot and be counted");
    }
}

#[test]
fn full_scale_overshoot_saturates_without_wrapping() {
    // A full-scale square wave: the band-limited interpolation overshoots
    // (Gibbs); the output must stay at the rails with the right sign, never
    // wrap around, and the clamps are counted.
    for ratio in RATIOS {
        let mut o = Oversampler::try_new(ratio).unwrap();
        let x: Vec<i32> = (0..400)
            .map(|n| {
                if (n / 10) % 2 == 0 {
                    i32::MAX
                } else {
                    i32::MIN
                }
            })
            .collect();
        let y = run(&mut o, &x);
        let xf: Vec<f64> = x.iter().map(|&v| v as f64 / Q31).collect();
        let refy = reference(ratio, &xf);
        for (t, (&v, &rv)) in y.iter().zip(&refy).enumerate() {
            if rv.abs() > 0.5 {
                assert_eq!(v.signum() as f64, rv.signum(), "ratio {ratio} t {t}");
                assert!(
                    (v as f64 / Q31).abs() >= rv.abs().min(1.0) - 0.1,
                    "ratio {ratio} t {t}"
                );
            }
        }
        assert!(o.clamped() > 0);
        o.clear_clamped();
        assert_eq!(o.clamped(), 0);
    }
}

#[test]
fn ratios_and_errors() {
    for r in [1u32, 2, 4, 6, 8, 12, 16] {
        let o = Oversampler::try_new(r).unwrap();
        assert_eq!(o.ratio(), r as usize);
    }
    for r in [0u32, 3, 5, 7, 9, 10, 14, 17, 32] {
        let e = Oversampler::try_new(r).unwrap_err();
        assert_eq!(e, ConfigError::OversamplingRatio { ratio: r });
        assert!(e.to_string().contains("1, 2, 4, 6, 8, 12 or 16"), "{e}");
    }
    // Ratio 1 passes the input through, with no delay.
    let mut o = Oversampler::try_new(1).unwrap();
    assert_eq!(o.delay_updates(), 0);
    assert_eq!(run(&mut o, &[5, -7, i32::MIN]), vec![5, -7, i32::MIN]);
}

#[test]
fn firmware_file_has_no_floating_point() {
    // Bit-exactness between host and target: the per-sample path is
    // integer only. The firmware file has no f32/f64 at all (comments
    // excluded).
    let src = include_str!("../src/oversample.rs");
    for (i, line) in src.lines().enumerate() {
        let code = line.split("//").next().unwrap_or("");
        assert!(
            !code.contains("f32") && !code.contains("f64") && !code.contains(" as f"),
            "line {}: {line}",
            i + 1
        );
    }
}

#[test]
fn single_stage_response_helper_is_half_band() {
    // H(f) + H(1/2 - f) = 1 for any half-band filter (the centre tap is 1/2
    // and all other even taps are zero) [derived from the definition].
    for c in stage_tables() {
        for i in 0..50 {
            let f = 0.5 * i as f64 / 50.0;
            let s = half_band_gain_q31(c, f) + half_band_gain_q31(c, 0.5 - f);
            assert!((s - 1.0).abs() < 1e-12);
        }
    }
}

#[test]
fn block_form_matches_push() {
    // `process` is `push` over a block; a short `out` limits the count.
    let x: Vec<i32> = (0..100)
        .map(|n| (n * 40_000_000i64 % i32::MAX as i64) as i32)
        .collect();
    for ratio in RATIOS {
        let mut a = Oversampler::try_new(ratio).unwrap();
        let mut b = Oversampler::try_new(ratio).unwrap();
        let mut out = vec![0i32; 90 * ratio as usize + 1];
        assert_eq!(b.process(&x, &mut out), 90);
        assert_eq!(&out[..90 * ratio as usize], &run(&mut a, &x[..90])[..]);
    }
}
