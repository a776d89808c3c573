//! Instruction counts and compare-word checksums of ticktone on an emulated
//! Cortex-M4: QEMU `mps2-an386` with `-icount shift=0`, so that every
//! instruction advances the virtual clock by exactly 1 ns.
//!
//! # How instructions are counted
//! SysTick runs from the 25 MHz system clock of the board model, which QEMU
//! derives from the virtual clock: one tick every 40 instructions. The
//! counter is 24 bits wide and counts down from 2^24 - 1; a timed run reads
//! it before and after and takes the difference modulo 2^24, so one wrap is
//! handled and every run here stays far below 2^24 ticks (671 M
//! instructions). The ratio 40 is checked at start-up on a loop of known
//! length (`calibration` line). Each timed run is at least about 2 M
//! instructions (50 000 ticks), so the +-1 tick granularity is below 0.01 %.
//!
//! A stage or chain figure is (instructions of the loop with the work) minus
//! (instructions of the same loop with an empty body), divided by the number
//! of channel-updates (one update = the compare words of one audio channel
//! for one update slot).
//!
//! # Output, one line each
//! - `calibration instr_per_tick <x>`
//! - `instr_per_update <name> <x>`
//! - `checksum <name> <16 hex digits>`
//!
//! Then a semihosting exit with success; a panic exits with failure.
#![no_std]
#![no_main]

use core::hint::black_box;

use cortex_m::peripheral::syst::SystClkSource;
use cortex_m::peripheral::SYST;
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use panic_semihosting as _;

use ticktone::bridge::Bridge;
use ticktone::edge::{EdgeSolver, Sampling};
use ticktone::leg_pair::LegPair;
use ticktone::oversample::{Oversampler, MAX_RATIO};
use ticktone::requant::{Requantiser, ShaperSpec};
use ticktone::timer::Timer;
use ticktone::Modulator;

mod workload;
use workload::{Config, Signal, BLOCK, CH, CONFIGS, MAX_BLOCK_WORDS};

/// Instructions a SysTick tick: 1 ns per instruction, 25 MHz SysTick.
const INSTR_PER_TICK: u64 = 40;

/// Channel-updates a timed run aims at (about 2 M instructions or more).
const TARGET_UPDATES: usize = 40_000;

/// Updates a stage call takes in the `block-*` figures: the modulator's
/// pass of the stages (64 updates a channel, 4 frames at 16x).
const PASS: usize = 64;

/// Update-rate values for the stage loops.
const STAGE_LEN: usize = 4096;

/// SysTick ticks spent in `f`, modulo 2^24.
#[inline(never)]
fn ticks<F: FnOnce()>(f: F) -> u64 {
    let start = SYST::get_current();
    f();
    let end = SYST::get_current();
    (start.wrapping_sub(end) & 0x00FF_FFFF) as u64
}

/// Instructions spent in `f`.
fn instructions<F: FnOnce()>(f: F) -> u64 {
    ticks(f) * INSTR_PER_TICK
}

/// Exactly `2 n` instructions (`subs`, `bne` per turn), n >= 1.
#[inline(never)]
fn spin(n: u32) {
    // SAFETY: a register-only countdown loop; touches no memory or stack.
    unsafe {
        core::arch::asm!(
            "2:",
            "subs {0}, {0}, #1",
            "bne 2b",
            inout(reg) n => _,
            options(nomem, nostack),
        );
    }
}

/// Print `instr_per_update <name> <x.x>` from net instructions and updates.
fn report(name: &str, net: i64, updates: usize) {
    let tenths = (net * 10 + updates as i64 / 2) / updates as i64;
    let sign = if tenths < 0 { "-" } else { "" };
    let t = tenths.unsigned_abs();
    hprintln!("instr_per_update {} {}{}.{}", name, sign, t / 10, t % 10);
}

// ---- stage loops: `#[no_mangle]` so the disassembly can be found by name ----

#[no_mangle]
#[inline(never)]
fn tt_loop_empty(xs: &[i32]) {
    for &x in xs {
        black_box(x);
    }
}

#[no_mangle]
#[inline(never)]
fn tt_loop_oversample(o: &mut Oversampler, xs: &[i32]) {
    let mut fine = [0i32; MAX_RATIO];
    for &x in xs {
        o.push(x, &mut fine);
        black_box(&mut fine);
    }
}

