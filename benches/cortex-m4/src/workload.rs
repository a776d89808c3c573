//! The fixed workload shared by the emulated Cortex-M4 firmware and the host
//! test `tests/target_equivalence.rs` (which includes this file with
//! `#[path]`): the named chain configurations, a deterministic integer input
//! generator, and the checksum of every compare word the chain writes.
//!
//! Everything here is integer arithmetic (no libm, no float in the input or
//! the checksum), so host and target must agree to the bit; the only floats
//! are the configuration-time `f64` fields of the specs, which the crate
//! turns into integers once.

use ticktone::bridge::{BridgeKind, BridgeSpec, DeadTimeForm};
use ticktone::edge::Sampling;
use ticktone::requant::ShaperSpec;
use ticktone::timer::{Edge, TimerSpec, UpdateScheme};
use ticktone::{ConfigError, Counters, Modulator, ModulatorSpec};

/// Audio channels of every configuration (stereo).
pub const CH: usize = 2;

/// Input frames a DMA half buffer holds: the block size of every run.
pub const BLOCK: usize = 32;

/// Largest number of compare words one block can produce:
/// frames x 16 updates x channels x 4 words.
pub const MAX_BLOCK_WORDS: usize = BLOCK * 16 * CH * 4;

/// Timer clock of the reference scenario, Hz (DESIGN.md).
pub const CLOCK_HZ: f64 = 98.304e6;
/// Carrier of the reference scenario, Hz: 256 ticks a period.
pub const CARRIER_HZ: f64 = 384e3;

/// A named chain configuration.
#[derive(Clone, Copy)]
pub struct Config {
    /// The name printed in `instr_per_update` and `checksum` lines.
    pub name: &'static str,
    /// Input rate, Hz, as an integer (the generator's phase increments are
    /// integer divisions by it).
    pub input_hz: u32,
    /// The spec.
    pub spec: fn() -> ModulatorSpec,
}

impl Config {
    /// The modulator of this configuration.
    pub fn modulator(&self) -> Result<Modulator<CH>, ConfigError> {
        Modulator::try_new((self.spec)())
    }
}

/// Up/down counting, two updates a period: 768 kHz updates.
pub fn timer_updown_double() -> TimerSpec {
    TimerSpec::new(CLOCK_HZ, CARRIER_HZ).with_update(UpdateScheme::Double)
}

/// Up/down counting, one update a period (at the counter's top): 384 kHz
/// updates.
pub fn timer_updown_single() -> TimerSpec {
    TimerSpec::new(CLOCK_HZ, CARRIER_HZ)
}

/// 3-level full bridge, dead time 20 ns (2 ticks at 98.304 MHz, rounded up
/// from 1.97) made by the timer's dead-time generator, 40 ns minimum pulse.
pub fn bridge_full3() -> BridgeSpec {
    BridgeSpec {
        kind: BridgeKind::Full3,
        form: DeadTimeForm::Generator,
        dead_time_ticks: 2,
        min_pulse_ticks: 4,
        min_low_ticks: 0,
    }
}

/// As [`bridge_full3`] with the dead time placed in two compare words a leg.
pub fn bridge_full3_separate() -> BridgeSpec {
    BridgeSpec {
        form: DeadTimeForm::SeparateCompares,
        ..bridge_full3()
    }
}

