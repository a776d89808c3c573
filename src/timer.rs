//! Timer model: clock, carrier, counting mode, update scheme, compare width.
//!
//! # The carrier each edge kind compares against
//!
//! Every kind is described by one rule, *the high-side switch is on while the
//! carrier is below the signal*, and by where the period starts:
//!
//! | edge | counting | carrier over one period `[0, P)` | compare register | high side on while |
//! |---|---|---|---|---|
//! | trailing | up | rises from -1 to +1 | `c` | counter < compare |
//! | leading | up | falls from +1 to -1 | `P - c` | counter >= compare |
//! | double | up/down | starts at the top, down to -1 at `P/2`, back up | `c` | counter < compare |
//!
//! Here `c` is the *high count*: the signal `x` in [-1, 1] mapped to
//! `(1 + x) / 2 * top`, where `top` is `P` for up-counting and `P / 2` for
//! up/down counting (the auto-reload value). For up/down counting the
//! period, as this crate counts it, starts when the counter is at the top:
//! the high-side pulse is centred in the period and each update's values
//! stay inside the period they were written for.
//!
//! With two updates a period (up/down only) the first update, at the top,
//! places the rising edge (counter falling through `c`) and the second, at
//! the bottom, the falling edge (counter rising through `c`).
//!
//! The rebuild in the host tools uses the continuous counter: an edge at
//! compare `c` falls on tick `c` exactly. Real timers differ by at most one
//! tick on the down-count depending on the vendor, a fixed delay or offset.

use crate::error::ConfigError;

/// How the counter runs.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Counting {
    /// 0 up to `P - 1`, then wraps: a sawtooth carrier.
    Up,
    /// 0 up to `P / 2` and back down: a triangle carrier.
    UpDown,
}

/// Which edges of the pulse move with the signal.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Edge {
    /// Rising edge fixed at the period start, falling edge modulated.
    Trailing,
    /// Falling edge fixed at the period end, rising edge modulated.
    Leading,
    /// Both edges move, symmetric about the middle of the period (up/down).
    Double,
}

impl Edge {
    /// The counting mode this edge kind needs.
    pub const fn counting(self) -> Counting {
        match self {
            Edge::Trailing | Edge::Leading => Counting::Up,
            Edge::Double => Counting::UpDown,
        }
    }
}

/// How often a period the compare values are reloaded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum UpdateScheme {
    /// One update a period (symmetric double edge for up/down counting).
    Single,
    /// Two updates a period, at the top and at the bottom of an up/down
    /// count: each edge from its own sample (asymmetric double edge).
    Double,
}

/// What the engineer asks for, before validation.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TimerSpec {
    /// Timer clock (counter increments a second), Hz.
    pub clock_hz: f64,
    /// PWM carrier (switching frequency), Hz.
    pub carrier_hz: f64,
    /// Counter mode.
    pub counting: Counting,
    /// Modulated edge(s).
    pub edge: Edge,
    /// Updates a period.
    pub update: UpdateScheme,
    /// Compare register width in bits (16 or 32 on most parts).
    pub compare_bits: u8,
}

impl TimerSpec {
    /// An up/down timer with one update a period and 16-bit compare
    /// registers; change fields as needed before [`Timer::try_new`].
    pub const fn new(clock_hz: f64, carrier_hz: f64) -> Self {
        Self {
            clock_hz,
            carrier_hz,
            counting: Counting::UpDown,
            edge: Edge::Double,
            update: UpdateScheme::Single,
            compare_bits: 16,
        }
    }

    /// Same spec with another edge kind and the counting it needs.
    pub const fn with_edge(mut self, edge: Edge) -> Self {
        self.edge = edge;
        self.counting = edge.counting();
        self
    }

    /// Same spec with another update scheme.
    pub const fn with_update(mut self, update: UpdateScheme) -> Self {
        self.update = update;
        self
    }
}