#[no_mangle]
#[inline(never)]
fn tt_loop_edge(e: &mut EdgeSolver, xs: &[i32]) {
    for &x in xs {
        black_box(e.next(x));
    }
}

#[no_mangle]
#[inline(never)]
fn tt_loop_requant(q: &mut Requantiser, vs: &[i32]) {
    for &v in vs {
        black_box(q.quantise(v));
    }
}

#[no_mangle]
#[inline(never)]
fn tt_block_requant(q: &mut Requantiser, vs: &[i32]) {
    for block in vs.chunks_exact(PASS) {
        let mut b = [0i32; PASS];
        b.copy_from_slice(block);
        q.process(&mut b);
        black_box(&mut b);
    }
}

#[no_mangle]
#[inline(never)]
fn tt_block_edge(e: &mut EdgeSolver, xs: &[i32]) {
    for block in xs.chunks_exact(PASS) {
        let mut b = [0i32; PASS];
        b.copy_from_slice(block);
        e.process(&mut b);
        black_box(&mut b);
    }
}

#[no_mangle]
#[inline(never)]
fn tt_block_pair(p: &mut LegPair, e: &mut EdgeSolver, xs: &[i32]) {
    for block in xs.chunks_exact(PASS) {
        let mut a = [0i32; PASS];
        let mut b = [0i32; PASS];
        a.copy_from_slice(block);
        p.split(e, &mut a, &mut b);
        black_box((&mut a, &mut b));
    }
}

/// [`tt_block_requant`] and the other block loops with an empty body: the
/// copy into the block and the loop overhead.
#[no_mangle]
#[inline(never)]
fn tt_block_empty(xs: &[i32]) {
    for block in xs.chunks_exact(PASS) {
        let mut b = [0i32; PASS];
        b.copy_from_slice(block);
        black_box(&mut b);
    }
}

#[no_mangle]
#[inline(never)]
fn tt_loop_bridge(b: &Bridge, cs: &[i32]) {
    for &c in cs {
        black_box(b.words(c as u32));
    }
}

/// The whole chain over `blocks` blocks of [`BLOCK`] frames, cycling through
/// `input`: the DMA half-buffer refill a firmware makes.
#[no_mangle]
#[inline(never)]
fn tt_chain_blocks(m: &mut Modulator<CH>, input: &[i32], out: &mut [u16], blocks: usize) {
    for block in input.chunks_exact(BLOCK * CH).cycle().take(blocks) {
        let frames = m.process(block, &mut *out);
        black_box(frames);
        black_box(&mut *out);
    }
}

/// [`tt_chain_blocks`] with an empty body: the loop overhead.
#[no_mangle]
#[inline(never)]
fn tt_chain_blocks_empty(input: &[i32], out: &mut [u16], blocks: usize) {
    for block in input.chunks_exact(BLOCK * CH).cycle().take(blocks) {
        black_box(block);
        black_box(&mut *out);
    }
}

fn calibrate() {
    let short = instructions(|| spin(100_000));
    let long = instructions(|| spin(1_100_000));
    // 2 000 000 instructions between the two runs.
    let ticks = (long - short) / INSTR_PER_TICK;
    let milli = 2_000_000u64 * 1000 / ticks;
    hprintln!(
        "calibration instr_per_tick {}.{:03}",
        milli / 1000,
        milli % 1000
    );
}

/// Time `body` over `xs` repeated until [`TARGET_UPDATES`], net of the
/// empty loop.
fn time_stage(name: &str, xs: &[i32], body: impl FnMut(&[i32])) {
    time_against(name, xs, tt_loop_empty, body);
}

/// Time `body` over `xs` as [`time_stage`] does, net of `empty`.
fn time_against(name: &str, xs: &[i32], empty: fn(&[i32]), mut body: impl FnMut(&[i32])) {
    let reps = TARGET_UPDATES.div_ceil(xs.len());
    let empty = instructions(|| {
        for _ in 0..reps {
            empty(xs);
        }
    });
    let full = instructions(|| {
        for _ in 0..reps {
            body(xs);
        }
    });
    report(name, full as i64 - empty as i64, reps * xs.len());
}

