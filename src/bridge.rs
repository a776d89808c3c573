//! Bridge mapper: from the rounded high count of an update to the compare
//! words of each leg, with dead time, minimum pulse and bootstrap refresh.
//!
//! # Legs and their compare words
//!
//! A leg is a high-side and a low-side switch. Its *reference* is the
//! waveform the high side would follow without dead time. A leg runs in one
//! of two output modes (see [`LegMode`]): high while the counter is below the
//! compare value, or at or above it.
//!
//! | bridge | leg A | leg B |
//! |---|---|---|
//! | half | from `+x` | none |
//! | full, 2-level | from `+x` | the same compare word, opposite mode: B is the complement of A |
//! | full, 3-level | from `+x` | from `-x`: compare for `top - c` in leg A's mode |
//!
//! # Dead time
//!
//! - [`DeadTimeForm::Generator`]: one compare word a leg. The timer's
//!   dead-time generator delays every rising edge of the high-side and of
//!   the low-side output by [`Bridge::dead_time_ticks`]: program that value.
//! - [`DeadTimeForm::SeparateCompares`]: two words a leg, high side then low
//!   side, for timers without a generator. Up/down counting only. The
//!   high-side channel runs in the leg's mode, the low-side channel in the
//!   opposite mode, and the two compare values straddle the ideal edge:
//!   `c - floor(d/2)` and `c + ceil(d/2)` (for the mode "high below"). On the
//!   triangle the counter passes one value `d` ticks before the other in
//!   both directions, so both switches are off for `d` ticks at every edge.
//!
//! # Clamps
//!
//! The high count `c` of each update is kept in `[low, high]` (see
//! [`Bridge::high_count_range`]) so that every high-side and low-side pulse
//! is at least the minimum pulse, and every low-side pulse at least the
//! bootstrap refresh time. The requantiser applies and counts the clamp; the
//! mapper here only places words. For full bridges the range is symmetric
//! about `top / 2`, so leg B is in range whenever leg A is.

use crate::error::ConfigError;
use crate::timer::{Counting, Edge, Timer};

/// Switch arrangement.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum BridgeKind {
    /// One leg against a mid-rail or split supply.
    Half,
    /// Two legs, B the complement of A: output +V or -V.
    Full2,
    /// Two legs, A from +x and B from -x: output +V, 0 or -V, ripple at
    /// twice the carrier.
    Full3,
}

impl BridgeKind {
    /// Legs driven: 1 or 2.
    pub const fn legs(self) -> usize {
        match self {
            BridgeKind::Half => 1,
            BridgeKind::Full2 | BridgeKind::Full3 => 2,
        }
    }
}

/// How dead time reaches the switches.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DeadTimeForm {
    /// One compare word a leg; the timer's dead-time generator inserts the
    /// dead time on complementary outputs.
    Generator,
    /// Two compare words a leg (high side, low side); the dead time is in the
    /// values. Up/down counting only.
    SeparateCompares,
}

/// Output mode of a timer channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LegMode {
    /// Output high while counter < compare.
    HighBelow,
    /// Output high while counter >= compare.
    HighAtOrAbove,
}

impl LegMode {
    /// The other mode.
    pub const fn flipped(self) -> Self {
        match self {
            LegMode::HighBelow => LegMode::HighAtOrAbove,
            LegMode::HighAtOrAbove => LegMode::HighBelow,
        }
    }
}

/// What the engineer asks for, in ticks (see [`BridgeSpec::from_ns`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BridgeSpec {
    /// Switch arrangement.
    pub kind: BridgeKind,
    /// Where dead time is made.
    pub form: DeadTimeForm,
    /// Both switches of a leg off for at least this, at every transition.
    pub dead_time_ticks: u32,
    /// Shortest on-pulse of any switch.
    pub min_pulse_ticks: u32,
    /// Shortest low-side on-time a period (bootstrap capacitor refresh).
    pub min_low_ticks: u32,
}

impl BridgeSpec {
    /// A bridge with no dead time and no clamps (an ideal stage, for
    /// measurement only).
    pub const fn ideal(kind: BridgeKind) -> Self {
        Self {
            kind,
            form: DeadTimeForm::Generator,
            dead_time_ticks: 0,
            min_pulse_ticks: 0,
            min_low_ticks: 0,
        }
    }

    /// A bridge with times in nanoseconds, each rounded up to whole ticks of
    /// `timer`.
    ///
    /// # Errors
    /// [`ConfigError::DeadTimeInvalid`] for a negative or non-finite time.
    pub fn from_ns(
        timer: &Timer,
        kind: BridgeKind,
        form: DeadTimeForm,
        dead_time_ns: f64,
        min_pulse_ns: f64,
        min_low_ns: f64,
    ) -> Result<Self, ConfigError> {
        Ok(Self {
            kind,
            form,
            dead_time_ticks: timer.ticks_from_ns(dead_time_ns)?,
            min_pulse_ticks: timer.ticks_from_ns(min_pulse_ns)?,
            min_low_ticks: timer.ticks_from_ns(min_low_ns)?,
        })
    }
}

