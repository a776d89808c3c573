//! Requantiser: a high count with [`FRAC_BITS`] fraction bits becomes a
//! whole number of ticks, with the rounding error shaped out of the audio
//! band by error feedback and, optionally, TPDF dither.
//!
//! # Loop
//! For each update, with `v` the high count (Q16 ticks) after the input
//! clamp, and the NTF's integer coefficients `c`, `d` (see [`crate::ntf`]):
//!
//! ```text
//! u    = v + round(sum c_i s[n-i])          feedback (i64 accumulation)
//! q    = floor(u + dither + 1/2)             the tick written
//! e    = q - u                               total error, Q16
//! s[n] = e - round(sum d_i s[n-i])           poles (IIR NTFs only)
//! ```
//!
//! so that `q - v = NTF(z) e`, exactly up to the 2^-17-tick roundings of
//! the two sums.
//!
//! # Cost
//! [`Requantiser::process`] on a Cortex-M4, on passes of 64 updates as the
//! modulator calls it (benches/cortex-m4): about 12 instructions an update
//! for plain rounding, 30 for [`ShaperSpec::new`]`(3)` and 43 for
//! [`ShaperSpec::new`]`(5)` (the figures move by a few instructions with
//! code placement: `block-requant-*` of `./run-check.sh` there).
//!
//! # No overload, by construction
//! The quantiser's own rounding error `q - (u + dither)` is within half a
//! tick whenever `u + dither` stays inside `[low - 1/2, high + 1/2)`. The
//! feedback `u - v` is bounded by `(sum|h| - 1) * max|e|` (plus the tiny
//! sum roundings), with `max|e|` = 1/2 tick, or 3/2 with dither of at most
//! 1 tick. So the input clamp narrows the range by that *headroom* (and the
//! dither peak) on each side, the shaped output can never leave
//! `[low, high]`, and the error never grows: a clamped input is counted
//! and the shaper carries on. A last guard on `q` counts
//! [`ClampCounts::overload`], which the proof says stays 0 (tests check).
//!
//! [`Requantiser::max_modulation`] gives the largest |x| (fraction of full
//! scale) that passes unclamped.

use crate::dither::{Tpdf, TPDF_PEAK_Q16};
use crate::edge::FRAC_BITS;
use crate::error::ConfigError;
use crate::ntf::{Ntf, NtfPoles, NtfSpec, NtfZeros, COEF_FRAC_BITS, MAX_TAPS};
use crate::timer::Timer;

/// Clamp counts of a requantiser, in updates.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ClampCounts {
    /// Updates whose high count was raised to the lowest allowed.
    pub low: u32,
    /// Updates whose high count was lowered to the highest allowed.
    pub high: u32,
    /// Updates where the shaped tick itself had to be clamped: never, by
    /// the headroom bound (a non-zero count is a bug).
    pub overload: u32,
}

/// How the rounding error is shaped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ShaperSpec {
    /// Noise-shaper order: zeros in the audio band, 0..=6; 0 is plain
    /// rounding.
    pub order: u8,
    /// Add TPDF dither (+/- 1 tick) before rounding, inside the loop.
    pub dither: bool,
    /// Placement of the in-band zeros.
    pub zeros: NtfZeros,
    /// Zeros at half the update rate, 0..=4: 3 for a half bridge or a
    /// 2-level full bridge with two updates a period (2 for orders below
    /// 3); 0 otherwise.
    pub half_rate_zeros: u8,
    /// Pole set (FIR or a bound on sum |h|).
    pub poles: NtfPoles,
}

impl ShaperSpec {
    /// Plain rounding, no dither.
    pub const ROUND: Self = Self {
        order: 0,
        dither: false,
        zeros: NtfZeros::Band,
        half_rate_zeros: 0,
        poles: NtfPoles::None,
    };

    /// `order` band-optimised zeros, no zeros at half the update rate,
    /// poles for sum |h| <= 8, no dither: the best measured choice for a
    /// 3-level full bridge, or for one update a period. For a half bridge
    /// or a 2-level full bridge with two updates a period add
    /// [`ShaperSpec::with_half_rate_zeros`]`(3)` (see [`crate::ntf`]); with
    /// dither, sum |h| <= 8 costs 12 ticks of headroom a side.
    pub const fn new(order: u8) -> Self {
        Self {
            order,
            dither: false,
            zeros: NtfZeros::Band,
            half_rate_zeros: 0,
            poles: NtfPoles::Sum8,
        }
    }

