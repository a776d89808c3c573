//! Piecewise-constant waveforms with exact edge times: the switch node of
//! each leg and the bridge output.
//!
//! Times are in ticks of the timer clock as `f64` (whole ticks on the
//! firmware path, fractional ones in [`crate::lab::exact`]). A record
//! `[0, end)` is analysed as one period of a periodic signal: the lab's
//! records hold a whole number of carrier periods, so the periodic
//! extension adds no edge that the hardware would not make.
//!
//! # Output normalisation
//!
//! A leg's node is 1 while its high-side switch is on and 0 while its
//! low-side switch is on. The bridge output is scaled so that a modulation
//! index of 1 (0 dBFS) reads amplitude 1 at baseband:
//!
//! | bridge | output | levels |
//! |---|---|---|
//! | half | `2 a - 1` | -1, +1 |
//! | full, 2-level and 3-level | `a - b` (that is `(A - B) / 2` with each leg `A = 2a - 1` swinging ±1) | -1, (0,) +1 |
//!
//! In the units of the literature where each leg swings ±1, the
//! differential output `A - B` is twice this.
//!
//! # The node during dead time
//!
//! When both switches of a leg are off, the load current decides the node
//! voltage through a body diode ([`DeadNode`]). The default,
//! [`DeadNode::Midpoint`], is the ideal case: the node commutates in the
//! middle of each dead interval. For a dead-time generator that is the
//! reference delayed by half the dead time on every edge (a pure delay:
//! no distortion); for separate compare values it is the reference itself.

use rustfft::num_complex::Complex64;
use std::vec::Vec;

use crate::bridge::BridgeKind;
use crate::rebuild::{LegSwitches, OnOff};

/// A step of `delta` at time `t` (ticks).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Step {
    /// Time, ticks.
    pub t: f64,
    /// Change of value.
    pub delta: f64,
}

/// A piecewise-constant waveform on `[0, end)`: `start` at 0, then the
/// steps (strictly increasing times inside `(0, end)`, non-zero deltas).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Wave {
    /// Value at time 0.
    pub start: f64,
    /// Steps in time order.
    pub steps: Vec<Step>,
    /// End of the record, ticks.
    pub end: f64,
}

/// What the switch node does while both switches of a leg are off.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum DeadNode {
    /// Ideal: the node commutates in the middle of each dead interval
    /// (no dead-time error). If the switch that turns on next is the one
    /// that turned off (the other's pulse vanished), the node holds.
    #[default]
    Midpoint,
    /// Current flows out of the leg into the load: the low-side body
    /// diode conducts, the node is low.
    Low,
    /// Current flows into the leg from the load: the high-side body diode
    /// conducts, the node is high.
    High,
}

impl Wave {
    /// A constant waveform.
    pub fn constant(value: f64, end: f64) -> Self {
        Self {
            start: value,
            steps: Vec::new(),
            end,
        }
    }

    /// `on` while `w` is on, `off` otherwise.
    pub fn from_on_off(w: &OnOff, on: f64, off: f64) -> Self {
        let mut state = w.start_on;
        let steps = w
            .toggles
            .iter()
            .map(|&t| {
                state = !state;
                Step {
                    t,
                    delta: if state { on - off } else { off - on },
                }
            })
            .collect();
        Self {
            start: if w.start_on { on } else { off },
            steps,
            end: w.end,
        }
    }

    /// Build from segments `(from, value)` in time order (the first from 0).
    fn from_segments(segs: &[(f64, f64)], end: f64) -> Self {
        let start = segs.first().map_or(0.0, |s| s.1);
        let mut steps = Vec::with_capacity(segs.len());
        let mut v = start;
        for &(t, val) in segs.iter().skip(1) {
            if val != v && t > 0.0 && t < end {
                match steps.last_mut() {
                    Some(Step { t: lt, delta }) if *lt == t => *delta += val - v,
                    _ => steps.push(Step { t, delta: val - v }),
                }
                v = val;
            }
        }
        steps.retain(|s| s.delta != 0.0);
        Self { start, steps, end }
    }

    /// Value at the end of the record (just before `end`).
    pub fn end_value(&self) -> f64 {
        self.start + self.steps.iter().map(|s| s.delta).sum::<f64>()
    }

    /// Value at time `t` (the value after a step at `t`).
    pub fn value_at(&self, t: f64) -> f64 {
        let n = self.steps.partition_point(|s| s.t <= t);
        self.start + self.steps[..n].iter().map(|s| s.delta).sum::<f64>()
    }

    /// `gain * self + offset`.
    pub fn affine(&self, gain: f64, offset: f64) -> Self {
        Self {
            start: gain * self.start + offset,
            steps: self
                .steps
                .iter()
                .map(|s| Step {
                    t: s.t,
                    delta: gain * s.delta,
                })
                .collect(),
            end: self.end,
        }
    }

