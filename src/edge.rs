//! Edge solver: from the signal at the update rate to the *high count* of
//! each update, the compare value before rounding, with [`FRAC_BITS`]
//! fraction bits.
//!
//! Uniform sampling takes the sample at the start of the update slot:
//! `c = (1 + x) / 2 * top`. That is the regularly sampled PWM of the double
//! Fourier series literature, with its signal-dependent harmonics.
//!
//! ```
//! use ticktone::edge::{EdgeSolver, Sampling, FRAC_BITS};
//! use ticktone::timer::{Timer, TimerSpec, Edge};
//! // 256-tick period, trailing edge: x = +0.5 gives a high count of 192.
//! let t = Timer::try_new(TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Trailing)).unwrap();
//! let mut e = EdgeSolver::try_new(&t, Sampling::Uniform).unwrap();
//! assert_eq!(e.next(0x4000_0000) >> FRAC_BITS, 192);
//! ```

use crate::error::ConfigError;
use crate::timer::Timer;

/// Fraction bits of an edge position (high count) in ticks.
pub const FRAC_BITS: u32 = 16;

/// How the edge position is taken from the signal.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Sampling {
    /// The sample at the start of the update slot sets the edge.
    Uniform,
}

/// Turns one signal value a update into a high count (Q16 ticks).
#[derive(Clone, Debug)]
pub struct EdgeSolver {
    sampling: Sampling,
    top: u32,
}

impl EdgeSolver {
    /// A solver for this timer.
    ///
    /// # Errors
    /// Natural-sampling parameters out of range.
    pub fn try_new(timer: &Timer, sampling: Sampling) -> Result<Self, ConfigError> {
        Ok(Self {
            sampling,
            top: timer.top(),
        })
    }

    /// The sampling method.
    pub const fn sampling(&self) -> Sampling {
        self.sampling
    }

    /// Updates of delay from the newest signal value to the edge it sets.
    pub const fn delay_updates(&self) -> u32 {
        0
    }

    /// The high count for the next update from the newest signal value
    /// (Q1.31), in ticks with [`FRAC_BITS`] fraction bits, within
    /// `[0, top << FRAC_BITS]`.
    #[inline]
    pub fn next(&mut self, x: i32) -> i32 {
        match self.sampling {
            Sampling::Uniform => high_count(x, self.top),
        }
    }
}

/// `(1 + x) / 2 * top` in Q16 ticks for x in Q1.31: exact, no rounding
/// beyond the 16 fraction bits (truncation of at most 2^-16 tick).
#[inline(always)]
pub(crate) fn high_count(x: i32, top: u32) -> i32 {
    let unipolar = (x as i64 + (1i64 << 31)) as u64; // (1 + x) / 2 in Q0.32
    ((unipolar * top as u64) >> (32 - FRAC_BITS)) as i32
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ends_and_middle() {
        assert_eq!(high_count(i32::MIN, 128), 0);
        assert_eq!(high_count(0, 128), 64 << FRAC_BITS);
        // x = 1 - 2^-31: one part in 2^32 short of top.
        assert_eq!(high_count(i32::MAX, 128), (128 << FRAC_BITS) - 1);
    }
}