/// A validated bridge mapper for one timer.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Bridge {
    spec: BridgeSpec,
    top: u32,
    low: u32,
    high: u32,
    /// Leg A writes `top - c` instead of `c` (leading edge).
    mirrored: bool,
    mode_a: LegMode,
    dt_below: u32,
    dt_above: u32,
}

/// Most compare words one update of one audio channel needs.
pub const MAX_WORDS: usize = 4;

const fn div_ceil(a: u32, b: u32) -> u32 {
    a.div_ceil(b)
}

impl Bridge {
    /// Validate `spec` against `timer`.
    ///
    /// # Errors
    /// [`ConfigError::SeparateDeadTimeNeedsUpDown`],
    /// [`ConfigError::MinPulseTooLong`] (more than half a period),
    /// [`ConfigError::NoUsableDuty`] (dead time and pulses leave no range).
    pub fn try_new(spec: BridgeSpec, timer: &Timer) -> Result<Self, ConfigError> {
        let period = timer.period_ticks();
        let top = timer.top();
        if spec.min_pulse_ticks > period / 2 {
            return Err(ConfigError::MinPulseTooLong {
                ticks: spec.min_pulse_ticks,
                max: period / 2,
            });
        }
        if spec.form == DeadTimeForm::SeparateCompares && timer.counting() != Counting::UpDown {
            return Err(ConfigError::SeparateDeadTimeNeedsUpDown);
        }
        let d = spec.dead_time_ticks;
        let dt_below = d / 2;
        let dt_above = d - dt_below;
        let on_min = spec.min_pulse_ticks;
        let low_min = spec.min_pulse_ticks.max(spec.min_low_ticks);
        // Bounds on c such that every pulse, over any sequence of updates,
        // meets the minimums (derivation in the module docs and DEVELOPERS.md).
        let (low, high_margin) = match (timer.counting(), spec.form) {
            (Counting::Up, _) => (d.saturating_add(on_min), d.saturating_add(low_min)),
            (Counting::UpDown, DeadTimeForm::Generator) => {
                (div_ceil(d + on_min, 2), div_ceil(d + low_min, 2))
            }
            (Counting::UpDown, DeadTimeForm::SeparateCompares) => (
                dt_below + div_ceil(on_min, 2),
                dt_above + div_ceil(low_min, 2),
            ),
        };
        let (mut low, mut high) = (low, top.saturating_sub(high_margin));
        if spec.kind != BridgeKind::Half {
            // Leg B uses top - c (3-level) or the complement (2-level): the
            // range must be symmetric.
            low = low.max(top.saturating_sub(high));
            high = top - low.min(top);
        }
        if low >= high {
            return Err(ConfigError::NoUsableDuty { low, high });
        }
        if spec.kind == BridgeKind::Full3 && !top.is_multiple_of(2) {
            // Silence must give equal legs: c = top / 2 on both.
            return Err(ConfigError::ThreeLevelOddTop { top });
        }
        let mirrored = timer.edge() == Edge::Leading;
        let mode_a = if mirrored {
            LegMode::HighAtOrAbove
        } else {
            LegMode::HighBelow
        };
        Ok(Self {
            spec,
            top,
            low,
            high,
            mirrored,
            mode_a,
            dt_below,
            dt_above,
        })
    }

    /// The spec this mapper was built from.
    pub const fn spec(&self) -> BridgeSpec {
        self.spec
    }

    /// Dead time in ticks (program this into a dead-time generator).
    pub const fn dead_time_ticks(&self) -> u32 {
        self.spec.dead_time_ticks
    }

    /// Lowest and highest high count the clamps allow, in ticks.
    pub const fn high_count_range(&self) -> (u32, u32) {
        (self.low, self.high)
    }

    /// Legs driven.
    pub const fn legs(&self) -> usize {
        self.spec.kind.legs()
    }

    /// Compare words for one update of one audio channel.
    pub const fn words_per_update(&self) -> usize {
        self.legs()
            * match self.spec.form {
                DeadTimeForm::Generator => 1,
                DeadTimeForm::SeparateCompares => 2,
            }
    }

    /// Output mode of the high-side channel of `leg` (0 = A, 1 = B). The
    /// low-side channel of a separate-compare leg runs in the opposite mode.
    pub const fn leg_mode(&self, leg: usize) -> LegMode {
        if leg == 1 && matches!(self.spec.kind, BridgeKind::Full2) {
            self.mode_a.flipped()
        } else {
            self.mode_a
        }
    }

