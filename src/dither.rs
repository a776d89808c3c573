//! TPDF dither from a small PRNG, in Q16 ticks.
//!
//! The generator is Marsaglia's 32-bit xorshift (shifts 13, 17, 5; G.
//! Marsaglia, "Xorshift RNGs", J. Statistical Software 8(14), 2003): full
//! period 2^32 - 1 over the non-zero states, three shifts and three XORs a
//! step, deterministic from its seed, so host and target give the same
//! sequence bit for bit.
//!
//! One step gives two 16-bit halves; their difference is triangular on
//! (-1, +1) tick: [`Tpdf::next_q16`] returns `lo - hi` in Q16 ticks, within
//! `[-65535, 65535]`, mean 0, variance 1/6 tick^2. Over a full period every
//! non-zero 32-bit word appears once, so the two halves are uniform and
//! independent up to the one missing pair (0, 0).
//!
//! ```
//! use ticktone::dither::Tpdf;
//! let mut d = Tpdf::new(1);
//! let x = d.next_q16();
//! assert!(x.abs() <= 65535);
//! ```

/// Largest |dither| in Q16 ticks (just under one tick).
pub const TPDF_PEAK_Q16: i32 = 0xFFFF;

/// A triangular-PDF dither source.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Tpdf {
    state: u32,
}

impl Tpdf {
    /// A source from `seed`; seeds are mixed so that small neighbouring
    /// seeds (channel numbers) give unrelated sequences, and 0 is allowed.
    pub const fn new(seed: u32) -> Self {
        // Odd-constant multiply (Knuth's 2654435761) then a fixed non-zero
        // offset: a bijection, and the result is never 0 for seed != m.
        let mut s = seed.wrapping_mul(0x9E37_79B1) ^ 0x2545_F491;
        if s == 0 {
            s = 0x2545_F491;
        }
        Self { state: s }
    }

    /// Next raw 32-bit output of the xorshift generator.
    #[inline(always)]
    pub fn next_u32(&mut self) -> u32 {
        let mut x = self.state;
        x ^= x << 13;
        x ^= x >> 17;
        x ^= x << 5;
        self.state = x;
        x
    }

    /// Next dither value: triangular on (-1, 1) tick, Q16.
    #[inline(always)]
    pub fn next_q16(&mut self) -> i32 {
        let x = self.next_u32();
        (x & 0xFFFF) as i32 - (x >> 16) as i32
    }
}
