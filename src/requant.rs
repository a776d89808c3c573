//! Requantiser: a high count with [`FRAC_BITS`] fraction bits becomes a
//! whole number of ticks.
//!
//! Before rounding, the value is clamped to the range the bridge allows
//! (minimum pulse, dead time, bootstrap refresh) narrowed by the headroom
//! the rounding needs, so that the rounded value can never leave the bridge's
//! range: the bridge does not check again. Each clamp is counted.

use crate::edge::FRAC_BITS;
use crate::error::ConfigError;
use crate::timer::Timer;

/// Clamp counts of a requantiser, in updates.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ClampCounts {
    /// Updates whose high count was raised to the lowest allowed.
    pub low: u32,
    /// Updates whose high count was lowered to the highest allowed.
    pub high: u32,
}

/// How the rounding error is shaped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ShaperSpec {
    /// Noise-shaper order; 0 is plain rounding.
    pub order: u8,
    /// Add TPDF dither before rounding.
    pub dither: bool,
}

impl ShaperSpec {
    /// Plain rounding, no dither.
    pub const ROUND: Self = Self {
        order: 0,
        dither: false,
    };
}

/// Rounds high counts to ticks within `[low, high]`.
#[derive(Clone, Debug)]
pub struct Requantiser {
    /// Lowest input accepted (Q16), so that the output is >= `low` ticks.
    in_low: i32,
    /// Highest input accepted (Q16), so that the output is <= `high` ticks.
    in_high: i32,
    counts: ClampCounts,
}

const HALF: i32 = 1 << (FRAC_BITS - 1);

impl Requantiser {
    /// A requantiser for `timer` whose output stays within `[low, high]`
    /// ticks.
    ///
    /// # Errors
    /// [`ConfigError::NoUsableDuty`] if `low > high`;
    /// [`ConfigError::ShaperOrder`] for a shaper not built yet.
    pub fn try_new(
        _timer: &Timer,
        low: u32,
        high: u32,
        shaper: ShaperSpec,
    ) -> Result<Self, ConfigError> {
        if shaper.order > 0 || shaper.dither {
            return Err(ConfigError::ShaperOrder {
                order: shaper.order,
                max: 0,
            });
        }
        if low > high {
            return Err(ConfigError::NoUsableDuty { low, high });
        }
        Ok(Self {
            in_low: (low << FRAC_BITS) as i32,
            // round(v) <= high  <=>  v < high + 0.5
            in_high: ((high << FRAC_BITS) as i32) + HALF - 1,
            counts: ClampCounts::default(),
        })
    }

    /// Clamp counts so far.
    pub const fn counts(&self) -> ClampCounts {
        self.counts
    }

    /// Clear the clamp counts.
    pub fn clear_counts(&mut self) {
        self.counts = ClampCounts::default();
    }

    /// Clamp (counted) and round to the nearest tick, halves up.
    #[inline]
    pub fn quantise(&mut self, v: i32) -> u32 {
        let v = if v < self.in_low {
            self.counts.low = self.counts.low.wrapping_add(1);
            self.in_low
        } else if v > self.in_high {
            self.counts.high = self.counts.high.wrapping_add(1);
            self.in_high
        } else {
            v
        };
        round_to_ticks(v)
    }
}

/// Nearest whole tick of a non-negative Q16 value, halves up.
#[inline(always)]
pub(crate) fn round_to_ticks(v: i32) -> u32 {
    ((v + HALF) >> FRAC_BITS) as u32
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
        assert_eq!(q.counts(), ClampCounts { low: 1, high: 1 });
    }
}