    /// Same with dither on or off.
    pub const fn with_dither(mut self, dither: bool) -> Self {
        self.dither = dither;
        self
    }

    /// Same with another in-band zero placement.
    pub const fn with_zeros(mut self, zeros: NtfZeros) -> Self {
        self.zeros = zeros;
        self
    }

    /// Same with `k` zeros at half the update rate.
    pub const fn with_half_rate_zeros(mut self, k: u8) -> Self {
        self.half_rate_zeros = k;
        self
    }

    /// Same with another pole set.
    pub const fn with_poles(mut self, poles: NtfPoles) -> Self {
        self.poles = poles;
        self
    }

    /// The NTF part of the spec.
    pub const fn ntf_spec(&self) -> NtfSpec {
        NtfSpec {
            order: self.order,
            zeros: self.zeros,
            half_rate_zeros: self.half_rate_zeros,
            poles: self.poles,
        }
    }
}

/// Rounds high counts to ticks within `[low, high]`, shaping the error.
#[derive(Clone, Debug)]
pub struct Requantiser {
    /// Lowest input accepted (Q16).
    in_low: i32,
    /// Highest input accepted (Q16).
    in_high: i32,
    /// Output range in ticks (the guard).
    q_low: i32,
    q_high: i32,
    ntf: Ntf,
    iir: bool,
    dither: bool,
    prng: Tpdf,
    state: [i32; MAX_TAPS],
    /// The block kernel may hold the state scaled by 2^[`SCALE_BITS`]
    /// (bounds in [`Requantiser::try_new`]).
    scaled: bool,
    headroom_q16: i32,
    top: u32,
    counts: ClampCounts,
}

const HALF: i32 = 1 << (FRAC_BITS - 1);
const COEF_HALF: i64 = 1 << (COEF_FRAC_BITS - 1);
/// Largest filter whose block loop runs in groups of `M` updates with the
/// state as a ring (see [`kernel`]): the loop body is then repeated `M`
/// times, about 10 KB of Cortex-M4 code for the sizes 2..=6 together, so
/// larger filters (half-rate zeros on top of order 4 or more) move the
/// state instead.
const RING_MAX_TAPS: usize = 6;
/// `32 - COEF_FRAC_BITS`: with the state scaled by this many bits, a sum's
/// rounded value is the high word of the 64-bit accumulator.
const SCALE_BITS: u32 = 32 - COEF_FRAC_BITS;

impl Requantiser {
    /// A requantiser for `timer` whose output stays within `[low, high]`
    /// ticks. The NTF is designed for the timer's update rate.
    ///
    /// # Errors
    /// [`ConfigError::NoUsableDuty`] if `low > high`; the NTF design errors
    /// of [`Ntf::design`]; [`ConfigError::ShaperHeadroom`] when the headroom
    /// (plus dither) leaves no input range; [`ConfigError::ShaperState`] when
    /// the filter state could overflow its format.
    pub fn try_new(
        timer: &Timer,
        low: u32,
        high: u32,
        shaper: ShaperSpec,
    ) -> Result<Self, ConfigError> {
        if low > high {
            return Err(ConfigError::NoUsableDuty { low, high });
        }
        let ntf = Ntf::design(shaper.ntf_spec(), timer.update_rate_hz())?;
        let dither_peak = if shaper.dither { TPDF_PEAK_Q16 } else { 0 };
        // Largest |e| = |q - u|, Q16: rounding half a tick plus the dither.
        let e_max = (HALF + dither_peak) as f64;
        let s = ntf.sum_abs_h();
        let w_max = if ntf.taps() == 0 {
            0.0
        } else {
            // (S - 1) max|e| plus the sums' roundings (S/2 LSB) and margin.
            (s - 1.0) * e_max + s + 2.0
        };
        // Whole Q16 LSBs at or above the bound.
        let room = if ntf.taps() == 0 { 0 } else { w_max as i64 + 1 } + dither_peak as i64;
        let available = (high - low) / 2;
        let needs = ((room + (1 << FRAC_BITS) - 1) >> FRAC_BITS) as u32;
        let in_low = ((low as i64) << FRAC_BITS) - HALF as i64 + room;
        let in_high = ((high as i64) << FRAC_BITS) + HALF as i64 - 1 - room;
        if in_low > in_high || in_high > i32::MAX as i64 / 2 {
            return Err(ConfigError::ShaperHeadroom { needs, available });
        }
        // State |s| <= (max|e| + 1) sum|g|; products and sums must fit.
        let s_max = (e_max + 1.0) * ntf.sum_abs_g() + 1.0;
        let coef_sum: f64 = ntf
            .feedback_coefs()
            .iter()
            .chain(ntf.pole_coefs())
            .map(|&c| (c as f64).abs())
            .sum();
        if !(s_max < (1u64 << 30) as f64 && coef_sum * s_max < (1u64 << 61) as f64) {
            return Err(ConfigError::ShaperState {
                order: shaper.order,
                half_rate_zeros: shaper.half_rate_zeros,
            });
        }
        // The block kernel's scaled form (see `kernel`): the state times
        // 2^SCALE_BITS within i32, the scaled sums plus v 2^32 within i64.
        let scaled = s_max * ((1 << SCALE_BITS) as f64) < (1u64 << 31) as f64
            && coef_sum * s_max < (1u64 << 54) as f64;
        Ok(Self {
            in_low: in_low as i32,
            in_high: in_high as i32,
            q_low: low as i32,
            q_high: high as i32,
            iir: !ntf.is_fir(),
            ntf,
            dither: shaper.dither,
            prng: Tpdf::new(0),
            state: [0; MAX_TAPS],
            scaled,
            headroom_q16: room as i32,
            top: timer.top(),
            counts: ClampCounts::default(),
        })
    }

