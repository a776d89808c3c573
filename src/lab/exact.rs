//! The exact modulator: the lab's own reference, in `f64`, independent of
//! the firmware code.
//!
//! It sees the analytic tone `x(t) = A sin(2 pi f t + phase)` and places
//! each edge at its exact, unrounded time (ticks as `f64`), following the
//! carrier conventions of [`crate::timer`]: the high side is on while the
//! carrier is below the signal.
//!
//! | edge | carrier over a period `[0, P)` | uniform: high side on | natural: edge(s) at |
//! |---|---|---|---|
//! | trailing | rises -1 to +1 | `[0, (1 + x0) P / 2)` | `-1 + 2 tau / P = x(t0 + tau)` |
//! | leading | falls +1 to -1 | `[(1 - x0) P / 2, P)` | `1 - 2 tau / P = x(t0 + tau)` |
//! | double | from the top down to -1 at `P/2`, back up | `[(1 - x0) P / 4, P/2 + (1 + x1) P / 4)` | both crossings |
//!
//! Uniform sampling takes `x0 = x(t0)` at the start of the period and, with
//! two updates a period, `x1 = x(t0 + P/2)` for the falling edge (with one
//! update `x1 = x0`): the sample at the start of each update slot, as the
//! firmware's edge solver does. Natural sampling solves the crossing of the
//! tone and the carrier by Newton's method inside a bisection bracket, to
//! about 1e-12 of a period.
//!
//! Leg B of a 3-level bridge is modulated by `-x`; leg B of a 2-level
//! bridge is the complement of leg A. Dead time is then applied to each
//! leg as the firmware's bridge and the timer would: a dead-time generator
//! delays every rising edge of each switch by `d`; separate compare values
//! shorten each high-side pulse by `floor(d/2)` at both ends and each
//! low-side pulse by `ceil(d/2)` (swapped for leg B of a 2-level bridge).

use std::vec::Vec;

use crate::bridge::{BridgeKind, BridgeSpec, DeadTimeForm};
use crate::rebuild::{LegSwitches, OnOff};
use crate::timer::{Edge, Timer, UpdateScheme};

/// How the exact modulator takes the signal.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ExactSampling {
    /// The signal at the start of each update slot.
    Uniform,
    /// The exact crossing of the signal and the carrier.
    Natural,
}

/// The analytic test tone, `amplitude * sin(2 pi cycles_per_tick t + phase)`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ToneSignal {
    /// Peak, full scale 1.
    pub amplitude: f64,
    /// Frequency in cycles a tick (tone Hz / clock Hz).
    pub cycles_per_tick: f64,
    /// Phase at t = 0, radians.
    pub phase: f64,
}

impl ToneSignal {
    fn arg(&self, t: f64) -> f64 {
        let c = self.cycles_per_tick * t;
        2.0 * std::f64::consts::PI * (c - c.floor()) + self.phase
    }

    /// Value at `t` ticks.
    pub fn at(&self, t: f64) -> f64 {
        self.amplitude * self.arg(t).sin()
    }

    /// Slope at `t`, per tick.
    pub fn slope(&self, t: f64) -> f64 {
        self.amplitude * 2.0 * std::f64::consts::PI * self.cycles_per_tick * self.arg(t).cos()
    }

    /// The same tone with the sign flipped.
    pub fn negated(&self) -> Self {
        Self {
            amplitude: -self.amplitude,
            ..*self
        }
    }
}

/// Root of an increasing `g` in `[lo, hi]` (value and slope), safeguarded
/// Newton from `guess`. Returns `lo` if `g(lo) >= 0` and `hi` if
/// `g(hi) <= 0` (the signal never meets the carrier: full or empty pulse).
fn crossing(g: impl Fn(f64) -> (f64, f64), mut lo: f64, mut hi: f64, guess: f64) -> f64 {
    if g(lo).0 >= 0.0 {
        return lo;
    }
    if g(hi).0 <= 0.0 {
        return hi;
    }
    let tol = 1e-13 * (hi - lo);
    let mut x = guess.clamp(lo, hi);
    for _ in 0..200 {
        let (v, d) = g(x);
        if v == 0.0 {
            return x;
        }
        if v < 0.0 {
            lo = x;
        } else {
            hi = x;
        }
        let newton = x - v / d;
        let next = if d > 0.0 && newton > lo && newton < hi {
            newton
        } else {
            0.5 * (lo + hi)
        };
        if (next - x).abs() <= tol || hi - lo <= tol {
            return next;
        }
        x = next;
    }
    x
}

