//! Rebuild the switch-level waveforms from compare words (host, `std`).
//!
//! This is the timer and the dead-time generator in software: given the
//! words the firmware wrote, it returns when each switch is on, to the tick.
//! It knows nothing of how the words were computed, so it checks the
//! modulator from the outside.
//!
//! Times are in ticks from the start of the first update, as `f64` (whole
//! ticks are exact up to 2^53; the measurement lab's exact mode uses the
//! same types with fractional times).

use std::vec::Vec;

use crate::bridge::{Bridge, DeadTimeForm, LegMode};
use crate::timer::{Counting, Timer};

/// A two-state waveform over `[0, end)`: `start_on` at 0, flipping at each
/// time in `toggles` (strictly increasing, all inside `(0, end)`).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct OnOff {
    /// State at time 0.
    pub start_on: bool,
    /// Times at which the state flips.
    pub toggles: Vec<f64>,
    /// End of the record.
    pub end: f64,
}

impl OnOff {
    /// On-intervals `[rise, fall)` (a pulse still on at the end closes at `end`).
    pub fn on_intervals(&self) -> Vec<(f64, f64)> {
        let mut out = Vec::new();
        let mut on = self.start_on;
        let mut since = 0.0;
        for &t in &self.toggles {
            if on {
                out.push((since, t));
            }
            on = !on;
            since = t;
        }
        if on {
            out.push((since, self.end));
        }
        out
    }

    /// Build from on-intervals (sorted, may touch: touching ones merge;
    /// empty ones vanish).
    pub fn from_intervals(intervals: &[(f64, f64)], end: f64) -> Self {
        let mut merged: Vec<(f64, f64)> = Vec::new();
        for &(a, b) in intervals {
            if b <= a {
                continue;
            }
            match merged.last_mut() {
                Some(last) if a <= last.1 => last.1 = last.1.max(b),
                _ => merged.push((a, b)),
            }
        }
        let mut toggles = Vec::with_capacity(merged.len() * 2);
        let mut start_on = false;
        for (a, b) in merged {
            if a <= 0.0 {
                start_on = true;
            } else {
                toggles.push(a);
            }
            if b < end {
                toggles.push(b);
            }
        }
        Self {
            start_on,
            toggles,
            end,
        }
    }

    /// The complement.
    pub fn inverted(&self) -> Self {
        Self {
            start_on: !self.start_on,
            toggles: self.toggles.clone(),
            end: self.end,
        }
    }

    /// What a dead-time generator makes of this reference: every rising
    /// edge is delayed by `delay`; a pulse shorter than `delay` vanishes.
    pub fn rising_delayed(&self, delay: f64) -> Self {
        let iv: Vec<(f64, f64)> = self
            .on_intervals()
            .into_iter()
            .map(|(a, b)| {
                if a <= 0.0 && self.start_on {
                    (a, b)
                } else {
                    (a + delay, b)
                }
            })
            .collect();
        Self::from_intervals(&iv, self.end)
    }

    /// Time on within `[0, end)`.
    pub fn on_time(&self) -> f64 {
        self.on_intervals().iter().map(|(a, b)| b - a).sum()
    }
}

/// The two switches of one leg.
#[derive(Clone, Debug, PartialEq)]
pub struct LegSwitches {
    /// High-side switch.
    pub high: OnOff,
    /// Low-side switch.
    pub low: OnOff,
}

/// On-intervals of one timer channel with compare value `r` in update slot
/// `k`, output `mode`, appended to `out`.
fn channel_slot(timer: &Timer, k: usize, r: u32, mode: LegMode, out: &mut Vec<(f64, f64)>) {
    let p = timer.period_ticks() as f64;
    let top = timer.top() as f64;
    let upp = timer.updates_per_period() as usize;
    let t0 = (k / upp) as f64 * p;
    let r = (r as f64).min(top);
    // Each slot: its span in the period and where the counter is below r.
    let falling = (0.0, top, top - r, top); // up/down, counter falls from the top
    let rising = (top, p, top, top + r); // up/down, counter rises from 0
    let slots: &[(f64, f64, f64, f64)] = match (timer.counting(), upp, k % 2) {
        (Counting::Up, _, _) => &[(0.0, p, 0.0, r)],
        (Counting::UpDown, 1, _) => &[falling, rising],
        (Counting::UpDown, _, 0) => &[falling],
        (Counting::UpDown, _, _) => &[rising],
    };
    for &(s0, s1, a, b) in slots {
        match mode {
            LegMode::HighBelow => out.push((t0 + a, t0 + b)),
            LegMode::HighAtOrAbove => {
                out.push((t0 + s0, t0 + a));
                out.push((t0 + b, t0 + s1));
            }
        }
    }
}

/// The waveform of one timer channel running in `mode` with one compare
/// value per update.
pub fn channel_wave(timer: &Timer, values: impl IntoIterator<Item = u32>, mode: LegMode) -> OnOff {
    let mut iv = Vec::new();
    let mut n = 0;
    for (k, r) in values.into_iter().enumerate() {
        channel_slot(timer, k, r, mode, &mut iv);
        n = k + 1;
    }
    iv.sort_by(|a, b| a.0.total_cmp(&b.0));
    let end = n as f64 * timer.period_ticks() as f64 / timer.updates_per_period() as f64;
    OnOff::from_intervals(&iv, end)
}

/// Rebuild the switches of `leg` (0 = A, 1 = B) of audio channel `channel`
/// from the modulator's word stream `words` (layout as in
/// [`crate::modulator`]), for `channels` audio channels.
pub fn leg_switches(
    timer: &Timer,
    bridge: &Bridge,
    words: &[u32],
    channels: usize,
    channel: usize,
    leg: usize,
) -> LegSwitches {
    let wpu = bridge.words_per_update();
    let per_leg = wpu / bridge.legs();
    let base = channel * wpu + leg * per_leg;
    let stride = channels * wpu;
    let word = |i: usize| words.chunks_exact(stride).map(move |u| u[base + i]);
    let mode = bridge.leg_mode(leg);
    match bridge.spec().form {
        DeadTimeForm::Generator => {
            let reference = channel_wave(timer, word(0), mode);
            let d = bridge.dead_time_ticks() as f64;
            LegSwitches {
                high: reference.rising_delayed(d),
                low: reference.inverted().rising_delayed(d),
            }
        }
        DeadTimeForm::SeparateCompares => LegSwitches {
            high: channel_wave(timer, word(0), mode),
            low: channel_wave(timer, word(1), mode.flipped()),
        },
    }
}

/// Shortest time between a switch of the leg turning off and the other
/// turning on (the dead time actually achieved), and whether the two were
/// ever on together. `None` if neither switch ever turns on after the other.
pub fn dead_gaps(leg: &LegSwitches) -> (Option<f64>, bool) {
    let h = leg.high.on_intervals();
    let l = leg.low.on_intervals();
    let mut overlap = false;
    let mut min_gap: Option<f64> = None;
    let mut all: Vec<(f64, f64, bool)> = h.iter().map(|&(a, b)| (a, b, true)).collect();
    all.extend(l.iter().map(|&(a, b)| (a, b, false)));
    all.sort_by(|a, b| a.0.total_cmp(&b.0));
    for w in all.windows(2) {
        let (a, b) = (w[0], w[1]);
        if b.0 < a.1 {
            overlap = overlap || a.2 != b.2;
        } else if a.2 != b.2 {
            let g = b.0 - a.1;
            min_gap = Some(min_gap.map_or(g, |m: f64| m.min(g)));
        }
    }
    (min_gap, overlap)
}
