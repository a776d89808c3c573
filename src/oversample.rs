//! Oversampler: polyphase interpolation from the input rate to the update
//! rate by a cascade of half-band stages.
//!
//! # Supported ratios
//! 1 (input already at the update rate), 2, 4, 8 and 16: one to four
//! half-band stages, each doubling the rate. Ratio `2^n` runs the first `n`
//! stages; a stage's filter depends only on its place in the cascade.
//!
//! # Response (measured on the integer tables, `tests/oversample.rs`)
//! Designed for the lowest input rate, 44.1 kHz, where the first stage's
//! transition band is 20 to 24.1 kHz; every higher input rate has wider
//! transition bands and more margin.
//! - Passband, 0 to 20 kHz: flat within +-0.00006 dB at every ratio.
//! - Images of the 0 to 20 kHz band (`m fs +- 20 kHz`, up to half the
//!   update rate): at least 106.2 dB down, at 44.1 kHz input and at 48 kHz
//!   alike (the first stage's stopband is equiripple at -106.2 dB from
//!   24.1 kHz at 44.1 kHz input, 26.2 kHz at 48 kHz). Input content between
//!   20 kHz and fs/2 falls in the transition band and is not treated as
//!   audio: at 44.1 kHz an input line at 21 kHz has an image at 23.1 kHz
//!   that is only partly attenuated.
//! - Delay: [`Oversampler::delay_updates`], linear phase.
//!
//! # Cost
//! Stage `k` has [`STAGE_PAIRS`]`[k-1]` coefficient pairs and runs
//! `2^(k-1)` times per input sample; half the outputs of each stage are a
//! copy of its input (the centre tap), the other half take one multiply per
//! symmetric pair after a pre-add. Multiply-accumulates per input sample
//! ([`Oversampler::macs_per_input`]): 35 at 2x, 47 at 4x, 63 at 8x, 87 at
//! 16x; per update 17.5, 11.75, 7.9 and 5.4.
//!
//! Measured on an emulated Cortex-M4 (QEMU `mps2-an386`, `-icount
//! shift=0`, release build with fat LTO, random input), instructions per
//! update including the call: 113 at 2x, 85.5 at 4x, 62 at 8x, 45 at 16x
//! (226, 342, 498 and 720 per input sample). A multiply-accumulate costs
//! five instructions in the long first stage (two data loads, the pre-add,
//! the coefficient load, `SMLAL`); the short later stages add the per-output
//! work (saturation, flag, two stores) and some register spills.
//!
//! # Arithmetic (bit-exact, integer only)
//! - Input Q1.31. Delay lines hold Q2.30 (one guard bit), so the pre-add of
//!   a symmetric pair cannot overflow `i32`. The input's lowest bit is
//!   dropped (arithmetic shift; exact for 16- and 24-bit audio).
//! - Coefficients Q1.31 (`c x 2^31`), products summed exactly in `i64`
//!   (`SMLAL`). The one rounding point of a stage is taking the high word,
//!   `acc >> 32`, a Q3.29 value: a floor, whose error lies in
//!   `(-2^-29, 0]` of full scale with mean `-2^-30` (a DC offset near
//!   -186 dBFS per stage; rounding to nearest would cost two instructions per
//!   computed sample).
//! - Saturation: each computed sample is saturated to full scale
//!   `[-1, 1 - 2^-29]` before it goes on (an interpolator can overshoot a
//!   full-scale input). Input samples whose interpolation saturated are
//!   counted ([`Oversampler::clamped`]). No stage can overflow before that
//!   point: every table's sum of `|c|` is below 1.5, checked at compile
//!   time, so `|acc| < 1.5 x 2^62` and the high word fits in `i32`.
//! - Output Q1.31; computed samples have their two lowest bits zero.
//!
//! No floating point, no allocation, no panic path: windows are fixed-size
//! arrays taken at offsets the compiler can bound. State: about 0.8 KB a
//! channel.

use crate::error::ConfigError;

/// Largest oversampling ratio.
pub const MAX_RATIO: usize = 16;

/// Coefficient pairs of the four half-band stages, in cascade order.
pub const STAGE_PAIRS: [usize; 4] = [K1, K2, K3, K4];

const K1: usize = 35;
const K2: usize = 6;
const K3: usize = 4;
const K4: usize = 3;
/// Window (input samples spanned) of each stage: 2K.
const W1: usize = 2 * K1;
const W2: usize = 2 * K2;
const W3: usize = 2 * K3;
const W4: usize = 2 * K4;
/// Inputs a stage takes per input sample of the cascade.
const N2: usize = 2;
const N3: usize = 4;
const N4: usize = 8;
/// Ring sizes of stages 2 to 4: multiples of N, at least W - 1.
const S2: usize = 12;
const S3: usize = 8;
const S4: usize = 8;