/// High-side on-interval of the reference (no dead time) in the period
/// starting at `t0`, as offsets from `t0`.
fn period_pulse(
    edge: Edge,
    update: UpdateScheme,
    sampling: ExactSampling,
    p: f64,
    t0: f64,
    x: &ToneSignal,
) -> (f64, f64) {
    let sig = |tau: f64| x.at(t0 + tau).clamp(-1.0, 1.0);
    match (sampling, edge) {
        (ExactSampling::Uniform, Edge::Trailing) => (0.0, (1.0 + sig(0.0)) * p / 2.0),
        (ExactSampling::Uniform, Edge::Leading) => ((1.0 - sig(0.0)) * p / 2.0, p),
        (ExactSampling::Uniform, Edge::Double) => {
            let x0 = sig(0.0);
            let x1 = match update {
                UpdateScheme::Single => x0,
                UpdateScheme::Double => sig(p / 2.0),
            };
            ((1.0 - x0) * p / 4.0, p / 2.0 + (1.0 + x1) * p / 4.0)
        }
        (ExactSampling::Natural, Edge::Trailing) => {
            let g = |tau: f64| {
                (
                    -1.0 + 2.0 * tau / p - x.at(t0 + tau),
                    2.0 / p - x.slope(t0 + tau),
                )
            };
            let guess = (1.0 + sig(0.0)) * p / 2.0;
            (0.0, crossing(g, 0.0, p, guess))
        }
        (ExactSampling::Natural, Edge::Leading) => {
            let g = |tau: f64| {
                (
                    x.at(t0 + tau) - 1.0 + 2.0 * tau / p,
                    x.slope(t0 + tau) + 2.0 / p,
                )
            };
            let guess = (1.0 - sig(0.0)) * p / 2.0;
            (crossing(g, 0.0, p, guess), p)
        }
        (ExactSampling::Natural, Edge::Double) => {
            let g1 = |tau: f64| {
                (
                    x.at(t0 + tau) - 1.0 + 4.0 * tau / p,
                    x.slope(t0 + tau) + 4.0 / p,
                )
            };
            let g2 = |tau: f64| {
                (
                    -3.0 + 4.0 * tau / p - x.at(t0 + tau),
                    4.0 / p - x.slope(t0 + tau),
                )
            };
            let r = crossing(g1, 0.0, p / 2.0, (1.0 - sig(0.0)) * p / 4.0);
            let f = crossing(g2, p / 2.0, p, p / 2.0 + (1.0 + sig(p / 2.0)) * p / 4.0);
            (r, f)
        }
    }
}

/// The reference waveform of a leg (high side without dead time) over
/// `periods` carrier periods.
pub fn reference(timer: &Timer, sampling: ExactSampling, x: &ToneSignal, periods: usize) -> OnOff {
    let p = timer.period_ticks() as f64;
    let iv: Vec<(f64, f64)> = (0..periods)
        .map(|k| {
            let t0 = k as f64 * p;
            let (a, b) = period_pulse(timer.edge(), timer.update(), sampling, p, t0, x);
            (t0 + a, t0 + b)
        })
        .collect();
    OnOff::from_intervals(&iv, periods as f64 * p)
}

/// Each on-interval shortened by `head` at its start and `tail` at its end
/// (except where it touches the record's ends).
pub fn shrunk(w: &OnOff, head: f64, tail: f64) -> OnOff {
    let iv: Vec<(f64, f64)> = w
        .on_intervals()
        .into_iter()
        .map(|(a, b)| {
            let a2 = if a <= 0.0 { a } else { a + head };
            let b2 = if b >= w.end { b } else { b - tail };
            (a2, b2)
        })
        .collect();
    OnOff::from_intervals(&iv, w.end)
}

/// The switches of a leg from its reference and the bridge's dead time.
fn with_dead_time(reference: &OnOff, spec: &BridgeSpec, swap: bool) -> LegSwitches {
    let d = spec.dead_time_ticks as f64;
    match spec.form {
        DeadTimeForm::Generator => LegSwitches {
            high: reference.rising_delayed(d),
            low: reference.inverted().rising_delayed(d),
        },
        DeadTimeForm::SeparateCompares => {
            let below = (spec.dead_time_ticks / 2) as f64;
            let above = d - below;
            let (h, l) = if swap { (above, below) } else { (below, above) };
            LegSwitches {
                high: shrunk(reference, h, h),
                low: shrunk(&reference.inverted(), l, l),
            }
        }
    }
}

/// The switches of every leg of `bridge` over `periods` carrier periods,
/// modulated by the tone `x` (leg A from `+x`).
pub fn exact_legs(
    timer: &Timer,
    bridge: &BridgeSpec,
    sampling: ExactSampling,
    x: &ToneSignal,
    periods: usize,
) -> Vec<LegSwitches> {
    let a = reference(timer, sampling, x, periods);
    match bridge.kind {
        BridgeKind::Half => vec![with_dead_time(&a, bridge, false)],
        BridgeKind::Full2 => vec![
            with_dead_time(&a, bridge, false),
            with_dead_time(&a.inverted(), bridge, true),
        ],
        BridgeKind::Full3 => {
            let b = reference(timer, sampling, &x.negated(), periods);
            vec![
                with_dead_time(&a, bridge, false),
                with_dead_time(&b, bridge, false),
            ]
        }
    }
}