fn stages() {
    let timer = Timer::try_new(workload::timer_updown_double()).unwrap();
    // Update-rate signal: the left channel of the test signal at 768 kHz.
    let mut xs = [0i32; STAGE_LEN];
    let mut sig = Signal::new(768_000, usize::MAX);
    for x in xs.iter_mut() {
        *x = sig.frame()[0];
    }

    // Oversampler: per update = per input sample / ratio.
    for (name, ratio) in [
        ("oversample-x16", 16),
        ("oversample-x12", 12),
        ("oversample-x8", 8),
        ("oversample-x6", 6),
        ("oversample-x4", 4),
        ("oversample-x2", 2),
    ] {
        let mut over = Oversampler::try_new(ratio as u32).unwrap();
        let ins = &xs[..STAGE_LEN / ratio];
        let reps = TARGET_UPDATES.div_ceil(ins.len() * ratio);
        let empty = instructions(|| {
            for _ in 0..reps {
                tt_loop_empty(ins);
            }
        });
        let full = instructions(|| {
            for _ in 0..reps {
                tt_loop_oversample(&mut over, ins);
            }
        });
        report(name, full as i64 - empty as i64, reps * ins.len() * ratio);
    }

    let mut edge = EdgeSolver::try_new(&timer, Sampling::Uniform).unwrap();
    time_stage("edge-uniform", &xs, |xs| tt_loop_edge(&mut edge, xs));

    let mut edge = EdgeSolver::try_new(&timer, Sampling::NATURAL).unwrap();
    time_stage("edge-natural-cubic1", &xs, |xs| tt_loop_edge(&mut edge, xs));

    // High counts (Q16 ticks) for the requantiser.
    let mut edge = EdgeSolver::try_new(&timer, Sampling::Uniform).unwrap();
    let mut hs = [0i32; STAGE_LEN];
    for (h, &x) in hs.iter_mut().zip(&xs) {
        *h = edge.next(x);
    }
    let bridge = Bridge::try_new(workload::bridge_full3(), &timer).unwrap();
    let (low, high) = bridge.high_count_range();
    let mut q = Requantiser::try_new(&timer, low, high, ShaperSpec::ROUND).unwrap();
    time_stage("requant-round", &hs, |vs| tt_loop_requant(&mut q, vs));

    for (name, order) in [("requant-ns3", 3), ("requant-ns5", 5)] {
        let mut q = Requantiser::try_new(&timer, low, high, ShaperSpec::new(order)).unwrap();
        time_stage(name, &hs, |vs| tt_loop_requant(&mut q, vs));
    }

    // The same stages on blocks of PASS updates, as the modulator calls
    // them (net of copying each block in).
    for (name, spec) in [
        ("block-requant-round", ShaperSpec::ROUND),
        ("block-requant-ns3", ShaperSpec::new(3)),
        ("block-requant-ns5", ShaperSpec::new(5)),
    ] {
        let mut q = Requantiser::try_new(&timer, low, high, spec).unwrap();
        time_against(name, &hs, tt_block_empty, |vs| tt_block_requant(&mut q, vs));
    }
    for (name, sampling) in [
        ("block-edge-uniform", Sampling::Uniform),
        ("block-edge-natural-cubic1", Sampling::NATURAL),
    ] {
        let mut e = EdgeSolver::try_new(&timer, sampling).unwrap();
        time_against(name, &xs, tt_block_empty, |xs| tt_block_edge(&mut e, xs));
    }
    let mut e = EdgeSolver::try_new(&timer, Sampling::NATURAL).unwrap();
    let mut pair = LegPair::new(
        EdgeSolver::try_new(&timer, Sampling::NATURAL).unwrap(),
        timer.top(),
        low,
        high,
        true,
    );
    time_against("block-pair-natural-cubic1", &xs, tt_block_empty, |xs| {
        tt_block_pair(&mut pair, &mut e, xs)
    });

    // Rounded high counts for the bridge mapper.
    let mut q = Requantiser::try_new(&timer, low, high, ShaperSpec::ROUND).unwrap();
    let mut cs = [0i32; STAGE_LEN];
    for (c, &h) in cs.iter_mut().zip(&hs) {
        *c = q.quantise(h) as i32;
    }
    time_stage("bridge-full3", &cs, |cs| tt_loop_bridge(&bridge, cs));
    let bridge = Bridge::try_new(workload::bridge_full3_separate(), &timer).unwrap();
    time_stage("bridge-full3sep", &cs, |cs| tt_loop_bridge(&bridge, cs));
}