    /// The NTF as implemented.
    pub const fn ntf(&self) -> &Ntf {
        &self.ntf
    }

    /// Headroom kept on each side of the range, Q16 ticks: the largest
    /// |u + dither - v| the shaper can produce.
    pub const fn headroom_q16(&self) -> i32 {
        self.headroom_q16
    }

    /// Headroom in whole ticks, rounded up.
    pub const fn headroom_ticks(&self) -> u32 {
        ((self.headroom_q16 + (1 << FRAC_BITS) - 1) >> FRAC_BITS) as u32
    }

    /// Lowest and highest input (Q16 high count) passed without clamping.
    pub const fn input_range_q16(&self) -> (i32, i32) {
        (self.in_low, self.in_high)
    }

    /// Largest modulation |x| (fraction of full scale, high count
    /// `(1 + x)/2 * top`) that passes without clamping on both sides, at
    /// most 1; 0 if the range does not contain the mid point.
    pub fn max_modulation(&self) -> f32 {
        let mid = (self.top as i64) << (FRAC_BITS - 1);
        let room = (self.in_high as i64 - mid).min(mid - self.in_low as i64);
        if room <= 0 || self.top == 0 {
            0.0
        } else {
            (room as f64 / mid as f64).min(1.0) as f32
        }
    }

    /// Clamp counts so far.
    pub const fn counts(&self) -> ClampCounts {
        self.counts
    }

    /// Clear the clamp counts.
    pub fn clear_counts(&mut self) {
        self.counts = ClampCounts::default();
    }

    /// Clear the filter state (not the counts, not the dither sequence).
    pub fn reset(&mut self) {
        self.state = [0; MAX_TAPS];
    }

    /// Restart the dither sequence from `seed` (give each channel its own).
    pub fn reseed(&mut self, seed: u32) {
        self.prng = Tpdf::new(seed);
    }

    /// Clamp (counted), shape and round to a whole tick.
    #[inline]
    pub fn quantise(&mut self, v: i32) -> u32 {
        self.quantise_traced(v).0
    }

    /// [`Requantiser::quantise`], also returning the quantiser's own
    /// rounding error `q - (u + dither)` in Q16 ticks, within
    /// `(-1/2, +1/2]` tick unless the shaper overloads.
    #[inline]
    pub fn quantise_traced(&mut self, v: i32) -> (u32, i32) {
        macro_rules! dispatch {
            ($($n:literal)*) => {
                match (self.ntf.taps(), self.iir) {
                    $(($n, false) => self.step::<$n, false>(v),
                      ($n, true) => self.step::<$n, true>(v),)*
                    _ => self.step::<0, false>(v),
                }
            };
        }
        dispatch!(1 2 3 4 5 6 7 8 9 10)
    }