/// Stage 1 (input rate to 2x): Q1.31 coefficients of taps +-1, +-3, ...,
/// +-69 of the gain-2 half-band interpolator. Designed by
/// [`crate::oversample_design`] (Remez, passband edge 20 kHz at 88.2 kHz).
pub const STAGE1: [i32; K1] = [
    1365826337, -451811026, 266972182, -186361694, 140562504, -110658652, 89386424, -73364294,
    60807441, -50685613, 42362192, -35421588, 29579555, -24633470, 20433315, -16864029, 13834434,
    -11270104, 9108690, -7296818, 5788009, -4541285, 3520220, -2692300, 2028481, -1502871, 1092495,
    -777101, 538989, -362847, 235587, -146168, 85421, -45857, 25741,
];

/// Stage 2 (2x to 4x): taps +-1 ... +-11.
pub const STAGE2: [i32; K2] = [
    1325955826, -344988373, 123861044, -38840243, 8832458, -1082322,
];

/// Stage 3 (4x to 8x): taps +-1 ... +-7.
pub const STAGE3: [i32; K3] = [1290273422, -267503167, 57527356, -6556434];

/// Stage 4 (8x to 16x): taps +-1 ... +-5.
pub const STAGE4: [i32; K4] = [1260282416, -212725769, 26185517];

/// The four tables in cascade order.
pub const fn stage_tables() -> [&'static [i32]; 4] {
    [&STAGE1, &STAGE2, &STAGE3, &STAGE4]
}

/// Sum of `|c|`, for the compile-time headroom check.
const fn abs_sum(c: &[i32]) -> i64 {
    let mut s = 0i64;
    let mut i = 0;
    while i < c.len() {
        s += (c[i] as i64).abs();
        i += 1;
    }
    s
}

// Headroom: pair sums of `|c|` below 1.5 keep `acc` and its high word in
// range (module docs).
const _: () = {
    let limit = 3i64 << 30;
    assert!(abs_sum(&STAGE1) < limit);
    assert!(abs_sum(&STAGE2) < limit);
    assert!(abs_sum(&STAGE3) < limit);
    assert!(abs_sum(&STAGE4) < limit);
};

/// Full scale in the Q3.29 high word.
const Q29_MIN: i32 = -(1 << 29);
const Q29_MAX: i32 = (1 << 29) - 1;

/// The computed (odd-phase) sample of a half-band stage from its window of
/// `W = 2K` inputs (Q2.30, oldest first): the Q3.29 high word (floor).
#[inline(always)]
fn odd_phase<const K: usize, const W: usize>(w: &[i32; W], c: &[i32; K]) -> i32 {
    const { assert!(W == 2 * K) };
    let mut acc = 0i64;
    for j in 0..K {
        // Both Q2.30 values are within [-1, 1): the sum fits in i32.
        let pair = w[K - 1 - j].wrapping_add(w[K + j]);
        acc = acc.wrapping_add(pair as i64 * c[j] as i64);
    }
    (acc >> 32) as i32
}

/// The two outputs of a stage for one window: the computed sample then the
/// centre-tap copy, scaled by `SHIFT` (1: Q2.30 for the next stage; 2:
/// Q1.31 out). Saturation is recorded in `flags`.
#[inline(always)]
fn stage_pair<const K: usize, const W: usize, const SHIFT: u32>(
    w: &[i32; W],
    c: &[i32; K],
    flags: &mut u32,
) -> [i32; 2] {
    let y = odd_phase(w, c);
    let s = y.clamp(Q29_MIN, Q29_MAX);
    *flags |= (y ^ s) as u32;
    [s << SHIFT, w[K] << (SHIFT - 1)]
}

/// The coefficient table behind an optimisation barrier. Without it the
/// compiler folds the constants into the code (two instructions each on a
/// Cortex-M4 instead of one load) and, where it hoists them out of a block,
/// loses track of their being 32-bit values and emits a full 64 x 64-bit
/// multiply instead of one multiply-accumulate. Only code quality depends on
/// it, never the result.
#[inline(always)]
fn opaque<const K: usize>(c: &[i32; K]) -> &[i32; K] {
    core::hint::black_box(c)
}

/// Stage 1: take one input (Q1.31) into the ring and write the stage's two
/// outputs for the newest window, scaled by `SHIFT` (see [`stage_pair`]).
#[inline(never)]
fn run_head<const SHIFT: u32>(
    ring: &mut [i32; 2 * W1],
    pos: &mut usize,
    x: i32,
    c: &[i32; K1],
    dst: &mut [i32; 2],
    flags: &mut u32,
) {
    let c = opaque(c);
    let p = if *pos < W1 { *pos } else { 0 };
    *pos = p + 1;
    let x = x >> 1;
    ring[p] = x;
    ring[p + W1] = x;
    if let Some(w) = ring.get(p + 1..).and_then(|s| s.first_chunk::<W1>()) {
        *dst = stage_pair::<K1, W1, SHIFT>(w, c, flags);
    }
}

