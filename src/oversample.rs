//! Oversampler: polyphase interpolation from the input rate to the update
//! rate by a cascade of half-band stages and, for ratios 6 and 12, one
//! third-band stage.
//!
//! # Supported ratios
//! - 1: the input is already at the update rate (copied through).
//! - 2, 4, 8, 16: one to four half-band stages, each doubling the rate.
//!   Ratio `2^n` runs the first `n`; a stage's filter depends only on its
//!   place in the cascade.
//! - 6: half-band stage 1, then an interpolator by 3 ([`THIRD_SUM`]).
//! - 12: as 6, then half-band stage 3 (as fractions of its rate, its
//!   passband is wider and its stopband starts lower than this place
//!   needs).
//!
//! The sharp filter always runs first, at twice the input rate, where it is
//! cheapest. Other ratios (3, 5, 10, ...) are not built: a ratio of 3 would
//! need the sharp 20 to 24.1 kHz transition in a filter by 3 (about 230
//! taps).
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
//! Half-band stage `k` has [`STAGE_PAIRS`]`[k-1]` coefficient pairs; half
//! its outputs are a copy of its input (the centre tap), the other half take
//! one multiply per symmetric pair after a pre-add. The third-band stage
//! copies one output in three and computes the other two, mirror images of
//! each other, from one sum and one difference per pair: 14
//! multiply-accumulates for both. Per input sample
//! ([`Oversampler::macs_per_input`]): 35 at 2x, 47 at 4x, 63 at 6x, 63 at
//! 8x, 87 at 12x, 87 at 16x; per update 17.5, 11.75, 10.5, 7.9, 7.25 and
//! 5.4.
//!
//! Measured on an emulated Cortex-M4 (QEMU `mps2-an386`, `-icount
//! shift=0`, release build with fat LTO, the harness's test signal, the call
//! from a sample loop included; `oversample-x16` from
//! `benches/cortex-m4/run-check.sh`, and `oversample-x2` to `-x12` from the
//! same run), instructions per update:
//!
//! | ratio                     |     2 |    4 |    6 |    8 |   12 |   16 |
//! |---------------------------|------:|-----:|-----:|-----:|-----:|-----:|
//! | now                       |  90.1 | 63.3 | 62.4 | 44.6 | 42.8 | 30.9 |
//! | previous implementation   | 115.1 | 87.0 | 71.2 | 60.5 | 50.3 | 40.4 |
//!
//! At 16x that is 494 instructions per input sample for 87
//! multiply-accumulates, 5.7 each all in:
//! - Stage 1, about 150: unrolled; per two coefficient pairs, two paired
//!   loads (`LDRD`) for the four window words, one for the two
//!   coefficients, two pre-adds and two `SMLAL`, 3.5 instructions a
//!   multiply-accumulate (the delay line holds sample pairs for this, see
//!   `run_head`).
//! - Stages 2 to 4, about 80, 85 and 150: two neighbouring outputs at a
//!   time (`output_pair`): `W + 1` loads, `2W` `SMLAL` (no pre-add), seven
//!   instructions to saturate both and record a clamp, the output shifts
//!   and two stores; 31 instructions for two outputs of stage 4, 12 of them
//!   `SMLAL`.
//! - About 30 for the call, the dispatch by ratio and the ring positions
//!   and copies.
//!
//! The multiply-accumulates alone (pre-add and `SMLAL`, or two `SMLAL`) take
//! at least 174 instructions per input (10.9 per update); loading the
//! operands, saturating and storing make up most of the rest.
//!
//! Code: [`Oversampler::push`] takes 5.8 KB of Cortex-M4 flash for all
//! ratios, each ratio's path with its stages inlined (`llvm-nm -S` on the
//! image of `benches/cortex-m4`).
//!
//! # Arithmetic (bit-exact, integer only)
//! - Input Q1.31. Delay lines hold Q2.30 (one guard bit), so the pre-add of
//!   a symmetric pair cannot overflow `i32` (stages 2 to 4 multiply both
//!   words of a pair instead, which gives the same exact sum). The input's
//!   lowest bit is dropped (arithmetic shift; exact for 16- and 24-bit
//!   audio).
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
//!   point: every half-band table's sum of `|c|` is below 1.5 and the
//!   third band's sum and difference tables together below 1.75, checked at
//!   compile time, so `|acc| < 1.75 x 2^62` and the high word fits in `i32`.
//! - Output Q1.31; computed samples have their two lowest bits zero.
//!
//! No floating point, no allocation, no panic path: windows are fixed-size
//! arrays taken at offsets the compiler can bound. State: about 1.5 KB a
//! channel on a 32-bit target (374 words; stage 1's delay line holds each
//! input twice, as sample pairs, see `run_head`).

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