    /// Compare words for the rounded high count `c` (within
    /// [`Bridge::high_count_range`]), in the order leg A high side, (leg A
    /// low side), leg B high side, (leg B low side). The first
    /// [`Bridge::words_per_update`] entries are valid.
    #[inline(always)]
    pub fn words(&self, c: u32) -> [u32; MAX_WORDS] {
        let leg_b = match self.spec.kind {
            BridgeKind::Full3 => self.top - c,
            BridgeKind::Half | BridgeKind::Full2 => c,
        };
        self.words_legs(c, leg_b)
    }

    /// Compare words for a 3-level bridge whose legs have their own high
    /// counts (natural sampling solves leg B from `-x`); for the other
    /// kinds `leg_b` must equal `leg_a`. Both within
    /// [`Bridge::high_count_range`].
    #[inline(always)]
    pub fn words_legs(&self, leg_a: u32, leg_b: u32) -> [u32; MAX_WORDS] {
        debug_assert!(self.low <= leg_a && leg_a <= self.high);
        debug_assert!(self.low <= leg_b && leg_b <= self.high);
        let (ra, rb) = if self.mirrored {
            (self.top - leg_a, self.top - leg_b)
        } else {
            (leg_a, leg_b)
        };
        match (self.spec.form, self.spec.kind) {
            (DeadTimeForm::Generator, _) => [ra, rb, 0, 0],
            (DeadTimeForm::SeparateCompares, BridgeKind::Full2) => [
                ra - self.dt_below,
                ra + self.dt_above,
                // Leg B high side is on at or above the value.
                rb + self.dt_above,
                rb - self.dt_below,
            ],
            (DeadTimeForm::SeparateCompares, _) => [
                ra - self.dt_below,
                ra + self.dt_above,
                rb - self.dt_below,
                rb + self.dt_above,
            ],
        }
    }
}

/// The compare words of one update as an affine map of the leg counts,
/// `word[j] = offset[j] + slope[j] * leg(j)` (wrapping `u32`, `slope` being
/// `1` or `u32::MAX` for -1), for block loops that want no branch an
/// update: [`Bridge::words_legs`] and [`Bridge::words`] written as
/// constants worked out once. In [`WordMap::words`] leg B feeds word `j`
/// when `2 j >= N > 1` (the second of two words, the last two of four):
/// right for a full bridge. A half bridge has one leg, whose two words
/// (separate compares) are both leg A's: pass its count as both `a` and
/// `b`, as [`Bridge::words_legs`] requires for it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct WordMap<const N: usize> {
    /// Per word: constant part.
    pub offset: [u32; N],
    /// Per word: 1 or -1 (as `u32::MAX`).
    pub slope: [u32; N],
}

impl<const N: usize> WordMap<N> {
    /// Whether word `j` is leg B's.
    #[inline(always)]
    pub const fn from_leg_b(j: usize) -> bool {
        N > 1 && 2 * j >= N
    }

    /// The words of leg counts `a` and `b`.
    #[inline(always)]
    pub fn words(&self, a: u32, b: u32) -> [u32; N] {
        core::array::from_fn(|j| {
            let leg = if Self::from_leg_b(j) { b } else { a };
            self.offset[j].wrapping_add(self.slope[j].wrapping_mul(leg))
        })
    }

    /// The words of one high count `c` (leg B derived from it), with the
    /// map from [`Bridge::count_map`].
    #[inline(always)]
    pub fn words_of(&self, c: u32) -> [u32; N] {
        core::array::from_fn(|j| self.offset[j].wrapping_add(self.slope[j].wrapping_mul(c)))
    }
}

impl Bridge {
    /// [`Bridge::words_legs`] as a [`WordMap`] of `(leg_a, leg_b)`, `N`
    /// being [`Bridge::words_per_update`] (`None` otherwise).
    pub fn leg_map<const N: usize>(&self) -> Option<WordMap<N>> {
        if N != self.words_per_update() {
            return None;
        }
        let (base, slope) = if self.mirrored {
            (self.top, u32::MAX)
        } else {
            (0, 1)
        };
        let (below, above) = (self.dt_below.wrapping_neg(), self.dt_above);
        let k: [u32; MAX_WORDS] = match (self.spec.form, self.spec.kind) {
            (DeadTimeForm::Generator, _) => [0; MAX_WORDS],
            (DeadTimeForm::SeparateCompares, BridgeKind::Full2) => [below, above, above, below],
            (DeadTimeForm::SeparateCompares, _) => [below, above, below, above],
        };
        Some(WordMap {
            offset: core::array::from_fn(|j| base.wrapping_add(k[j])),
            slope: [slope; N],
        })
    }