    /// Requantise a block in place: high counts (Q16 ticks) in, whole ticks
    /// out (as `i32`, within `[low, high]`). Bit-exact with
    /// [`Requantiser::quantise`] on each value in turn; the filter is
    /// chosen once and its state kept in registers for the block.
    pub fn process(&mut self, block: &mut [i32]) {
        macro_rules! dispatch {
            ($($n:literal)*) => {
                match (self.ntf.taps(), self.iir) {
                    $(($n, false) => self.run::<$n, false>(block),
                      ($n, true) => self.run::<$n, true>(block),)*
                    _ => self.run::<0, false>(block),
                }
            };
        }
        dispatch!(1 2 3 4 5 6 7 8 9 10)
    }

    /// The input clamp, counted.
    #[inline(always)]
    fn clamp_input(in_low: i32, in_high: i32, v: i32, counts: &mut ClampCounts) -> i32 {
        // One unsigned compare for the usual case (in_low <= in_high).
        if (v.wrapping_sub(in_low) as u32) <= (in_high.wrapping_sub(in_low) as u32) {
            v
        } else if v < in_low {
            counts.low = counts.low.wrapping_add(1);
            in_low
        } else if v > in_high {
            counts.high = counts.high.wrapping_add(1);
            in_high
        } else {
            v
        }
    }

    /// Coefficients as `M`-element arrays (no poles: `d` zero), negated
    /// for the scaled kernel (see [`kernel`]).
    #[inline(always)]
    fn arrays<const M: usize, const IIR: bool>(&self) -> Coefs<M> {
        const { assert!(M <= MAX_TAPS) };
        let c = self.ntf.feedback_coefs();
        let d = self.ntf.pole_coefs();
        Coefs {
            round: core::hint::black_box(1u32 << 31),
            c: core::array::from_fn(|i| -c[i]),
            d: core::array::from_fn(|i| if IIR { -d[i] } else { 0 }),
        }
    }

    /// One update with a filter of `M` taps, with or without poles: the
    /// same arithmetic as [`kernel`], reading coefficients and state in
    /// place (cheaper per call than copying them into registers).
    #[inline(always)]
    fn step<const M: usize, const IIR: bool>(&mut self, v: i32) -> (u32, i32) {
        const { assert!(M <= MAX_TAPS) };
        let v = Self::clamp_input(self.in_low, self.in_high, v, &mut self.counts);
        let c = self.ntf.feedback_coefs();
        let d = self.ntf.pole_coefs();
        // The state is read once and written back shifted by one (no
        // overlapping copy, which would become a memmove call).
        let mut st = [0i32; M];
        let mut acc_c = COEF_HALF;
        let mut acc_d = COEF_HALF;
        for i in 0..M {
            st[i] = self.state[i];
            let s = st[i] as i64;
            acc_c += c[i] as i64 * s;
            if IIR {
                acc_d += d[i] as i64 * s;
            }
        }
        let u = v + (acc_c >> COEF_FRAC_BITS) as i32;
        let dith = if self.dither { self.prng.next_q16() } else { 0 };
        let ud = u + dith;
        // (Not `guard`: this path is inlined into `process` for unscaled
        // filters, and the shared form there costs the scaled block loops
        // about 4 instructions an update on a Cortex-M4.)
        let mut q = (ud + HALF) >> FRAC_BITS;
        if q < self.q_low {
            self.counts.overload = self.counts.overload.wrapping_add(1);
            q = self.q_low;
        } else if q > self.q_high {
            self.counts.overload = self.counts.overload.wrapping_add(1);
            q = self.q_high;
        }
        let r = (q << FRAC_BITS) - ud;
        if M > 0 {
            let e = r + dith;
            let sn = if IIR {
                e - (acc_d >> COEF_FRAC_BITS) as i32
            } else {
                e
            };
            self.state[0] = sn;
            self.state[1..M].copy_from_slice(&st[..M.saturating_sub(1)]);
        }
        (q as u32, r)
    }

