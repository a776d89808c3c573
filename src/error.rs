//! Configuration errors.
//!
//! Every check happens once, when a configuration is turned into a validated
//! stage. The hot path never returns an error. Each variant names the
//! parameter at fault and the limit it broke, so the message can be shown to
//! the engineer as it is.

use core::fmt;

/// A configuration that cannot be built, with the parameter and the limit.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ConfigError {
    /// The timer clock is zero, negative, NaN or infinite.
    ClockNotPositive {
        /// The clock given, in Hz.
        clock_hz: f64,
    },
    /// The carrier is zero, negative, NaN or infinite.
    CarrierNotPositive {
        /// The carrier given, in Hz.
        carrier_hz: f64,
    },
    /// The carrier is above clock / 8: fewer than 8 ticks a period.
    CarrierTooHigh {
        /// The carrier given, in Hz.
        carrier_hz: f64,
        /// The highest carrier allowed at this clock, in Hz.
        max_hz: f64,
    },
    /// clock / carrier is not a whole number of ticks (or, for up/down
    /// counting, not an even one). The nearest carriers that do work are
    /// `clock_hz / below` (lower carrier) and `clock_hz / above`.
    PeriodNotWhole {
        /// The clock, in Hz.
        clock_hz: f64,
        /// The carrier given, in Hz.
        carrier_hz: f64,
        /// Period in ticks of the nearest valid carrier below the one given.
        below: u32,
        /// Period in ticks of the nearest valid carrier above the one given.
        above: u32,
    },
    /// The period is longer than the edge-position format can carry.
    PeriodTooLong {
        /// Ticks per period asked for.
        ticks: u32,
        /// The longest period allowed for this counting mode.
        max: u32,
    },
    /// The compare register is too narrow for the largest compare value.
    CompareTooNarrow {
        /// Register width in bits.
        bits: u8,
        /// Largest compare value the timer needs.
        needs: u32,
    },
    /// Compare width outside 8..=32 bits.
    CompareWidth {
        /// Register width in bits.
        bits: u8,
    },
    /// Two updates a period need up/down counting (an update at the top and
    /// one at the bottom of the count).
    DoubleUpdateNeedsUpDown,
    /// Double-edge modulation needs up/down counting; trailing and leading
    /// edge need up-counting.
    EdgeNeedsCounting {
        /// The counting mode this edge kind needs.
        needs_up_down: bool,
    },
    /// Separate high-side and low-side compare values need up/down counting:
    /// with an up-counter each channel has one edge fixed at the wrap, so the
    /// two channels would switch at the same instant there.
    SeparateDeadTimeNeedsUpDown,
    /// Dead time is not finite or is negative.
    DeadTimeInvalid,
    /// Dead time plus minimum pulse leaves no duty range between the clamps.
    NoUsableDuty {
        /// Lowest compare value the clamps allow.
        low: u32,
        /// Highest compare value the clamps allow.
        high: u32,
    },
    /// A 3-level bridge needs an even compare range so that silence puts
    /// both legs on the same compare value (`top / 2`).
    ThreeLevelOddTop {
        /// The compare range (`P`, or `P / 2` for up/down counting).
        top: u32,
    },
    /// Minimum pulse is longer than half a period.
    MinPulseTooLong {
        /// Minimum pulse asked for, in ticks.
        ticks: u32,
        /// Half the period, in ticks.
        max: u32,
    },
    /// Oversampling ratio outside the supported set.
    OversamplingRatio {
        /// Update rate over input rate, as asked for.
        ratio: u32,
    },
    /// The input rate does not divide the update rate.
    RatesNotLocked {
        /// Input sample rate, Hz.
        input_hz: f64,
        /// Update rate, Hz.
        update_hz: f64,
    },
    /// Noise-shaper order outside the supported range.
    ShaperOrder {
        /// Order asked for.
        order: u8,
        /// Highest order supported.
        max: u8,
    },
    /// The noise shaper's headroom leaves no modulation range.
    ShaperHeadroom {
        /// Ticks of headroom the shaper needs on each side.
        needs: u32,
        /// Ticks available on each side of the mid point.
        available: u32,
    },
    /// Too many noise-shaper zeros at half the update rate.
    ShaperHalfRateZeros {
        /// Zeros asked for.
        zeros: u8,
        /// Highest number supported.
        max: u8,
    },
    /// The noise shaper's pole set would overflow its fixed-point state (the
    /// poles sit too close to the unit circle for this order); choose a
    /// larger sum |h| budget or no poles.
    ShaperState {
        /// In-band order asked for.
        order: u8,
        /// Zeros at half the update rate asked for.
        half_rate_zeros: u8,
    },
    /// The update rate is not above twice the 20 kHz band the noise shaper
    /// works for.
    ShaperBand {
        /// Update rate, Hz.
        update_hz: f64,
    },
    /// Bring-up tone: no whole cycles below half the sample rate, or a
    /// level outside [0, 1].
    BringUpTone {
        /// Cycles asked for in the table.
        cycles: u32,
        /// Samples in the table.
        samples: u32,
    },
    /// Natural sampling parameters out of range.
    NaturalSampling {
        /// Interpolation order asked for.
        order: u8,
        /// Newton iterations asked for.
        iterations: u8,
    },
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ConfigError::*;
        match *self {
            ClockNotPositive { clock_hz } => {
                write!(f, "timer clock must be a positive finite frequency, got {clock_hz} Hz")
            }
            CarrierNotPositive { carrier_hz } => {
                write!(f, "carrier must be a positive finite frequency, got {carrier_hz} Hz")
            }
            CarrierTooHigh { carrier_hz, max_hz } => write!(
                f,
                "carrier {carrier_hz} Hz is above clock / 8 = {max_hz} Hz (fewer than 8 ticks a period)"
            ),
            PeriodNotWhole { clock_hz, carrier_hz, below, above } => write!(
                f,
                "carrier {carrier_hz} Hz does not give a whole number of ticks at {clock_hz} Hz; \
                 nearest carriers that do: {:.1} Hz ({below} ticks) and {:.1} Hz ({above} ticks)",
                clock_hz / below as f64,
                clock_hz / above as f64
            ),
            PeriodTooLong { ticks, max } => {
                write!(f, "period of {ticks} ticks is longer than the {max} ticks supported")
            }
            CompareTooNarrow { bits, needs } => {
                write!(f, "a {bits}-bit compare register cannot hold compare value {needs}")
            }
            CompareWidth { bits } => write!(f, "compare width {bits} bits is outside 8..=32"),
            DoubleUpdateNeedsUpDown => {
                write!(f, "two updates a period need up/down counting")
            }
            EdgeNeedsCounting { needs_up_down: true } => {
                write!(f, "double-edge modulation needs up/down counting")
            }
            EdgeNeedsCounting { needs_up_down: false } => {
                write!(f, "trailing- and leading-edge modulation need up-counting")
            }
            SeparateDeadTimeNeedsUpDown => write!(
                f,
                "separate high-side and low-side compare values need up/down counting \
                 (an up-counter switches both channels at the wrap)"
            ),
            DeadTimeInvalid => write!(f, "dead time must be finite and not negative"),
            NoUsableDuty { low, high } => write!(
                f,
                "dead time and minimum pulse leave no duty range: compare must be >= {low} and <= {high}"
            ),
            ThreeLevelOddTop { top } => write!(
                f,
                "a 3-level bridge needs an even compare range so that silence gives equal legs; \
                 this timer's is {top} (pick a carrier whose period in ticks is a multiple of 4 \
                 for up/down counting, even for up-counting)"
            ),
            MinPulseTooLong { ticks, max } => write!(
                f,
                "minimum pulse of {ticks} ticks is longer than half a period ({max} ticks)"
            ),
            OversamplingRatio { ratio } => write!(
                f,
                "oversampling ratio {ratio} is not supported (1, 2, 4, 6, 8, 12 or 16)"
            ),
            RatesNotLocked { input_hz, update_hz } => write!(
                f,
                "input rate {input_hz} Hz does not divide the update rate {update_hz} Hz"
            ),
            ShaperOrder { order, max } => {
                write!(f, "noise-shaper order {order} is above the highest supported, {max}")
            }
            ShaperHeadroom { needs, available } => write!(
                f,
                "noise shaper needs {needs} ticks of headroom but only {available} are available"
            ),
            ShaperHalfRateZeros { zeros, max } => write!(
                f,
                "noise shaper: {zeros} zeros at half the update rate is above the highest supported, {max}"
            ),
            ShaperState { order, half_rate_zeros } => write!(
                f,
                "noise shaper order {order} with {half_rate_zeros} half-rate zeros: this pole set would overflow the \
                 fixed-point filter state; choose a larger sum |h| budget or no poles"
            ),
            ShaperBand { update_hz } => write!(
                f,
                "noise shaping needs an update rate above 40000 Hz (twice the 20 kHz band), got {update_hz} Hz"
            ),
            BringUpTone { cycles, samples } => write!(
                f,
                "bring-up tone: {cycles} cycles in {samples} samples must be at least 1 and below \
                 {samples} / 2, and the level within 0 to 1"
            ),
            NaturalSampling { order, iterations } => write!(
                f,
                "natural sampling: interpolation order {order} (1..=3) or Newton iterations {iterations} (0..=3) out of range"
            ),
        }
    }
}

impl core::error::Error for ConfigError {}