/// Start of the current batch in a twice-written ring of `S` positions
/// that takes `N` inputs a call: a multiple of `N` in `0..=S - N`.
#[inline(always)]
const fn batch_base<const S: usize, const N: usize>(pos: usize) -> usize {
    if pos > S - N {
        0
    } else {
        pos
    }
}

/// Where the previous stage writes a ring stage's `N` new inputs: their
/// upper copies, right after the history.
#[inline(always)]
fn ring_tail<const S: usize, const N: usize, const R: usize>(
    ring: &mut [i32; R],
    pos: usize,
) -> Option<&mut [i32; N]> {
    let q = batch_base::<S, N>(pos);
    ring.get_mut(q + S..).and_then(|s| s.first_chunk_mut::<N>())
}

/// Run stage 2, 3 or 4 over its `N` new inputs (already in the ring's
/// upper copies, see [`ring_tail`]), writing `M = 2N` outputs.
///
/// The ring holds `S` positions twice (`R = 2S` words): position `p` at `p`
/// and at `p + S`. The `N` inputs of a call go to positions `q..q + N` with
/// `q` a multiple of `N`, so the history and the new inputs always lie
/// contiguous at `q + S + 1 - W .. q + S + N` and no history is moved; only
/// the `N` new inputs are copied to their lower copies.
///
/// Not inlined: each stage reads its inputs from memory, so the compiler
/// keeps every product a 32 x 32 -> 64-bit multiply-accumulate instead of
/// folding the previous stage's scaling into wider constants.
#[inline(never)]
fn run_ring<
    const K: usize,
    const W: usize,
    const N: usize,
    const S: usize,
    const R: usize,
    const LEN: usize,
    const M: usize,
    const SHIFT: u32,
>(
    ring: &mut [i32; R],
    pos: &mut usize,
    c: &[i32; K],
    dst: &mut [i32; M],
    flags: &mut u32,
) {
    const { assert!(R == 2 * S && S.is_multiple_of(N) && S + 1 >= W && LEN == W - 1 + N && M == 2 * N) };
    let c = opaque(c);
    let q = batch_base::<S, N>(*pos);
    let mut f = 0u32;
    if let Some(line) = ring
        .get(q + S + 1 - W..)
        .and_then(|s| s.first_chunk::<LEN>())
    {
        for (i, d) in dst.chunks_exact_mut(2).enumerate() {
            if let Some(w) = line.get(i..).and_then(|s| s.first_chunk::<W>()) {
                d.copy_from_slice(&stage_pair::<K, W, SHIFT>(w, c, &mut f));
            }
        }
    }
    let (lower, upper) = ring.split_at_mut(S);
    if let (Some(a), Some(b)) = (lower.get_mut(q..q + N), upper.get(q..q + N)) {
        a.copy_from_slice(b);
    }
    *flags |= f;
    *pos = q + N;
}

/// Interpolates each input sample to `ratio` samples at the update rate.
#[derive(Clone, Debug)]
pub struct Oversampler {
    ratio: usize,
    stages: u8,
    /// Stage 1 delay line, written twice (at `pos` and `pos + W1`) so that
    /// the newest `W1` inputs are always contiguous.
    ring: [i32; 2 * W1],
    pos: usize,
    ring2: [i32; 2 * S2],
    pos2: usize,
    ring3: [i32; 2 * S3],
    pos3: usize,
    ring4: [i32; 2 * S4],
    pos4: usize,
    clamped: u32,
}

impl Oversampler {
    /// An oversampler for `ratio` = update rate / input rate.
    ///
    /// # Errors
    /// [`ConfigError::OversamplingRatio`] unless `ratio` is 1, 2, 4, 8 or 16.
    pub fn try_new(ratio: u32) -> Result<Self, ConfigError> {
        let stages = match ratio {
            1 => 0,
            2 => 1,
            4 => 2,
            8 => 3,
            16 => 4,
            _ => return Err(ConfigError::OversamplingRatio { ratio }),
        };
        Ok(Self {
            ratio: ratio as usize,
            stages,
            ring: [0; 2 * W1],
            pos: 0,
            ring2: [0; 2 * S2],
            pos2: 0,
            ring3: [0; 2 * S3],
            pos3: 0,
            ring4: [0; 2 * S4],
            pos4: 0,
            clamped: 0,
        })
    }

    /// Output samples a input sample.
    pub const fn ratio(&self) -> usize {
        self.ratio
    }