/// Taps a branch of the third-band stage spans, `2P`, over its inputs.
const P3: usize = 7;
const W3X: usize = 2 * P3;
/// Ring of the third-band stage (2 inputs a call) and of the half-band that
/// follows it at 12x (6 inputs a call).
const ST: usize = 14;
const NT: usize = 2;
const SB: usize = 12;
const NB: usize = 6;

/// Path through the stages.
const THROUGH: u8 = 0;
const SIX: u8 = 5;
const TWELVE: u8 = 6;

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

/// Third-band interpolator by 3 (ratios 6 and 12: 2x to 6x): the two
/// computed branches as sum and difference of mirrored coefficient pairs.
/// With `d` the `2P` taps of branch 1 (taps `3k + 1`, `k = -P..P`), oldest
/// input first, `THIRD_SUM[i] = (d[i] + d[2P-1-i]) / 2` and
/// `THIRD_DIFF[i] = (d[i] - d[2P-1-i]) / 2`, Q1.31. Designed by
/// [`crate::oversample_design`] (Kaiser-windowed sinc, 41 taps).
pub const THIRD_SUM: [i32; P3] = [
    93972, -1496805, 9357101, -37103817, 112565695, -307556787, 1297880105,
];

/// See [`THIRD_SUM`].
pub const THIRD_DIFF: [i32; P3] = [
    -54427, 527744, -2410662, 7485018, -19069264, 52244897, -455079347,
];

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
    // Third band: |sum +- diff| <= (sum|e| + sum|f|) x 2^62 < 2^63.
    assert!(abs_sum(&THIRD_SUM) + abs_sum(&THIRD_DIFF) < 7i64 << 29);
};

/// Full scale in the Q3.29 high word.
const Q29_MIN: i32 = -(1 << 29);
const Q29_MAX: i32 = (1 << 29) - 1;

/// Two consecutive samples or coefficients, aligned to 8 bytes so that one
/// paired load (`LDRD` on a Cortex-M4) reads both.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[repr(C, align(8))]
struct Duo([i32; 2]);

/// Stage 1's sample pairs a window needs: `line[k] = (w[k], w[k+1])` of
/// the window `w` of the newest `W1` inputs.
const L1: usize = W1 - 1;

/// Stage 1's coefficients `2m` and `2m + 1` as duos, `m = 0..K1/2`, each
/// followed by an unused duo. The gap matters to the compiler only: it
/// pairs two adjacent loads into one `LDRD` where they form a run of two,
/// but leaves a long run of adjacent loads (a dense table) unpaired.
const fn head_duos() -> [[Duo; 2]; K1 / 2] {
    let mut d = [[Duo([0; 2]); 2]; K1 / 2];
    let mut m = 0;
    while m < K1 / 2 {
        d[m][0] = Duo([STAGE1[2 * m], STAGE1[2 * m + 1]]);
        m += 1;
    }
    d
}