    /// `ga * self + gb * other` (both over the same record).
    ///
    /// # Panics
    /// If the two records differ in length.
    pub fn combine(&self, ga: f64, other: &Wave, gb: f64) -> Self {
        assert!(
            (self.end - other.end).abs() <= 1e-9 * self.end.abs().max(1.0),
            "records differ: {} and {} ticks",
            self.end,
            other.end
        );
        let mut steps = Vec::with_capacity(self.steps.len() + other.steps.len());
        let (mut i, mut j) = (0, 0);
        let (a, b) = (&self.steps, &other.steps);
        while i < a.len() || j < b.len() {
            let (t, d) = if j >= b.len() || (i < a.len() && a[i].t < b[j].t) {
                i += 1;
                (a[i - 1].t, ga * a[i - 1].delta)
            } else if i >= a.len() || b[j].t < a[i].t {
                j += 1;
                (b[j - 1].t, gb * b[j - 1].delta)
            } else {
                i += 1;
                j += 1;
                (a[i - 1].t, ga * a[i - 1].delta + gb * b[j - 1].delta)
            };
            if d != 0.0 {
                steps.push(Step { t, delta: d });
            }
        }
        Self {
            start: ga * self.start + gb * other.start,
            steps,
            end: self.end,
        }
    }

    /// The first `end` ticks of the record.
    pub fn truncated(&self, end: f64) -> Self {
        let n = self.steps.partition_point(|s| s.t < end);
        Self {
            start: self.start,
            steps: self.steps[..n].to_vec(),
            end: end.min(self.end),
        }
    }

    /// Mean value over the record.
    pub fn mean(&self) -> f64 {
        let mut area = self.start * self.end;
        for s in &self.steps {
            area += s.delta * (self.end - s.t);
        }
        area / self.end
    }

    /// Complex amplitude of the component at `cycles` cycles per record,
    /// in closed form from the edges: `c = (2 / T) int_0^T s(t)
    /// exp(-j 2 pi f t) dt` with `f = cycles / T`, so that the signal holds
    /// `|c| cos(2 pi f t + arg c)`. Exact for any `cycles > 0`; for whole
    /// `cycles` it is the Fourier coefficient of the periodic record (no
    /// leakage, no aliasing). Costs one complex exponential an edge.
    pub fn coefficient(&self, cycles: f64) -> Complex64 {
        let tt = self.end;
        if cycles == 0.0 {
            return Complex64::new(self.mean(), 0.0);
        }
        let w = 2.0 * std::f64::consts::PI * cycles / tt; // rad per tick
        let phase = |t: f64| {
            // Reduce the cycle count before scaling for precision.
            let c = cycles * (t / tt);
            let frac = c - c.floor();
            let a = 2.0 * std::f64::consts::PI * frac;
            Complex64::new(a.cos(), -a.sin())
        };
        let e_end = phase(tt);
        // int_0^T s e^{-jwt} = [s0 (1 - e(T)) + sum d_i (e(t_i) - e(T))] / (jw)
        let mut acc = (Complex64::new(1.0, 0.0) - e_end) * self.start;
        for s in &self.steps {
            acc += (phase(s.t) - e_end) * s.delta;
        }
        acc / Complex64::new(0.0, w) * (2.0 / tt)
    }
}

/// Switch-node waveform of one leg (1 = high side on, 0 = low side on),
/// with the dead intervals resolved by `dead`. Both switches on at once
/// (shoot-through, which [`crate::rebuild::dead_gaps`] reports) is not
/// modelled: the switch that turned on last sets the node.
pub fn node_wave(leg: &LegSwitches, dead: DeadNode) -> Wave {
    let end = leg.high.end;
    let hi = leg.high.on_intervals();
    let lo = leg.low.on_intervals();
    // Conduction intervals in time order, merged from the two switches.
    let mut iv: Vec<(f64, f64, f64)> = Vec::with_capacity(hi.len() + lo.len());
    let (mut i, mut j) = (0, 0);
    while i < hi.len() || j < lo.len() {
        if j >= lo.len() || (i < hi.len() && hi[i].0 <= lo[j].0) {
            iv.push((hi[i].0, hi[i].1, 1.0));
            i += 1;
        } else {
            iv.push((lo[j].0, lo[j].1, 0.0));
            j += 1;
        }
    }
    let gap_value = |prev: f64| match dead {
        DeadNode::Midpoint => prev,
        DeadNode::Low => 0.0,
        DeadNode::High => 1.0,
    };
    let mut segs: Vec<(f64, f64)> = Vec::with_capacity(iv.len() * 2 + 1);
    let mut cursor = 0.0;
    let mut prev: Option<f64> = None;
    for &(a, b, v) in &iv {
        if a > cursor {
            // Dead interval [cursor, a).
            match (dead, prev) {
                (DeadNode::Midpoint, Some(p)) if p != v => {
                    segs.push((cursor, p));
                    segs.push((0.5 * (cursor + a), v));
                }
                (DeadNode::Midpoint, None) => segs.push((cursor, v)),
                (_, p) => segs.push((cursor, gap_value(p.unwrap_or(v)))),
            }
        }
        segs.push((a.max(cursor), v));
        cursor = cursor.max(b);
        prev = Some(v);
    }
    if cursor < end {
        let v = prev.unwrap_or(0.5);
        segs.push((cursor, gap_value(v)));
    }
    Wave::from_segments(&segs, end)
}

/// The bridge output (normalised as in the module docs) from the switches
/// of its legs (one leg for a half bridge, two for full bridges).
///
/// # Panics
/// If `legs` holds fewer legs than `kind` needs.
pub fn bridge_output(kind: BridgeKind, legs: &[LegSwitches], dead: DeadNode) -> Wave {
    let a = node_wave(&legs[0], dead);
    match kind {
        BridgeKind::Half => a.affine(2.0, -1.0),
        BridgeKind::Full2 | BridgeKind::Full3 => a.combine(1.0, &node_wave(&legs[1], dead), -1.0),
    }
}