    /// A block with a filter of `M` taps, with or without poles; dither
    /// decided once a block.
    #[inline(always)]
    fn run<const M: usize, const IIR: bool>(&mut self, block: &mut [i32]) {
        // No state, nothing to scale (M is a constant: no test left).
        // A filter whose state does not fit the scaled form (large
        // sum|g|, not met by the shapers `ShaperSpec::new` gives) takes the
        // per-value path, the same arithmetic: a kernel of its own would
        // double this function's code (about 25 KB on a Cortex-M4) for a
        // case that is rare.
        match (self.dither, self.scaled) {
            (true, _) if M == 0 => self.run_round::<true>(block),
            (false, _) if M == 0 => self.run_round::<false>(block),
            (true, true) => self.run_d::<M, IIR, true>(block),
            (false, true) => self.run_d::<M, IIR, false>(block),
            (_, false) => {
                for h in block.iter_mut() {
                    *h = self.step::<M, IIR>(*h).0 as i32;
                }
            }
        }
    }

    /// Plain rounding of a block (no filter), with dither on or off.
    #[inline(always)]
    fn run_round<const DITHER: bool>(&mut self, block: &mut [i32]) {
        let (in_low, in_high) = (self.in_low, self.in_high);
        let (q_low, q_high) = (self.q_low, self.q_high);
        let mut counts = self.counts;
        let mut prng = self.prng;
        for h in block.iter_mut() {
            let v = Self::clamp_input(in_low, in_high, *h, &mut counts);
            let dith = if DITHER { prng.next_q16() } else { 0 };
            *h = guard(
                (v + dith + HALF) >> FRAC_BITS,
                q_low,
                q_high,
                &mut counts.overload,
            );
        }
        self.counts = counts;
        self.prng = prng;
    }

    /// [`Requantiser::run`] with dither on or off, the state held scaled
    /// (see [`kernel`]).
    #[inline(always)]
    fn run_d<const M: usize, const IIR: bool, const DITHER: bool>(&mut self, block: &mut [i32]) {
        let k = self.arrays::<M, IIR>();
        // The scaled kernel holds -s 2^SCALE_BITS (exact both ways).
        let mut st: [i32; M] = core::array::from_fn(|i| -(self.state[i] << SCALE_BITS));
        let (in_low, in_high) = (self.in_low, self.in_high);
        let range = (self.q_low, self.q_high);
        let mut counts = self.counts;
        let mut prng = self.prng;
        // One update (a macro: a closure is not inlined here).
        macro_rules! one {
            ($h:expr, $at:expr) => {{
                let v = Self::clamp_input(in_low, in_high, *$h, &mut counts);
                let dith = if DITHER { prng.next_q16() } else { 0 };
                *$h = kernel::<M, IIR>(&mut st, $at, &k, v, dith, range, &mut counts.overload);
            }};
        }
        // Groups of M updates with the state as a ring (see `kernel`): no
        // moves, each state value stays in its register for the group.
        let (groups, rest) = if M > 1 && M <= RING_MAX_TAPS {
            block.as_chunks_mut::<M>()
        } else {
            (&mut [][..], block)
        };
        const { assert!(RING_MAX_TAPS <= 6) };
        for g in groups {
            macro_rules! ring {
                ($($j:literal)*) => {$(
                    if $j < M {
                        one!(&mut g[$j], Some((M - $j) % M));
                    }
                )*};
            }
            ring!(0 1 2 3 4 5);
        }
        for h in rest {
            one!(h, None);
        }
        for (d, &s) in self.state.iter_mut().zip(&st) {
            *d = -(s >> SCALE_BITS);
        }
        self.counts = counts;
        self.prng = prng;
    }
}

/// The last guard on a tick, counted in `overload`.
#[inline(always)]
fn guard(q: i32, q_low: i32, q_high: i32, overload: &mut u32) -> i32 {
    // One unsigned compare for the usual case (q_low <= q_high).
    if (q.wrapping_sub(q_low) as u32) <= (q_high.wrapping_sub(q_low) as u32) {
        q
    } else if q < q_low {
        *overload = overload.wrapping_add(1);
        q_low
    } else if q > q_high {
        *overload = overload.wrapping_add(1);
        q_high
    } else {
        q
    }
}

/// Filter coefficients of one kernel size.
struct Coefs<const M: usize> {
    /// 2^31, the rounding term of the scaled sums, passed through
    /// `black_box`: folded as a constant, the compiler computes the first
    /// product twice (SMULL, then SMMLAR for the rounded high word).
    round: u32,
    c: [i32; M],
    d: [i32; M],
}