    /// Group delay at the update rate, in updates: input sample `m` is
    /// centred on output `m x ratio + delay_updates()`. Stage `k` of `n`
    /// adds `(2 K_k - 1) x 2^(n-k)`: 615 at 16x, 305 at 8x, 149 at 4x, 69
    /// at 2x.
    pub const fn delay_updates(&self) -> u32 {
        let mut d = 0u32;
        let mut k = 0;
        while k < self.stages as usize {
            d = d * 2 + (2 * STAGE_PAIRS[k] as u32 - 1);
            k += 1;
        }
        d
    }

    /// Multiply-accumulates per input sample (one per coefficient pair and
    /// computed output); divide by [`Oversampler::ratio`] for the count per
    /// update.
    pub const fn macs_per_input(&self) -> u32 {
        let mut m = 0u32;
        let mut k = 0;
        while k < self.stages as usize {
            m += (STAGE_PAIRS[k] as u32) << k;
            k += 1;
        }
        m
    }

    /// Input samples whose interpolation was saturated to full scale, since
    /// construction or [`Oversampler::clear_clamped`] (wrapping).
    pub const fn clamped(&self) -> u32 {
        self.clamped
    }

    /// Reset the saturation count.
    pub fn clear_clamped(&mut self) {
        self.clamped = 0;
    }

    /// Clear the filters' history (silence), keeping the ratio.
    pub fn reset(&mut self) {
        self.ring = [0; 2 * W1];
        self.pos = 0;
        self.ring2 = [0; 2 * S2];
        self.pos2 = 0;
        self.ring3 = [0; 2 * S3];
        self.pos3 = 0;
        self.ring4 = [0; 2 * S4];
        self.pos4 = 0;
    }

    /// Block form of [`Oversampler::push`]: interpolates
    /// `n = min(input.len(), out.len() / ratio)` samples into the first
    /// `n x ratio` words of `out` and returns `n`.
    pub fn process(&mut self, input: &[i32], out: &mut [i32]) -> usize {
        let r = self.ratio;
        let mut buf = [0i32; MAX_RATIO];
        let mut n = 0;
        for (&x, dst) in input.iter().zip(out.chunks_exact_mut(r.max(1))) {
            self.push(x, &mut buf);
            for (d, &v) in dst.iter_mut().zip(&buf) {
                *d = v;
            }
            n += 1;
        }
        n
    }

    /// One input sample (Q1.31) in, `ratio` samples (Q1.31) out, written to
    /// the front of `out`.
    #[inline]
    pub fn push(&mut self, x: i32, out: &mut [i32; MAX_RATIO]) {
        if self.stages == 0 {
            out[0] = x;
            return;
        }
        let mut flags = 0u32;
        let stages = self.stages;
        let (ring, pos) = (&mut self.ring, &mut self.pos);
        let (r2, p2) = (&mut self.ring2, &mut self.pos2);
        let (r3, p3) = (&mut self.ring3, &mut self.pos3);
        let (r4, p4) = (&mut self.ring4, &mut self.pos4);
        const L2: usize = W2 - 1 + N2;
        const L3: usize = W3 - 1 + N3;
        const L4: usize = W4 - 1 + N4;
        if stages == 1 {
            if let Some(d) = out.first_chunk_mut::<2>() {
                run_head::<2>(ring, pos, x, &STAGE1, d, &mut flags);
            }
        } else if let Some(t2) = ring_tail::<S2, N2, { 2 * S2 }>(r2, *p2) {
            run_head::<1>(ring, pos, x, &STAGE1, t2, &mut flags);
            if stages == 2 {
                if let Some(d) = out.first_chunk_mut::<4>() {
                    run_ring::<K2, W2, N2, S2, { 2 * S2 }, L2, 4, 2>(
                        r2, p2, &STAGE2, d, &mut flags,
                    );
                }
            } else if let Some(t3) = ring_tail::<S3, N3, { 2 * S3 }>(r3, *p3) {
                run_ring::<K2, W2, N2, S2, { 2 * S2 }, L2, 4, 1>(r2, p2, &STAGE2, t3, &mut flags);
                if stages == 3 {
                    if let Some(d) = out.first_chunk_mut::<8>() {
                        run_ring::<K3, W3, N3, S3, { 2 * S3 }, L3, 8, 2>(
                            r3, p3, &STAGE3, d, &mut flags,
                        );
                    }
                } else if let Some(t4) = ring_tail::<S4, N4, { 2 * S4 }>(r4, *p4) {
                    run_ring::<K3, W3, N3, S3, { 2 * S3 }, L3, 8, 1>(
                        r3, p3, &STAGE3, t4, &mut flags,
                    );
                    run_ring::<K4, W4, N4, S4, { 2 * S4 }, L4, 16, 2>(
                        r4, p4, &STAGE4, out, &mut flags,
                    );
                }
            }
        }
        if flags != 0 {
            self.clamped = self.clamped.wrapping_add(1);
        }
    }
}