/// Coefficient pairs `j = 2m` and `j + 1` of stage 1, written out twin by
/// twin so that the long first stage compiles to straight-line paired
/// loads and multiply-accumulates whatever the optimiser's loop-unrolling
/// budget. The window words of the twin, `w[K-2-j], w[K-1-j]` and
/// `w[K+j], w[K+1+j]`, are the duos `line[K-2-j]` and `line[K+j]`.
macro_rules! twins_unrolled {
    ($acc:ident, $line:ident, $c:ident; $($m:literal)*) => {
        $(
            let Duo([c0, c1]) = $c[$m][0];
            let Duo([lo0, lo1]) = $line[K1 - 2 - 2 * $m];
            let Duo([hi0, hi1]) = $line[K1 + 2 * $m];
            // Q2.30 values within [-1, 1): each sum fits in i32.
            $acc = $acc.wrapping_add(lo1.wrapping_add(hi0) as i64 * c0 as i64);
            $acc = $acc.wrapping_add(lo0.wrapping_add(hi1) as i64 * c1 as i64);
        )*
    };
}

/// The computed (odd-phase) sample of stage 1, `sum c[j] (w[K-1-j] +
/// w[K+j])` over the window `w` of `W1` inputs (Q2.30, oldest first), as
/// the Q3.29 high word (floor). Unrolled; reads the window's sample pairs
/// (`line`, see [`L1`]), the coefficient duos `c` and the last coefficient
/// `last`.
#[inline(always)]
fn odd_phase_head(line: &[Duo; L1], c: &[[Duo; 2]; K1 / 2], last: i32) -> i32 {
    const { assert!(K1 == 35) };
    let mut acc = 0i64;
    twins_unrolled!(acc, line, c;
        0 1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16);
    let pair = line[0].0[0].wrapping_add(line[L1 - 1].0[1]);
    acc = acc.wrapping_add(pair as i64 * last as i64);
    (acc >> 32) as i32
}

/// The coefficient tables as the stages read them, through the reference
/// each [`Oversampler`] holds. The compiler cannot see through a reference
/// loaded from the oversampler, so it neither folds the coefficients into
/// the code (two instructions each on a Cortex-M4 instead of one load) nor,
/// where it hoists them out of a block, loses track of their being 32-bit
/// values and emits a full 64 x 64-bit multiply instead of one
/// multiply-accumulate. Only code quality depends on it, never the result.
#[derive(Debug)]
struct Tables {
    s1: [[Duo; 2]; K1 / 2],
    s1_last: i32,
    s2: [i32; K2],
    s3: [i32; K3],
    s4: [i32; K4],
    sum: [i32; P3],
    diff: [i32; P3],
}

static TABLES: Tables = Tables {
    s1: head_duos(),
    s1_last: STAGE1[K1 - 1],
    s2: STAGE2,
    s3: STAGE3,
    s4: STAGE4,
    sum: THIRD_SUM,
    diff: THIRD_DIFF,
};