/// Bytes painted below the stack pointer to find a call's stack use.
const PAINT_BYTES: usize = 16 * 1024;
const PAINT: u32 = 0x5AA5_C33C;

/// Bytes of stack that `f` uses below this function's own frame: the stack
/// below the stack pointer is painted with a pattern, `f` runs, and the
/// lowest word no longer holding the pattern marks its deepest point.
#[inline(never)]
fn stack_used<F: FnOnce()>(f: F) -> usize {
    let sp = cortex_m::register::msp::read() as usize;
    let base = sp - PAINT_BYTES;
    // SAFETY: the stack sits at the top of the board's 4 MiB data RAM and
    // the statics at its bottom (memory.x), so the PAINT_BYTES below the
    // stack pointer are unused stack; no interrupt is enabled in this
    // firmware (SysTick runs without its exception), so nothing else uses
    // or refers to them; the writes and reads are volatile word accesses
    // to aligned addresses.
    unsafe {
        for a in (base..sp).step_by(4) {
            core::ptr::write_volatile(a as *mut u32, PAINT);
        }
    }
    f();
    let mut deepest = sp;
    let mut overflow = true;
    // SAFETY: as above.
    unsafe {
        for a in (base..sp).step_by(4) {
            if core::ptr::read_volatile(a as *const u32) != PAINT {
                deepest = a;
                overflow = a == base;
                break;
            }
        }
    }
    // The whole painted area used: the figure would be a floor, not a
    // measurement.
    assert!(!overflow, "stack use reaches the painted limit");
    sp - deepest
}

/// One block call of the chain, kept out of line so that its stack frame
/// (the pass scratch) lies below the stack pointer [`stack_used`] reads.
#[inline(never)]
fn one_block(m: &mut Modulator<CH>, input: &[i32], out: &mut [u16]) -> usize {
    m.process(input, out)
}

/// Input frames cycled through by a timed chain run (8 blocks).
const CHAIN_FRAMES: usize = 8 * BLOCK;

fn chain(config: &Config) {
    let mut m = config.modulator().unwrap();
    let mut input = [0i32; CHAIN_FRAMES * CH];
    Signal::new(config.input_hz, usize::MAX).fill(&mut input);
    let mut out = [0u16; MAX_BLOCK_WORDS];
    let words = BLOCK * m.words_per_frame();
    let out = &mut out[..words];
    let updates_per_block = BLOCK * m.updates_per_frame() * CH;
    let blocks = TARGET_UPDATES.div_ceil(updates_per_block);
    // Warm the state (filters, shaper) on one pass first.
    tt_chain_blocks(&mut m, &input, out, CHAIN_FRAMES / BLOCK);
    let empty = instructions(|| tt_chain_blocks_empty(&input, out, blocks));
    let full = instructions(|| tt_chain_blocks(&mut m, &input, out, blocks));
    report(
        config.name,
        full as i64 - empty as i64,
        blocks * updates_per_block,
    );
    // Memory: the modulator's own state, and the stack one block's call
    // takes (scratch of the stage passes included).
    let stack = stack_used(|| {
        black_box(one_block(&mut m, &input[..BLOCK * CH], &mut *out));
    });
    hprintln!(
        "memory {} state_bytes {} stack_bytes {}",
        config.name,
        core::mem::size_of::<Modulator<CH>>(),
        stack
    );
}

#[entry]
fn main() -> ! {
    let mut cp = cortex_m::Peripherals::take().unwrap();
    cp.SYST.set_clock_source(SystClkSource::Core);
    cp.SYST.set_reload(0x00FF_FFFF);
    cp.SYST.clear_current();
    cp.SYST.enable_counter();

    calibrate();
    stages();
    for config in CONFIGS {
        chain(config);
    }
    for config in CONFIGS {
        let r = workload::run_checksum(config).unwrap();
        hprintln!("checksum {} {:016x}", config.name, r.checksum);
    }
    debug::exit(debug::EXIT_SUCCESS);
    #[allow(clippy::empty_loop)]
    loop {}
}