/// Largest `top` (compare range): the edge position keeps 16 fraction bits
/// in an `i32` with a factor 2 of headroom for noise shaping (see
/// [`crate::requant`]). Up-counting periods up to 16384 ticks, up/down up
/// to 32768.
pub const MAX_TOP: u32 = 1 << 14;

/// A validated timer. The hot path trusts every value in it.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Timer {
    clock_hz: f64,
    period: u32,
    edge: Edge,
    update: UpdateScheme,
    compare_bits: u8,
}

/// Round a positive finite f64 to the nearest integer without `std`.
pub(crate) fn round_pos(x: f64) -> f64 {
    let i = (x + 0.5) as u64;
    i as f64
}

/// Smallest integer >= a non-negative finite f64, without `std`.
pub(crate) fn ceil_pos(x: f64) -> u64 {
    let i = x as u64;
    if (i as f64) < x {
        i + 1
    } else {
        i
    }
}

impl Timer {
    /// Validate a spec.
    ///
    /// # Errors
    /// A [`ConfigError`] naming the parameter and the limit: clock or carrier
    /// not positive, carrier above clock / 8, a period that is not a whole
    /// (for up/down: even) number of ticks, counting that does not fit the
    /// edge or the update scheme, a compare register too narrow.
    ///
    /// ```
    /// use ticktone::timer::{Timer, TimerSpec, Edge};
    /// use ticktone::ConfigError;
    /// let t = Timer::try_new(TimerSpec::new(98.304e6, 384e3)).unwrap();
    /// assert_eq!(t.period_ticks(), 256);
    /// assert_eq!(t.top(), 128); // up/down counting
    /// // 100 kHz does not divide 98.304 MHz: the error names 983 and 984 ticks.
    /// let e = Timer::try_new(TimerSpec::new(98.304e6, 100e3).with_edge(Edge::Trailing));
    /// assert!(matches!(e, Err(ConfigError::PeriodNotWhole { below: 984, above: 983, .. })));
    /// ```
    pub fn try_new(spec: TimerSpec) -> Result<Self, ConfigError> {
        let TimerSpec {
            clock_hz,
            carrier_hz,
            counting,
            edge,
            update,
            compare_bits,
        } = spec;
        if !(clock_hz.is_finite() && clock_hz > 0.0) {
            return Err(ConfigError::ClockNotPositive { clock_hz });
        }
        if !(carrier_hz.is_finite() && carrier_hz > 0.0) {
            return Err(ConfigError::CarrierNotPositive { carrier_hz });
        }
        if carrier_hz > clock_hz / 8.0 {
            return Err(ConfigError::CarrierTooHigh {
                carrier_hz,
                max_hz: clock_hz / 8.0,
            });
        }
        if edge.counting() != counting {
            return Err(ConfigError::EdgeNeedsCounting {
                needs_up_down: edge == Edge::Double,
            });
        }
        if update == UpdateScheme::Double && counting != Counting::UpDown {
            return Err(ConfigError::DoubleUpdateNeedsUpDown);
        }
        if !(8..=32).contains(&compare_bits) {
            return Err(ConfigError::CompareWidth { bits: compare_bits });
        }
        let step: u64 = if counting == Counting::UpDown { 2 } else { 1 };
        let exact = clock_hz / carrier_hz;
        let nearest = round_pos(exact / step as f64) * step as f64;
        // A carrier is accepted when clock / carrier is within 1 ppb of a
        // whole (even) tick count: frequencies typed in decimal are not exact.
        if (exact - nearest).abs() > 1e-9 * exact || nearest < 8.0 {
            let below_p = ceil_pos(exact / step as f64) * step;
            let below_p = if below_p as f64 <= exact {
                below_p + step
            } else {
                below_p
            };
            let above_p = (exact / step as f64) as u64 * step;
            let above_p = if above_p as f64 >= exact {
                above_p - step
            } else {
                above_p
            };
            return Err(ConfigError::PeriodNotWhole {
                clock_hz,
                carrier_hz,
                below: below_p.min(u32::MAX as u64) as u32,
                above: above_p.max(step) as u32,
            });
        }
        let period = nearest as u64;
        let top = period / step;
        if top > MAX_TOP as u64 {
            return Err(ConfigError::PeriodTooLong {
                ticks: period.min(u32::MAX as u64) as u32,
                max: MAX_TOP * step as u32,
            });
        }
        let period = period as u32;
        // Leading edge writes `P - c`, up to P; the others write c up to top.
        let needs = top as u32;
        if compare_bits < 32 && needs > (1u32 << compare_bits) - 1 {
            return Err(ConfigError::CompareTooNarrow {
                bits: compare_bits,
                needs,
            });
        }
        Ok(Self {
            clock_hz,
            period,
            edge,
            update,
            compare_bits,
        })
    }

