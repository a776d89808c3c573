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
//! symmetric pair after a pre-add. Multiply-accumulates per input sample:
//! 35 at 2x, 47 at 4x, 63 at 8x, 87 at 16x (see
//! [`Oversampler::macs_per_input`]); per update 17.5, 11.75, 7.9 and 5.4.
//!
//! # Arithmetic (bit-exact, integer only)
//! - Input Q1.31. Delay lines hold Q2.30 (one guard bit), so the pre-add of
//!   a symmetric pair cannot overflow `i32`. The input's lowest bit is
//!   dropped (arithmetic shift; exact for 16- and 24-bit audio).
//! - Coefficients Q1.31 (`c x 2^31`), products summed in `i64`, starting at
//!   `2^31` so that taking the high word (`acc >> 32`, a Q3.29 value) rounds
//!   to nearest: the one rounding point of a stage.
//! - Saturation: each computed sample is saturated to full scale
//!   [-1, 1 - 2^-29] before it goes on (an interpolator can overshoot a
//!   full-scale input). Input samples whose interpolation saturated are
//!   counted ([`Oversampler::clamped`]). No stage can overflow before that
//!   point: every table's pair sum of `|c|` is below 1.5, checked at compile
//!   time, so `|acc| < 1.5 x 2^62` and the high word fits.
//! - Output Q1.31; computed samples have their two lowest bits zero.
//!
//! No floating point, no allocation, no panic path: windows are fixed-size
//! arrays taken at offsets the compiler can bound.

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
/// Linear delay lines of stages 2 to 4: history then the new inputs.
const L2: usize = W2 - 1 + N2;
const L3: usize = W3 - 1 + N3;
const L4: usize = W4 - 1 + N4;

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

/// Rounding offset: adding half of the high word's unit rounds to nearest.
const ROUND: i64 = 1 << 31;
/// Full scale in the Q3.29 high word.
const Q29_MIN: i32 = -(1 << 29);
const Q29_MAX: i32 = (1 << 29) - 1;

/// The computed (odd-phase) sample of a half-band stage from its window of
/// `W = 2K` inputs (Q2.30, oldest first): the Q3.29 high word, rounded.
#[inline(always)]
fn odd_phase<const K: usize, const W: usize>(w: &[i32; W], c: &[i32; K]) -> i32 {
    const { assert!(W == 2 * K) };
    let mut acc = ROUND;
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

/// Run a stage with a linear delay line over its `N` new inputs, writing
/// `M = 2N` outputs, then move the history to the front. Not inlined: each
/// stage reads its inputs from memory, so the compiler keeps every product
/// a 32 x 32 -> 64-bit multiply-accumulate instead of folding the previous
/// stage's scaling into wider constants.
#[inline(never)]
fn run_line<
    const K: usize,
    const W: usize,
    const N: usize,
    const LEN: usize,
    const M: usize,
    const SHIFT: u32,
>(
    line: &mut [i32; LEN],
    c: &[i32; K],
    dst: &mut [i32; M],
    flags: &mut u32,
) {
    const { assert!(LEN == W - 1 + N && M == 2 * N) };
    let mut f = 0u32;
    for (i, d) in dst.chunks_exact_mut(2).enumerate() {
        if let Some(w) = line.get(i..).and_then(|s| s.first_chunk::<W>()) {
            d.copy_from_slice(&stage_pair::<K, W, SHIFT>(w, c, &mut f));
        }
    }
    *flags |= f;
    for i in 0..W - 1 {
        line[i] = line[i + N];
    }
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
    line2: [i32; L2],
    line3: [i32; L3],
    line4: [i32; L4],
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
            line2: [0; L2],
            line3: [0; L3],
            line4: [0; L4],
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
        self.line2 = [0; L2];
        self.line3 = [0; L3];
        self.line4 = [0; L4];
    }

    /// Stage 1: take one input (Q1.31), return its `W1` newest inputs
    /// (Q2.30), oldest first.
    #[inline(always)]
    fn head(&mut self, x: i32) -> Option<&[i32; W1]> {
        let p = if self.pos < W1 { self.pos } else { 0 };
        self.pos = p + 1;
        let x = x >> 1;
        self.ring[p] = x;
        self.ring[p + W1] = x;
        self.ring.get(p + 1..).and_then(|s| s.first_chunk::<W1>())
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
        let Some(&w) = self.head(x) else { return };
        let (line2, line3, line4) = (&mut self.line2, &mut self.line3, &mut self.line4);
        if stages == 1 {
            if let Some(d) = out.first_chunk_mut::<2>() {
                *d = stage_pair::<K1, W1, 2>(&w, &STAGE1, &mut flags);
            }
        } else if let Some(t2) = line2.last_chunk_mut::<N2>() {
            *t2 = stage_pair::<K1, W1, 1>(&w, &STAGE1, &mut flags);
            if stages == 2 {
                if let Some(d) = out.first_chunk_mut::<4>() {
                    run_line::<K2, W2, N2, L2, 4, 2>(line2, &STAGE2, d, &mut flags);
                }
            } else if let Some(t3) = line3.last_chunk_mut::<N3>() {
                run_line::<K2, W2, N2, L2, 4, 1>(line2, &STAGE2, t3, &mut flags);
                if stages == 3 {
                    if let Some(d) = out.first_chunk_mut::<8>() {
                        run_line::<K3, W3, N3, L3, 8, 2>(line3, &STAGE3, d, &mut flags);
                    }
                } else if let Some(t4) = line4.last_chunk_mut::<N4>() {
                    run_line::<K3, W3, N3, L3, 8, 1>(line3, &STAGE3, t4, &mut flags);
                    run_line::<K4, W4, N4, L4, 16, 2>(line4, &STAGE4, out, &mut flags);
                }
            }
        }
        if flags != 0 {
            self.clamped = self.clamped.wrapping_add(1);
        }
    }
}