/// The configurations, each timed and checksummed. Names: sampling, shaper
/// (`round` or `ns<order>`), bridge; `-r1` means input at the update rate
/// (no oversampler), else 48 kHz input and 16x oversampling.
pub const CONFIGS: &[Config] = &[
    // The two configurations of the issue: 48 kHz in, 16x, 3-level bridge
    // with dead time; shapers as `ShaperSpec::new` gives them (band zeros,
    // poles for sum|h| <= 8, no dither).
    Config {
        name: "chain-natural-ns5-full3",
        input_hz: 48_000,
        spec: || ModulatorSpec {
            sampling: Sampling::NATURAL,
            shaper: ShaperSpec::new(5),
            ..ModulatorSpec::new(timer_updown_double(), bridge_full3(), 48e3)
        },
    },
    Config {
        name: "chain-uniform-ns3-full3",
        input_hz: 48_000,
        spec: || ModulatorSpec {
            shaper: ShaperSpec::new(3),
            ..ModulatorSpec::new(timer_updown_double(), bridge_full3(), 48e3)
        },
    },
    // The same two with one update a period (384 kHz updates, 8x): half
    // the updates a second, for parts that cannot afford two.
    Config {
        name: "chain-natural-ns5-full3-single",
        input_hz: 48_000,
        spec: || ModulatorSpec {
            sampling: Sampling::NATURAL,
            shaper: ShaperSpec::new(5),
            ..ModulatorSpec::new(timer_updown_single(), bridge_full3(), 48e3)
        },
    },
    Config {
        name: "chain-uniform-ns3-full3-single",
        input_hz: 48_000,
        spec: || ModulatorSpec {
            shaper: ShaperSpec::new(3),
            ..ModulatorSpec::new(timer_updown_single(), bridge_full3(), 48e3)
        },
    },
    Config {
        name: "chain-uniform-round-full3",
        input_hz: 48_000,
        spec: || ModulatorSpec::new(timer_updown_double(), bridge_full3(), 48e3),
    },
    Config {
        name: "chain-natural-round-full3",
        input_hz: 48_000,
        spec: || ModulatorSpec {
            sampling: Sampling::NATURAL,
            ..ModulatorSpec::new(timer_updown_double(), bridge_full3(), 48e3)
        },
    },
    Config {
        name: "chain-uniform-round-full3-r1",
        input_hz: 768_000,
        spec: || ModulatorSpec::new(timer_updown_double(), bridge_full3(), 768e3),
    },
    Config {
        name: "chain-natural-round-full3-r1",
        input_hz: 768_000,
        spec: || ModulatorSpec {
            sampling: Sampling::NATURAL,
            ..ModulatorSpec::new(timer_updown_double(), bridge_full3(), 768e3)
        },
    },
    Config {
        name: "chain-uniform-round-full3sep-r1",
        input_hz: 768_000,
        spec: || ModulatorSpec::new(timer_updown_double(), bridge_full3_separate(), 768e3),
    },
    Config {
        name: "chain-uniform-round-half-trailing-r1",
        input_hz: 384_000,
        spec: || {
            let timer = TimerSpec::new(CLOCK_HZ, CARRIER_HZ).with_edge(Edge::Trailing);
            let bridge = BridgeSpec {
                dead_time_ticks: 2,
                min_pulse_ticks: 4,
                min_low_ticks: 8,
                ..BridgeSpec::ideal(BridgeKind::Half)
            };
            ModulatorSpec::new(timer, bridge, 384e3)
        },
    },
];

/// Input frames of a checksum run.
pub const CHECK_FRAMES: usize = 2048;

/// xorshift32 (G. Marsaglia, "Xorshift RNGs", J. Stat. Softw. 8(14), 2003).
#[derive(Clone)]
struct XorShift32(u32);

impl XorShift32 {
    fn next(&mut self) -> u32 {
        let mut x = self.0;
        x ^= x << 13;
        x ^= x >> 17;
        x ^= x << 5;
        self.0 = x;
        x
    }
}

/// Sine of a 32-bit phase (a full turn is 2^32) in Q1.30, from a 5th-order
/// odd polynomial on the quarter wave: sin(pi/2 t) ~ t (a - t^2 (b - c t^2))
/// with a = 1.5707963, b = 0.6459640, c = 0.0794927 (error about 1e-4: a
/// test signal, not a reference sine). Integer only.
fn sin_q30(phase: u32) -> i32 {
    // Quadrant: fold to t in [0, 1] of a quarter wave, Q1.30.
    let quadrant = phase >> 30;
    let frac = (phase & 0x3FFF_FFFF) as i64; // Q0.30 within the quadrant
    let t = if quadrant & 1 == 0 {
        frac
    } else {
        (1 << 30) - frac
    };
    const A: i64 = 1_686_629_713; // 1.5707963 * 2^30
    const B: i64 = 693_598_680; // 0.6459640 * 2^30
    const C: i64 = 85_354_034; // 0.0794927 * 2^30
    let t2 = (t * t) >> 30;
    let inner = B - ((C * t2) >> 30);
    let poly = A - ((t2 * inner) >> 30);
    let s = ((t * poly) >> 30).min(1 << 30);
    if quadrant >= 2 {
        -s as i32
    } else {
        s as i32
    }
}

/// A tone: phase increment and amplitude in Q1.30.
#[derive(Clone)]
struct Tone {
    phase: u32,
    step: u32,
    amp: i64,
}

impl Tone {
    fn new(hz: u64, fs: u32, amp_q30: i64) -> Self {
        Self {
            phase: 0,
            step: ((hz << 32) / fs as u64) as u32,
            amp: amp_q30,
        }
    }

    fn next(&mut self) -> i64 {
        let s = (sin_q30(self.phase) as i64 * self.amp) >> 30;
        self.phase = self.phase.wrapping_add(self.step);
        s
    }
}