    /// Ticks a carrier period, `P`.
    pub const fn period_ticks(&self) -> u32 {
        self.period
    }

    /// Largest compare value: `P` for up-counting, `P / 2` for up/down.
    pub const fn top(&self) -> u32 {
        match self.edge.counting() {
            Counting::Up => self.period,
            Counting::UpDown => self.period / 2,
        }
    }

    /// Timer clock, Hz.
    pub const fn clock_hz(&self) -> f64 {
        self.clock_hz
    }

    /// Carrier, Hz (exactly clock / period).
    pub fn carrier_hz(&self) -> f64 {
        self.clock_hz / self.period as f64
    }

    /// Counting mode.
    pub const fn counting(&self) -> Counting {
        self.edge.counting()
    }

    /// Modulated edge(s).
    pub const fn edge(&self) -> Edge {
        self.edge
    }

    /// Update scheme.
    pub const fn update(&self) -> UpdateScheme {
        self.update
    }

    /// Compare register width in bits.
    pub const fn compare_bits(&self) -> u8 {
        self.compare_bits
    }

    /// Updates a period: 1 or 2.
    pub const fn updates_per_period(&self) -> u32 {
        match self.update {
            UpdateScheme::Single => 1,
            UpdateScheme::Double => 2,
        }
    }

    /// Updates a second.
    pub fn update_rate_hz(&self) -> f64 {
        self.carrier_hz() * self.updates_per_period() as f64
    }

    /// Distinct positions one modulated edge can take: `top + 1`.
    ///
    /// For up/down counting with one update a period one compare value moves
    /// both edges, so the pulse width moves in steps of 2 ticks.
    pub const fn levels_per_edge(&self) -> u32 {
        self.top() + 1
    }

    /// Ticks from the start of the update slot `slot` (0 or 1 within the
    /// period) to the start of the period: `0` or `P / 2`.
    pub const fn slot_start(&self, slot: u32) -> u32 {
        slot * (self.period / 2)
    }

    /// Dead time in whole ticks for a time in nanoseconds, rounded up so the
    /// switches are never both on for less than asked.
    ///
    /// # Errors
    /// [`ConfigError::DeadTimeInvalid`] for a negative or non-finite time.
    ///
    /// ```
    /// # use ticktone::timer::{Timer, TimerSpec};
    /// let t = Timer::try_new(TimerSpec::new(98.304e6, 384e3)).unwrap();
    /// // 20 ns at 98.304 MHz is 1.966 ticks: rounded up to 2.
    /// assert_eq!(t.ticks_from_ns(20.0), Ok(2));
    /// ```
    pub fn ticks_from_ns(&self, ns: f64) -> Result<u32, ConfigError> {
        if !(ns.is_finite() && ns >= 0.0) {
            return Err(ConfigError::DeadTimeInvalid);
        }
        // Subtract a hair so that a time typed as an exact multiple of the
        // tick does not round up because of the decimal representation.
        let ticks = ns * 1e-9 * self.clock_hz * (1.0 - 1e-12);
        Ok(ceil_pos(ticks).min(self.period as u64) as u32)
    }
}