/// Stage 1: take one input (Q1.31) into the ring and write the stage's two
/// outputs for the newest window: the computed sample then the centre-tap
/// copy, scaled by `SHIFT` (1: Q2.30 for the next stage; 2: Q1.31 out).
///
/// The ring holds, for each input `x[n]`, the duo `(x[n-1], x[n])`, twice
/// (at `p` and `p + W1`) so that the newest `L1` duos are always
/// contiguous: every symmetric twin of the window is then two aligned duo
/// loads.
#[inline(always)]
fn run_head<const SHIFT: u32>(
    ring: &mut [Duo; 2 * W1],
    pos: &mut usize,
    x: i32,
    tabs: &Tables,
    dst: &mut [i32; 2],
    flags: &mut u32,
) {
    let p = if *pos < W1 { *pos } else { 0 };
    *pos = p + 1;
    let x = x >> 1;
    // The previous input: the second word of the previous duo.
    let prev = ring[p + W1 - 1].0[1];
    ring[p] = Duo([prev, x]);
    ring[p + W1] = Duo([prev, x]);
    if let Some(line) = ring
        .get(p + W1 + 1 - L1..)
        .and_then(|s| s.first_chunk::<L1>())
    {
        let y = saturate(odd_phase_head(line, &tabs.s1, tabs.s1_last), flags);
        *dst = [y << SHIFT, line[K1].0[0] << (SHIFT - 1)];
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
/// The outputs are computed two at a time ([`output_pair`]), each pair
/// behind a compiler fence so that it reads its inputs from memory: the
/// compiler then neither keeps earlier values live across the pairs (and
/// spills them) nor forwards the previous stage's stored outputs, which
/// would let it fold that stage's scaling into wider constants and emit full
/// 64 x 64-bit multiplies instead of 32 x 32 -> 64-bit multiply-accumulates.
#[inline(always)]
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
    const {
        assert!(
            R == 2 * S
                && S.is_multiple_of(N)
                && S + 1 >= W
                && LEN == W - 1 + N
                && M == 2 * N
                && N.is_multiple_of(2)
                && N <= 8
        )
    };
    let q = batch_base::<S, N>(*pos);
    if let Some(line) = ring
        .get(q + S + 1 - W..)
        .and_then(|s| s.first_chunk::<LEN>())
    {
        // The window's taps, oldest first: c[K-1], ..., c[0], c[0], ..., c[K-1].
        let h: [i32; W] = core::array::from_fn(|k| if k < K { c[K - 1 - k] } else { c[k - K] });
        macro_rules! groups {
            ($($g:literal)*) => {
                $(
                    if 2 * $g < N {
                        if let (Some(v), Some(d)) = (
                            line.get(2 * $g..2 * $g + W + 1),
                            dst.get_mut(4 * $g..4 * $g + 4),
                        ) {
                            output_pair::<K, W, SHIFT>(v, &h, d, flags);
                        }
                    }
                )*
            };
        }
        groups!(0 1 2 3);
    }
    let (lower, upper) = ring.split_at_mut(S);
    if let (Some(a), Some(b)) = (lower.get_mut(q..q + N), upper.get(q..q + N)) {
        a.copy_from_slice(b);
    }
    *pos = q + N;
}

/// Two neighbouring computed outputs of a half-band stage and the centre
/// taps that follow each: `v` holds the `W + 1` inputs the two windows
/// span, `h` the `W` taps (the symmetric pairs' coefficients, oldest
/// first), `d` the four outputs.
///
/// Each input is loaded once and multiplied into both sums (no pre-add;
/// the `i64` sums are exact, so this is the same value): `2W`
/// multiply-accumulates, `W + 1` loads, and few live registers (two sums,
/// the taps, one input).
#[inline(always)]
fn output_pair<const K: usize, const W: usize, const SHIFT: u32>(
    v: &[i32],
    h: &[i32; W],
    d: &mut [i32],
    flags: &mut u32,
) {
    // A barrier for the optimiser only: this pair loads its own inputs
    // instead of keeping the previous pair's live (and spilling them).
    core::sync::atomic::compiler_fence(core::sync::atomic::Ordering::SeqCst);
    if let (Some((v, &[last])), Some(d)) = (v.split_first_chunk::<W>(), d.first_chunk_mut::<4>()) {
        let mut a = v[0] as i64 * h[0] as i64;
        let mut b = 0i64;
        for k in 1..W {
            a = a.wrapping_add(v[k] as i64 * h[k] as i64);
            b = b.wrapping_add(v[k] as i64 * h[k - 1] as i64);
        }
        b = b.wrapping_add(last as i64 * h[W - 1] as i64);
        let ya = saturate((a >> 32) as i32, flags);
        let yb = saturate((b >> 32) as i32, flags);
        *d = [
            ya << SHIFT,
            v[K] << (SHIFT - 1),
            yb << SHIFT,
            v[K + 1] << (SHIFT - 1),
        ];
    }
}

/// Saturate a Q3.29 high word to full scale, recording a clamp in `flags`
/// (set non-zero).
///
/// `flags` is the caller's word in memory, written only on a clamp: a
/// branch rather than a flag mask kept in a register, which costs no more
/// instructions (the compiler tests both outputs of an [`output_pair`]
/// with one branch) and keeps a register free.
#[inline(always)]
fn saturate(y: i32, flags: &mut u32) -> i32 {
    let s = y.clamp(Q29_MIN, Q29_MAX);
    if s != y {
        *flags = 1;
    }
    s
}

/// Run the third-band stage over its `N` new inputs (in the ring's upper
/// copies, as for [`run_ring`]), writing `M = 3N` outputs per input: branch
/// 1, branch 2, then the centre-tap copy, scaled by `SHIFT`.
///
/// Branch 2's taps are branch 1's reversed, so with `a = w[i]` and
/// `b = w[2P-1-i]` the two outputs are `sum e_i (a + b) -+ sum f_i (a - b)`:
/// `2P` multiply-accumulates for both instead of `4P`. Each output is one
/// `i64` sum, floored once to its high word.
#[inline(never)]
fn run_third<
    const N: usize,
    const S: usize,
    const R: usize,
    const LEN: usize,
    const M: usize,
    const SHIFT: u32,
>(
    ring: &mut [i32; R],
    pos: &mut usize,
    e: &[i32; P3],
    f: &[i32; P3],
    dst: &mut [i32; M],
    flags: &mut u32,
) {
    const {
        assert!(
            R == 2 * S && S.is_multiple_of(N) && S + 1 >= W3X && LEN == W3X - 1 + N && M == 3 * N
        )
    };
    let q = batch_base::<S, N>(*pos);
    if let Some(line) = ring
        .get(q + S + 1 - W3X..)
        .and_then(|s| s.first_chunk::<LEN>())
    {
        for (i, d) in dst.chunks_exact_mut(3).enumerate() {
            if let Some(w) = line.get(i..).and_then(|s| s.first_chunk::<W3X>()) {
                let (mut sum, mut diff) = (0i64, 0i64);
                for j in 0..P3 {
                    let (a, b) = (w[j], w[W3X - 1 - j]);
                    // Q2.30 within [-1, 1): sum and difference fit in i32.
                    sum = sum.wrapping_add(a.wrapping_add(b) as i64 * e[j] as i64);
                    diff = diff.wrapping_add(a.wrapping_sub(b) as i64 * f[j] as i64);
                }
                let y1 = saturate((sum.wrapping_sub(diff) >> 32) as i32, flags);
                let y2 = saturate((sum.wrapping_add(diff) >> 32) as i32, flags);
                d.copy_from_slice(&[y1 << SHIFT, y2 << SHIFT, w[P3] << (SHIFT - 1)]);
            }
        }
    }
    let (lower, upper) = ring.split_at_mut(S);
    if let (Some(a), Some(b)) = (lower.get_mut(q..q + N), upper.get(q..q + N)) {
        a.copy_from_slice(b);
    }
    *pos = q + N;
}

/// Interpolates each input sample to `ratio` samples at the update rate.
///
/// ```
/// use ticktone::oversample::{Oversampler, MAX_RATIO};
/// let mut o = Oversampler::try_new(8).unwrap();
/// let mut out = [0i32; MAX_RATIO];
/// // A constant settles to itself: the DC gain is 1 within the passband
/// // ripple (about 5e-6), so within 2e-5 of full scale (42 950 in Q1.31).
/// for _ in 0..100 {
///     o.push(0x4000_0000, &mut out);
/// }
/// assert!(out[..8].iter().all(|&v| (v - 0x4000_0000).abs() < 42_950));
/// assert_eq!(o.delay_updates(), 305);
/// ```
#[derive(Clone, Debug)]
pub struct Oversampler {
    ratio: usize,
    /// Always [`TABLES`]; see [`Tables`].
    tables: &'static Tables,
    /// `THROUGH`, 1 to 4 half-band stages, `SIX` or `TWELVE`.
    plan: u8,
    /// Stage 1 delay line of sample pairs (see [`run_head`]).
    ring: [Duo; 2 * W1],
    pos: usize,
    ring2: [i32; 2 * S2],
    pos2: usize,
    ring3: [i32; 2 * S3],
    pos3: usize,
    ring4: [i32; 2 * S4],
    pos4: usize,
    /// Third-band stage (ratios 6 and 12); at 12x the half-band after it
    /// uses `ring2`.
    ring_t: [i32; 2 * ST],
    pos_t: usize,
    clamped: u32,
}

impl Oversampler {
    /// An oversampler for `ratio` = update rate / input rate.
    ///
    /// # Errors
    /// [`ConfigError::OversamplingRatio`] unless `ratio` is 1, 2, 4, 8 or 16.
    pub fn try_new(ratio: u32) -> Result<Self, ConfigError> {
        let plan = match ratio {
            1 => THROUGH,
            2 => 1,
            4 => 2,
            8 => 3,
            16 => 4,
            6 => SIX,
            12 => TWELVE,
            _ => return Err(ConfigError::OversamplingRatio { ratio }),
        };
        Ok(Self {
            ratio: ratio as usize,
            tables: &TABLES,
            plan,
            ring: [Duo([0; 2]); 2 * W1],
            pos: 0,
            ring2: [0; 2 * S2],
            pos2: 0,
            ring3: [0; 2 * S3],
            pos3: 0,
            ring4: [0; 2 * S4],
            pos4: 0,
            ring_t: [0; 2 * ST],
            pos_t: 0,
            clamped: 0,
        })
    }

    /// Output samples a input sample.
    pub const fn ratio(&self) -> usize {
        self.ratio
    }

    /// Group delay at the update rate, in updates: input sample `m` is
    /// centred on output `m x ratio + delay_updates()`. Each stage
    /// multiplies the delay so far by its factor and adds its own: `2K - 1`
    /// for a half-band, `3P - 1` for the third band. 69 at 2x, 149 at 4x,
    /// 227 at 6x, 305 at 8x, 461 at 12x, 615 at 16x.
    pub const fn delay_updates(&self) -> u32 {
        const fn half(d: u32, k: usize) -> u32 {
            d * 2 + (2 * STAGE_PAIRS[k] as u32 - 1)
        }
        const fn third(d: u32) -> u32 {
            d * 3 + (3 * P3 as u32 - 1)
        }
        match self.plan {
            SIX => third(half(0, 0)),
            TWELVE => half(third(half(0, 0)), 2),
            n => {
                let mut d = 0u32;
                let mut k = 0;
                while k < n as usize {
                    d = half(d, k);
                    k += 1;
                }
                d
            }
        }
    }

    /// Multiply-accumulates per input sample (one per coefficient pair,
    /// or per sum or difference pair of the third band, and computed
    /// output); divide by [`Oversampler::ratio`] for the count per update.
    /// 35 at 2x, 47 at 4x, 63 at 6x, 63 at 8x, 87 at 12x, 87 at 16x.
    pub const fn macs_per_input(&self) -> u32 {
        let third = (2 * P3 * NT) as u32;
        match self.plan {
            SIX => K1 as u32 + third,
            TWELVE => K1 as u32 + third + (K3 * NB) as u32,
            n => {
                let mut m = 0u32;
                let mut k = 0;
                while k < n as usize {
                    m += (STAGE_PAIRS[k] as u32) << k;
                    k += 1;
                }
                m
            }
        }
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
        self.ring = [Duo([0; 2]); 2 * W1];
        self.pos = 0;
        self.ring2 = [0; 2 * S2];
        self.pos2 = 0;
        self.ring3 = [0; 2 * S3];
        self.pos3 = 0;
        self.ring4 = [0; 2 * S4];
        self.pos4 = 0;
        self.ring_t = [0; 2 * ST];
        self.pos_t = 0;
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
    // Not inlined: the stages are inlined into it (about 5.8 KB of
    // Cortex-M4 code for all ratios; keeping stage 1 a call instead saves
    // 2.3 KB and costs 0.9 instructions an update at 16x), not worth
    // duplicating at each call site.
    #[inline(never)]
    pub fn push(&mut self, x: i32, out: &mut [i32; MAX_RATIO]) {
        if self.plan == THROUGH {
            out[0] = x;
            return;
        }
        let mut flags = 0u32;
        let plan = self.plan;
        let tabs = self.tables;
        let (ring, pos) = (&mut self.ring, &mut self.pos);
        let (r2, p2) = (&mut self.ring2, &mut self.pos2);
        let (r3, p3) = (&mut self.ring3, &mut self.pos3);
        let (r4, p4) = (&mut self.ring4, &mut self.pos4);
        let (rt, pt) = (&mut self.ring_t, &mut self.pos_t);
        const L2: usize = W2 - 1 + N2;
        const L3: usize = W3 - 1 + N3;
        const L4: usize = W4 - 1 + N4;
        const LT: usize = W3X - 1 + NT;
        const LB: usize = W3 - 1 + NB;
        // The common 16x path is tested first.
        match plan {
            4 => {
                if let (Some(t2), Some(t3), Some(t4)) = (
                    ring_tail::<S2, N2, { 2 * S2 }>(r2, *p2),
                    ring_tail::<S3, N3, { 2 * S3 }>(r3, *p3),
                    ring_tail::<S4, N4, { 2 * S4 }>(r4, *p4),
                ) {
                    run_head::<1>(ring, pos, x, tabs, t2, &mut flags);
                    run_ring::<K2, W2, N2, S2, { 2 * S2 }, L2, 4, 1>(
                        r2, p2, &tabs.s2, t3, &mut flags,
                    );
                    run_ring::<K3, W3, N3, S3, { 2 * S3 }, L3, 8, 1>(
                        r3, p3, &tabs.s3, t4, &mut flags,
                    );
                    run_ring::<K4, W4, N4, S4, { 2 * S4 }, L4, 16, 2>(
                        r4, p4, &tabs.s4, out, &mut flags,
                    );
                }
            }
            3 => {
                if let (Some(t2), Some(t3), Some(d)) = (
                    ring_tail::<S2, N2, { 2 * S2 }>(r2, *p2),
                    ring_tail::<S3, N3, { 2 * S3 }>(r3, *p3),
                    out.first_chunk_mut::<8>(),
                ) {
                    run_head::<1>(ring, pos, x, tabs, t2, &mut flags);
                    run_ring::<K2, W2, N2, S2, { 2 * S2 }, L2, 4, 1>(
                        r2, p2, &tabs.s2, t3, &mut flags,
                    );
                    run_ring::<K3, W3, N3, S3, { 2 * S3 }, L3, 8, 2>(
                        r3, p3, &tabs.s3, d, &mut flags,
                    );
                }
            }
            2 => {
                if let (Some(t2), Some(d)) = (
                    ring_tail::<S2, N2, { 2 * S2 }>(r2, *p2),
                    out.first_chunk_mut::<4>(),
                ) {
                    run_head::<1>(ring, pos, x, tabs, t2, &mut flags);
                    run_ring::<K2, W2, N2, S2, { 2 * S2 }, L2, 4, 2>(
                        r2, p2, &tabs.s2, d, &mut flags,
                    );
                }
            }
            1 => {
                if let Some(d) = out.first_chunk_mut::<2>() {
                    run_head::<2>(ring, pos, x, tabs, d, &mut flags);
                }
            }
            SIX => {
                if let (Some(t), Some(d)) = (
                    ring_tail::<ST, NT, { 2 * ST }>(rt, *pt),
                    out.first_chunk_mut::<6>(),
                ) {
                    run_head::<1>(ring, pos, x, tabs, t, &mut flags);
                    run_third::<NT, ST, { 2 * ST }, LT, 6, 2>(
                        rt, pt, &tabs.sum, &tabs.diff, d, &mut flags,
                    );
                }
            }
            _ => {
                // TWELVE.
                if let (Some(t), Some(b), Some(d)) = (
                    ring_tail::<ST, NT, { 2 * ST }>(rt, *pt),
                    ring_tail::<SB, NB, { 2 * S2 }>(r2, *p2),
                    out.first_chunk_mut::<12>(),
                ) {
                    run_head::<1>(ring, pos, x, tabs, t, &mut flags);
                    run_third::<NT, ST, { 2 * ST }, LT, 6, 1>(
                        rt, pt, &tabs.sum, &tabs.diff, b, &mut flags,
                    );
                    run_ring::<K3, W3, NB, SB, { 2 * S2 }, LB, 12, 2>(
                        r2, p2, &tabs.s3, d, &mut flags,
                    );
                }
            }
        }
        if flags != 0 {
            self.clamped = self.clamped.wrapping_add(1);
        }
    }
}