    /// [`Bridge::words`] as a [`WordMap`] of the one high count `c`: for a
    /// 3-level bridge leg B's words take `top - c`.
    pub fn count_map<const N: usize>(&self) -> Option<WordMap<N>> {
        let mut m = self.leg_map::<N>()?;
        if self.spec.kind == BridgeKind::Full3 {
            for j in (0..N).filter(|&j| WordMap::<N>::from_leg_b(j)) {
                // offset + slope (top - c) = (offset + slope top) - slope c
                m.offset[j] = m.offset[j].wrapping_add(m.slope[j].wrapping_mul(self.top));
                m.slope[j] = m.slope[j].wrapping_neg();
            }
        }
        Some(m)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::timer::{TimerSpec, UpdateScheme};

    fn updown() -> Timer {
        Timer::try_new(TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Double)).unwrap()
    }

    #[test]
    fn ranges() {
        let t = updown(); // top 128
        let mut s = BridgeSpec::ideal(BridgeKind::Half);
        assert_eq!(Bridge::try_new(s, &t).unwrap().high_count_range(), (0, 128));
        s.dead_time_ticks = 3;
        s.min_pulse_ticks = 4;
        s.min_low_ticks = 10;
        // generator: ceil(7/2) = 4, 128 - ceil(13/2) = 121
        assert_eq!(Bridge::try_new(s, &t).unwrap().high_count_range(), (4, 121));
        s.kind = BridgeKind::Full3;
        assert_eq!(Bridge::try_new(s, &t).unwrap().high_count_range(), (7, 121));
        s.form = DeadTimeForm::SeparateCompares;
        // below 1 + 2 = 3, above 2 + 5 = 7 -> symmetric 7..121
        let b = Bridge::try_new(s, &t).unwrap();
        assert_eq!(b.high_count_range(), (7, 121));
        assert_eq!(b.words(100)[..4], [99, 102, 27, 30]);
    }

    #[test]
    fn word_maps_agree_with_words() {
        // The affine maps are the same function as `words`/`words_legs`
        // (definition), for every kind, form and edge.
        for edge in [Edge::Trailing, Edge::Leading, Edge::Double] {
            let t = Timer::try_new(TimerSpec::new(98.304e6, 384e3).with_edge(edge)).unwrap();
            for kind in [BridgeKind::Half, BridgeKind::Full2, BridgeKind::Full3] {
                for form in [DeadTimeForm::Generator, DeadTimeForm::SeparateCompares] {
                    let mut s = BridgeSpec::ideal(kind);
                    s.form = form;
                    s.dead_time_ticks = 3;
                    let Ok(b) = Bridge::try_new(s, &t) else {
                        continue;
                    };
                    let n = b.words_per_update();
                    let (lo, hi) = b.high_count_range();
                    for c in lo..=hi {
                        let w = b.words(c);
                        let partner = if kind == BridgeKind::Full3 {
                            hi + lo - c
                        } else {
                            c
                        };
                        let wl = b.words_legs(c, partner);
                        match n {
                            1 => {
                                assert_eq!(b.count_map::<1>().unwrap().words_of(c)[..], w[..1]);
                                assert_eq!(b.leg_map::<1>().unwrap().words(c, c)[..], w[..1]);
                            }
                            2 => {
                                assert_eq!(b.count_map::<2>().unwrap().words_of(c)[..], w[..2]);
                                let m = b.leg_map::<2>().unwrap();
                                assert_eq!(m.words(c, partner)[..], wl[..2]);
                            }
                            _ => {
                                assert_eq!(b.count_map::<4>().unwrap().words_of(c)[..], w[..]);
                                let m = b.leg_map::<4>().unwrap();
                                assert_eq!(m.words(c, partner)[..], wl[..]);
                            }
                        }
                    }
                    assert!(b.leg_map::<3>().is_none());
                }
            }
        }
    }

    #[test]
    fn errors() {
        let t = updown();
        let mut s = BridgeSpec::ideal(BridgeKind::Full2);
        s.min_pulse_ticks = 129;
        assert_eq!(
            Bridge::try_new(s, &t),
            Err(ConfigError::MinPulseTooLong {
                ticks: 129,
                max: 128
            })
        );
        s.min_pulse_ticks = 0;
        s.dead_time_ticks = 128;
        assert!(matches!(
            Bridge::try_new(s, &t),
            Err(ConfigError::NoUsableDuty { .. })
        ));
        let up = Timer::try_new(TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Trailing)).unwrap();
        s.dead_time_ticks = 2;
        s.form = DeadTimeForm::SeparateCompares;
        assert_eq!(
            Bridge::try_new(s, &up),
            Err(ConfigError::SeparateDeadTimeNeedsUpDown)
        );
    }
}