/// The per-update loop of [`Requantiser::process`]: feedback, rounding
/// with dither, the guard, and the state update, the same arithmetic as
/// [`Requantiser::quantise`]. Returns the tick.
///
/// `st` holds the state times `-2^`[`SCALE_BITS`] and `k` the
/// negated coefficients, so that `floor((S + 2^24) / 2^25)` for a sum `S`
/// of products is the high word of `2^31 + 2^7 S`, one multiply-accumulate
/// a product on a Cortex-M4 (SMLAL). With `e = q - u` the total error:
///
/// ```text
/// u      = hi(v 2^32 + 2^31 + sum (-c_i)(-2^7 s_i))
/// -s[n]  = -e + round(sum d_i s[n-i])
///        = hi(-e 2^32 + 2^31 + sum (-d_i)(-2^7 s_i))
/// ```
///
/// the same values, exactly, when the scaled state fits `i32` and the sums
/// `i64` (checked at configuration; a filter that does not fit takes
/// [`Requantiser::quantise`]'s per-value path instead). Negating the state lets the pole sum
/// start from `-e` in the high word, so neither sum needs a separate add
/// or subtract of its rounded value.
///
/// `at`: `None`, `st[i]` is `s[n-1-i]` and the array is shifted; `Some(p)`
/// (a constant where it is used), a ring with `s[n-1-i]` in
/// `st[(p + i) % M]`, the new value written over the oldest, after which
/// the caller goes on at `(p + M - 1) % M`: after `M` updates from `p = 0`
/// the ring is back in shifted order, and no value has moved.
#[inline(always)]
fn kernel<const M: usize, const IIR: bool>(
    st: &mut [i32; M],
    at: Option<usize>,
    k: &Coefs<M>,
    v: i32,
    dith: i32,
    (q_low, q_high): (i32, i32),
    overload: &mut u32,
) -> i32 {
    // `hi << 32 | 2^31`, with the 2^31 hidden from the optimiser so the
    // first product is one SMLAL onto it.
    let start = |hi: i32| (((hi as u32 as u64) << 32) | k.round as u64) as i64;
    // s[n-1-i], the state shifted or the ring read from `at`.
    let ix = |i: usize| match at {
        None => i,
        Some(p) => (p + i) % M,
    };
    let mut acc_c = start(v);
    for i in 0..M {
        acc_c += k.c[i] as i64 * st[ix(i)] as i64;
    }
    let u = (acc_c >> 32) as i32;
    let q = guard((u + dith + HALF) >> FRAC_BITS, q_low, q_high, overload);
    if M > 0 {
        // -e, then -s[n] (see above).
        let ne = u - (q << FRAC_BITS);
        let sn = if IIR {
            let mut acc_d = start(ne);
            for i in 0..M {
                acc_d += k.d[i] as i64 * st[ix(i)] as i64;
            }
            ((acc_d >> 32) as i32) << SCALE_BITS
        } else {
            ne << SCALE_BITS
        };
        // A new array rather than shifting in place: the shift loop would
        // become a memmove and keep the state in memory.
        match at {
            None => {
                let old = *st;
                *st = core::array::from_fn(|i| if i == 0 { sn } else { old[i - 1] });
            }
            // The oldest value's slot.
            Some(p) => st[(p + M - 1) % M] = sn,
        }
    }
    q
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rounds_and_clamps() {
        let t = Timer::try_new(crate::timer::TimerSpec::new(98.304e6, 384e3)).unwrap();
        let mut q = Requantiser::try_new(&t, 3, 120, ShaperSpec::ROUND).unwrap();
        assert_eq!(q.quantise((10 << FRAC_BITS) + HALF - 1), 10);
        assert_eq!(q.quantise((10 << FRAC_BITS) + HALF), 11);
        assert_eq!(q.quantise(0), 3);
        assert_eq!(q.quantise(128 << FRAC_BITS), 120);
        assert_eq!(q.quantise((120 << FRAC_BITS) + HALF - 1), 120);
        // Just below low - 1/2 rounds to low - 1: clamped and counted.
        assert_eq!(q.quantise((3 << FRAC_BITS) - HALF - 1), 3);
        assert_eq!(
            q.counts(),
            ClampCounts {
                low: 2,
                high: 1,
                overload: 0
            }
        );
    }

    #[test]
    fn shaped_block_kernel_uses_the_scaled_state() {
        // The bit-exactness of the scaled block path against `quantise` is
        // tested in tests/shaper.rs (block_and_sample_paths_are_bit_exact);
        // this checks that those shapers do take that path.
        let t = Timer::try_new(crate::timer::TimerSpec::new(98.304e6, 384e3)).unwrap();
        for order in [1, 3, 5] {
            for dither in [false, true] {
                let spec = ShaperSpec::new(order).with_dither(dither);
                let q = Requantiser::try_new(&t, 2, 126, spec).unwrap();
                assert!(q.scaled, "order {order} dither {dither}");
            }
        }
    }

    #[test]
    fn unscaled_block_path_matches_quantise() {
        // A filter that cannot hold its state scaled takes the per-value
        // path in `process`: the same words as `quantise` one by one
        // (definition). Forced here on shapers that could be scaled.
        let t = Timer::try_new(crate::timer::TimerSpec::new(98.304e6, 384e3)).unwrap();
        for order in [2, 5] {
            let spec = ShaperSpec::new(order).with_dither(true);
            let mut block = Requantiser::try_new(&t, 2, 126, spec).unwrap();
            block.scaled = false;
            let mut one = block.clone();
            let mut x = 0x1234_5678u32;
            let mut buf = [0i32; 16];
            for _ in 0..64 {
                for h in buf.iter_mut() {
                    x ^= x << 13;
                    x ^= x >> 17;
                    x ^= x << 5;
                    *h = (20 << FRAC_BITS) + (x % (90 << FRAC_BITS)) as i32;
                }
                let want: [i32; 16] = core::array::from_fn(|i| one.quantise(buf[i]) as i32);
                block.process(&mut buf);
                assert_eq!(buf, want, "order {order}");
            }
        }
    }

    #[test]
    fn ring_groups_match_quantise_at_every_block_length() {
        // Source: the contract of `process`, the same words and counts as
        // `quantise` value by value. Blocks of 0..=13 values give every
        // remainder after the ring groups of 2..=6 taps; 5 + 3 taps takes
        // the shifted path. Inputs over the whole range, so clamps occur.
        let t = Timer::try_new(crate::timer::TimerSpec::new(98.304e6, 384e3)).unwrap();
        let specs = [2, 3, 4, 5, 6]
            .map(ShaperSpec::new)
            .into_iter()
            .chain([ShaperSpec::new(5).with_half_rate_zeros(3)]);
        for spec in specs {
            for dither in [false, true] {
                let spec = spec.with_dither(dither);
                let mut block = Requantiser::try_new(&t, 2, 126, spec).unwrap();
                // (Order 6 with dither does not fit the scaled form.)
                assert!(block.scaled || dither, "{spec:?}");
                block.reseed(3);
                let mut one = block.clone();
                let mut x = 0x9e37_79b9u32;
                for len in (0..=13).cycle().take(70) {
                    let mut buf = [0i32; 13];
                    for h in buf[..len].iter_mut() {
                        x ^= x << 13;
                        x ^= x >> 17;
                        x ^= x << 5;
                        *h = (x % (130 << FRAC_BITS)) as i32;
                    }
                    let want: [i32; 13] = core::array::from_fn(|i| {
                        if i < len {
                            one.quantise(buf[i]) as i32
                        } else {
                            0
                        }
                    });
                    block.process(&mut buf[..len]);
                    assert_eq!(buf, want, "{spec:?} len {len}");
                }
                assert_eq!(block.counts(), one.counts(), "{spec:?}");
                assert!(one.counts().low > 0 && one.counts().high > 0);
            }
        }
    }

    #[test]
    fn headroom_shrinks_modulation() {
        // FIR (1 - z^-1)^2: sum |h| = 4 (REFERENCES.md section 4), so the
        // feedback is within 1.5 ticks and each side loses 1.5 ticks (+ a
        // few LSB of rounding margin) over plain rounding.
        let t = Timer::try_new(crate::timer::TimerSpec::new(98.304e6, 384e3)).unwrap();
        let round = Requantiser::try_new(&t, 0, 128, ShaperSpec::ROUND).unwrap();
        let spec = ShaperSpec::new(2)
            .with_zeros(NtfZeros::Dc)
            .with_poles(NtfPoles::None);
        let sh = Requantiser::try_new(&t, 0, 128, spec).unwrap();
        let lost = sh.input_range_q16().0 - round.input_range_q16().0 - (3 << (FRAC_BITS - 1));
        assert!((0..16).contains(&lost), "lost {lost}");
        assert_eq!(sh.headroom_ticks(), 2);
        assert!(sh.max_modulation() < round.max_modulation());
    }
}