/// The deterministic stereo test signal: left 997 Hz at -6 dBFS plus 6 kHz
/// at -12 dBFS, right 15 kHz at -10.5 dBFS plus 100 Hz at -6 dBFS, both with
/// uniform noise near -66 dBFS; in the last quarter the gain is 2 so the
/// sum overloads and the clamps work too. Q1.31 samples, interleaved,
/// saturated at full scale.
pub struct Signal {
    tones: [Tone; 4],
    noise: XorShift32,
    n: usize,
    loud_from: usize,
}

impl Signal {
    /// A generator at `fs` Hz for `frames` frames (the last quarter loud).
    pub fn new(fs: u32, frames: usize) -> Self {
        const Q30: i64 = 1 << 30;
        Self {
            tones: [
                Tone::new(997, fs, Q30 / 2),
                Tone::new(6000, fs, Q30 / 4),
                Tone::new(15000, fs, Q30 * 3 / 10),
                Tone::new(100, fs, Q30 / 2),
            ],
            noise: XorShift32(0x1234_5678),
            n: 0,
            loud_from: frames - frames / 4,
        }
    }

    /// The next stereo frame, Q1.31.
    pub fn frame(&mut self) -> [i32; CH] {
        let l = self.tones[0].next() + self.tones[1].next();
        let r = self.tones[2].next() + self.tones[3].next();
        // Noise: signed 32-bit value >> 12, about 2^-11 of full scale.
        let nl = (self.noise.next() as i32 >> 12) as i64;
        let nr = (self.noise.next() as i32 >> 12) as i64;
        let gain = if self.n >= self.loud_from { 8 } else { 4 }; // x2 or x1
        self.n += 1;
        // Q1.30 -> Q1.31 with the gain in quarters: << 1, * gain / 4.
        let to_q31 = |v: i64| ((v * 2 * gain) >> 2).clamp(i32::MIN as i64, i32::MAX as i64) as i32;
        [to_q31(l + nl), to_q31(r + nr)]
    }

    /// Fill `out` with interleaved frames.
    pub fn fill(&mut self, out: &mut [i32]) {
        for f in out.chunks_exact_mut(CH) {
            f.copy_from_slice(&self.frame());
        }
    }
}

/// FNV-1a, 64 bit (offset basis 0xcbf29ce484222325, prime 0x100000001b3,
/// from the FNV reference by Fowler, Noll and Vo) over little-endian bytes.
#[derive(Clone, Copy)]
pub struct Checksum(u64);

impl Default for Checksum {
    fn default() -> Self {
        Self(0xcbf2_9ce4_8422_2325)
    }
}

impl Checksum {
    /// Hash a 32-bit word as 4 little-endian bytes.
    pub fn word(&mut self, w: u32) {
        for b in w.to_le_bytes() {
            self.0 ^= b as u64;
            self.0 = self.0.wrapping_mul(0x0000_0100_0000_01b3);
        }
    }

    /// The hash so far.
    pub fn value(&self) -> u64 {
        self.0
    }
}

/// What a checksum run produced.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct RunResult {
    /// FNV-1a of every compare word (as u32), then the word count and the
    /// three clamp counters.
    pub checksum: u64,
    /// Compare words written.
    pub words: u32,
    /// Clamp counters at the end.
    pub counters: Counters,
}

/// Run [`CHECK_FRAMES`] frames of [`Signal`] through `config` in blocks of
/// [`BLOCK`] frames into 16-bit compare words, and checksum them.
pub fn run_checksum(config: &Config) -> Result<RunResult, ConfigError> {
    let mut m = config.modulator()?;
    let mut sig = Signal::new(config.input_hz, CHECK_FRAMES);
    let mut input = [0i32; BLOCK * CH];
    let mut out = [0u16; MAX_BLOCK_WORDS];
    let per_block = BLOCK * m.words_per_frame();
    let mut sum = Checksum::default();
    let mut words = 0u32;
    for _ in 0..CHECK_FRAMES / BLOCK {
        sig.fill(&mut input);
        let frames = m.process(&input, &mut out[..per_block]);
        debug_assert_eq!(frames, BLOCK);
        for &w in &out[..per_block] {
            sum.word(w as u32);
        }
        words += per_block as u32;
    }
    let counters = m.counters();
    sum.word(words);
    sum.word(counters.input_clamped);
    sum.word(counters.low_clamped);
    sum.word(counters.high_clamped);
    Ok(RunResult {
        checksum: sum.value(),
        words,
        counters,
    })
}
