//! Edge solver: from the signal at the update rate to the *high count* of
//! each update, the compare value before rounding, with [`FRAC_BITS`]
//! fraction bits.
//!
//! # Uniform sampling
//!
//! The sample at the start of the update slot sets the edge:
//! `c = (1 + x) / 2 * top`. That is the regularly sampled PWM of the double
//! Fourier series literature, with its signal-dependent harmonics
//! (REFERENCES.md section 1).
//!
//! # Natural sampling
//!
//! The edge goes where the carrier meets the signal itself, the signal
//! between samples being a polynomial through neighbouring samples (linear,
//! quadratic or cubic Lagrange) and the meeting point solved by
//! Newton-Raphson steps ([`crate::crossing`] has the arithmetic). Sample
//! `k` is the signal at the start of update slot `k`, as the oversampler
//! delivers it. Its linear-phase filters put every output on one uniform
//! grid behind the input by a constant delay, and a constant delay of the
//! signal against the carrier changes nothing in natural sampling: only the
//! uniform spacing matters. The solver waits for the later samples the
//! polynomial needs and so delays the signal by
//! [`EdgeSolver::delay_updates`] updates:
//!
//! | timer | slot's carrier | nodes of order 1 / 2 / 3 | delay |
//! |---|---|---|---|
//! | trailing edge | rises | `k..k+1` / `k-1..k+1` / `k-1..k+2` | 1 / 1 / 2 |
//! | leading edge | falls | same | same |
//! | double edge, two updates | falls in even slots, rises in odd | same | same |
//! | double edge, one update | see below | none | 2 / 2 / 3 (0 without iterations) |
//!
//! Cost, in instructions per update on a Cortex-M4 (QEMU `mps2-an386` with
//! `-icount`, the harness of `benches/cortex-m4` timing this stage alone on
//! an update-rate signal), cubic with one Newton step: about 41 through
//! [`EdgeSolver::process`] on passes of 64 updates, as the modulator calls
//! it (`block-edge-natural-cubic1`), and 70 through [`EdgeSolver::next`],
//! one call an update (`edge-natural-cubic1`); uniform sampling 3.7 and 13
//! (`block-edge-uniform`, `edge-uniform`). Linear and quadratic were 27 and
//! 36 on the earlier blocks of 16 updates (not measured since). Both legs of a 3-level bridge
//! ([`EdgeSolver::process_pair`], as [`crate::leg_pair::LegPair::split`]
//! calls it, split included), on passes of 64 updates with two updates a
//! period, one evaluation serving both legs (`Poly::crossing_pair27`) and
//! the slots taken in (falling, rising) pairs: about 60; 87 when each leg
//! had its own.
//!
//! A falling carrier is the rising case with time reversed; the high count
//! is `(1 + v) / 2 * top` with `v` the carrier value at the crossing, for
//! every kind. The carrier and the signal must not be too steep for each
//! other; the limit and the behaviour beyond it are in [`crate::crossing`].
//!
//! # One update a period on an up/down timer
//!
//! One compare value sets both edges, so the pulse is centred in the period
//! whatever the solver does: natural sampling's off-centre pulse cannot be
//! written. What the pulse *carries* can still be matched. A pulse of width
//! `W` (fraction of the period `T`) centred at `t` has the spectrum
//! `e^(-jωt) 2 sin(ωWT/2) / ω`, which at low frequency is that of an impulse
//! of area `T (W + D²W³/24 + D⁴W⁵/1920 + ...)`, `D` the time derivative in
//! units of the period. Uniform sampling writes `W = (1 + x) / 2` and so
//! adds `D²W³/24`: the harmonics of the symmetric-PWM formula in
//! REFERENCES.md section 1 (its leading term for H2 is exactly
//! `(π r)² M / 4` \[derived\]). The width between the two natural crossings
//! is worse: its pulse belongs `(x₂ − x₁) / 8` periods off-centre, and
//! moving it to the centre adds −2 times the uniform error (6 dB more
//! distortion, measured in `tests/natural.rs`). So this mode writes the
//! width whose centred pulse carries the signal, the solution of
//! `W + D²W³/24 + D⁴W⁵/1920 = (1 + x) / 2` to second order: with
//! `y = 1 + x` and `G = D²(y³)`,
//!
//! `x_eq = x − G/96 + D²(y²G)/3072 − D⁴(y⁵)/30720`
//!
//! (derivatives by 5-point differences for `G` and `D⁴`, 3 points for the
//! small cross term). Each sample is taken as the value at its pulse's
//! centre, a fixed delay of half a period that changes no harmonic, so no
//! interpolation is needed. The parameters keep their sense of "accuracy":
//! `iterations: 0` is uniform sampling (no delay); otherwise `order` 1 or 2
//! keeps the first correction (`G/96`, delay 2) and `order` 3 all of them
//! (delay 3); 1, 2 or 3 iterations give the same result. Cost: about 80
//! instructions an update with the first correction, 108 with both.
//!
//! ```
//! use ticktone::edge::{EdgeSolver, Sampling, FRAC_BITS};
//! use ticktone::timer::{Timer, TimerSpec, Edge};
//! // 256-tick period, trailing edge: x = +0.5 gives a high count of 192.
//! let t = Timer::try_new(TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Trailing)).unwrap();
//! let mut e = EdgeSolver::try_new(&t, Sampling::Uniform).unwrap();
//! assert_eq!(e.next(0x4000_0000) >> FRAC_BITS, 192);
//! // Natural sampling of a constant gives the same edge once the cubic's
//! // four samples are in (the signal is delayed by 2 updates).
//! let mut n = EdgeSolver::try_new(&t, Sampling::NATURAL).unwrap();
//! assert_eq!(n.delay_updates(), 2);
//! let c: Vec<i32> = (0..4).map(|_| n.next(0x4000_0000)).collect();
//! assert_eq!(c[3], 192 << FRAC_BITS);
//! ```

use crate::crossing::{mulh, mulh_round, Poly, THIRD};
use crate::error::ConfigError;
use crate::timer::{Edge, Timer, UpdateScheme};
use core::mem::take;

/// Fraction bits of an edge position (high count) in ticks.
pub const FRAC_BITS: u32 = 16;

/// How the edge position is taken from the signal.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Sampling {
    /// The sample at the start of the update slot sets the edge.
    Uniform,
    /// Natural sampling computed digitally (module docs).
    Natural {
        /// Interpolation order: 1 linear, 2 quadratic, 3 cubic.
        order: u8,
        /// Newton steps, 0 to 3 (0 takes the interpolated value at the
        /// middle of the slot).
        iterations: u8,
    },
}

impl Sampling {
    /// Cubic interpolation and one Newton step: at 10 kHz, -1 dBFS,
    /// 384 kHz, H2 and H3 sit 57 dB or more below uniform sampling's for
    /// every edge kind (tests/natural.rs).
    pub const NATURAL: Self = Sampling::Natural {
        order: 3,
        iterations: 1,
    };
}

/// What the solver computes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Geometry {
    Uniform,
    /// One crossing a slot; which way the carrier runs is in `phase`.
    Crossing,
    /// One update a period, up/down: equivalent centred width.
    Centred,
}

/// Per-sample values of the centred-width mode (formats beside the code).
#[derive(Clone, Copy, Debug, Default)]
struct Entry {
    x: i32,
    y2: i32,
    y3: i32,
    y5: i32,
    t1: i32,
    p: i32,
}

/// Ring length of the centred-width mode (power of two: indices are masked).
const RING: usize = 8;

/// Turns one signal value a update into a high count (Q16 ticks).
#[derive(Clone, Debug)]
pub struct EdgeSolver {
    sampling: Sampling,
    geometry: Geometry,
    /// `top << FRAC_BITS`.
    top16: u32,
    order: u8,
    iterations: u32,
    delay: u32,
    /// -1 when the next slot's carrier falls (time-reversed problem), else 0.
    phase: i32,
    /// -1 when the carrier's direction alternates (two updates), else 0.
    toggle: i32,
    /// Updates so far (ring position of the centred-width mode).
    count: u32,
    /// Last four samples in Q26 (`x >> 5`), newest last.
    hist: [i32; 4],
    ring: [Entry; RING],
}

impl EdgeSolver {
    /// A solver for this timer.
    ///
    /// # Errors
    /// [`ConfigError::NaturalSampling`] for an order outside 1..=3 or more
    /// than 3 iterations.
    pub fn try_new(timer: &Timer, sampling: Sampling) -> Result<Self, ConfigError> {
        let (geometry, order, iterations) = match sampling {
            Sampling::Uniform => (Geometry::Uniform, 0, 0),
            Sampling::Natural { order, iterations } => {
                if !(1..=3).contains(&order) || iterations > 3 {
                    return Err(ConfigError::NaturalSampling { order, iterations });
                }
                let g = match (timer.edge(), timer.update()) {
                    (Edge::Double, UpdateScheme::Single) => Geometry::Centred,
                    _ => Geometry::Crossing,
                };
                (g, order, iterations)
            }
        };
        let delay = match geometry {
            Geometry::Uniform => 0,
            Geometry::Centred if iterations == 0 => 0,
            Geometry::Centred => [0, 2, 2, 3][order as usize],
            Geometry::Crossing => [0, 1, 1, 2][order as usize],
        };
        // The first update's slot: the carrier falls for leading edge and
        // in slot 0 of a double update (phase is toggled before use).
        let (phase, toggle) = match (timer.edge(), timer.update()) {
            (Edge::Leading, _) => (-1, 0),
            (Edge::Double, UpdateScheme::Double) => (0, -1),
            _ => (0, 0),
        };
        Ok(Self {
            sampling,
            geometry,
            top16: timer.top() << FRAC_BITS,
            order,
            iterations: iterations as u32,
            delay,
            phase,
            toggle,
            count: 0,
            hist: [0; 4],
            ring: [Entry::default(); RING],
        })
    }

    /// The sampling method.
    pub const fn sampling(&self) -> Sampling {
        self.sampling
    }

    /// Updates of delay from the newest signal value to the edge it sets.
    pub const fn delay_updates(&self) -> u32 {
        self.delay
    }

    /// The high count for the next update from the newest signal value
    /// (Q1.31), in ticks with [`FRAC_BITS`] fraction bits, within
    /// `[0, top << FRAC_BITS]` for any input.
    #[inline]
    pub fn next(&mut self, x: i32) -> i32 {
        let v = match self.geometry {
            Geometry::Uniform => x,
            Geometry::Crossing => self.crossing(x),
            Geometry::Centred => self.centred(x),
        };
        high_count(v, self.top16)
    }

    /// The crossing in this update's slot, Q1.31.
    #[inline(always)]
    fn crossing(&mut self, x: i32) -> i32 {
        let s = x >> 5;
        let [_, a, b, c] = self.hist;
        self.hist = [a, b, c, s];
        let p = match self.order {
            1 => Poly::linear26(c, s),
            2 => Poly::quadratic26(b, c, s),
            _ => Poly::cubic26(a, b, c, s),
        };
        self.phase ^= self.toggle;
        p.reversed_if(self.phase).crossing(self.iterations)
    }

    /// Both legs of a 3-level bridge from one polynomial a slot: on entry
    /// `a` holds the signal (Q1.31), on return `a` holds leg A's high counts
    /// (the natural PWM of `x`, as [`EdgeSolver::process`] gives it) and
    /// `b` leg B's (the natural PWM of `-x`). Leg B's crossing needs no
    /// second interpolation: `-p` meets a carrier where `p` meets the
    /// carrier running the other way, so `x_B = -(crossing of p reversed)`.
    /// With one Newton step both crossings come from one evaluation and
    /// agree with `process` to a few 2^-16 tick; with two updates a period,
    /// whose shorter series differs, to 3e-3 tick on a full-scale 20 kHz
    /// sine (test beside the code). The counts are rebuilt from the split.
    /// Returns `false`, touching nothing, where the method has no crossing
    /// a slot (uniform sampling, or the centred width of one update a
    /// period): the caller then solves leg B from `-x` with a second solver.
    #[inline]
    pub fn process_pair(&mut self, a: &mut [i32], b: &mut [i32]) -> bool {
        self.pair_dispatch::<false>(a, b)
    }

    /// [`EdgeSolver::process_pair`], returning the differential and
    /// common-mode parts `((c_A - c_B + top) / 2, (c_A + c_B - top) / 2)`
    /// (floored, Q16 ticks) in `a` and `b` instead of the two counts (the
    /// leg pair's split, fused into the same loop).
    #[inline]
    pub(crate) fn process_pair_split(&mut self, a: &mut [i32], b: &mut [i32]) -> bool {
        self.pair_dispatch::<true>(a, b)
    }

    #[inline(always)]
    fn pair_dispatch<const SPLIT: bool>(&mut self, a: &mut [i32], b: &mut [i32]) -> bool {
        if self.geometry != Geometry::Crossing {
            return false;
        }
        // Slices of different lengths: the common length.
        let len = a.len().min(b.len());
        let (a, b) = (&mut a[..len], &mut b[..len]);
        let alt = self.toggle != 0;
        match (self.order, self.iterations == 1, alt) {
            (1, true, true) => self.crossings_pair::<1, true, true>(a, b),
            (2, true, true) => self.crossings_pair::<2, true, true>(a, b),
            (3, true, true) => self.crossings_pair::<3, true, true>(a, b),
            (1, true, false) => self.crossings_pair::<1, true, false>(a, b),
            (2, true, false) => self.crossings_pair::<2, true, false>(a, b),
            (3, true, false) => self.crossings_pair::<3, true, false>(a, b),
            (1, false, true) => self.crossings_pair::<1, false, true>(a, b),
            (2, false, true) => self.crossings_pair::<2, false, true>(a, b),
            (3, false, true) => self.crossings_pair::<3, false, true>(a, b),
            (1, false, false) => self.crossings_pair::<1, false, false>(a, b),
            (2, false, false) => self.crossings_pair::<2, false, false>(a, b),
            _ => self.crossings_pair::<3, false, false>(a, b),
        }
        if !SPLIT {
            // Back from the split to the two counts: c_A = n + w and
            // c_B = top - n + w (the floors of n and w cost at most 2^-15
            // tick; the clamp keeps the documented range).
            let top16 = self.top16 as i32;
            for (n, w) in a.iter_mut().zip(b.iter_mut()) {
                (*n, *w) = ((*n + *w).clamp(0, top16), (top16 - *n + *w).clamp(0, top16));
            }
        }
        true
    }

    /// Both legs of a 3-level bridge, returned split as
    /// [`EdgeSolver::process_pair_split`] documents. `ONE`: exactly one
    /// Newton step, both crossings from one evaluation
    /// (`Poly::crossing_pair27`); else the configured number of steps,
    /// each crossing as [`EdgeSolver::process`] solves it. `ALT`: the
    /// carrier's direction alternates from slot to slot.
    #[inline(never)]
    fn crossings_pair<const ORDER: u8, const ONE: bool, const ALT: bool>(
        &mut self,
        a: &mut [i32],
        b: &mut [i32],
    ) {
        let top16 = self.top16 as i32;
        let steps = self.iterations;
        let [_, h1, h2, h3] = self.hist;
        // The next block's history, set before the loop so that the loop's
        // own copy need not outlive it (fewer registers on a Cortex-M4).
        self.hist = match *a {
            [.., x1, x2, x3] => [0, x1 >> 5, x2 >> 5, x3 >> 5],
            [x2, x3] => [0, h3, x2 >> 5, x3 >> 5],
            [x3] => [0, h2, h3, x3 >> 5],
            [] => self.hist,
        };
        let mut h = [h1, h2, h3];
        // `top16` signed by the direction of the carrier in the last slot
        // before the block (negative where it fell): with one update a
        // period that of every slot; with two, the first slot runs the
        // other way.
        let dir = if self.phase == 0 { top16 } else { -top16 };
        if ALT && a.len() % 2 == 1 {
            self.phase = !self.phase;
        }
        let solve = |[s0, s1, s2, s3]: [i32; 4]| {
            let p = match ORDER {
                1 => Poly::linear26(s2, s3),
                2 => Poly::quadratic26(s1, s2, s3),
                _ => Poly::cubic26(s0, s1, s2, s3),
            };
            // v₊ meets the rising ramp, v₋ the falling one (Q5.27).
            // Two updates a period halve the slope: three terms of the
            // series suffice there (crossing docs).
            if ONE && ALT {
                p.crossing_pair27::<3>()
            } else if ONE {
                p.crossing_pair27::<4>()
            } else {
                (p.crossing(steps) >> 4, p.reversed().crossing(steps) >> 4)
            }
        };
        if ALT {
            // Falling slots as rising ones with the crossings swapped, which
            // negates the common-mode part exactly: no sign in a register.
            // A rising first slot alone, then (falling, rising) pairs.
            let (mut a, mut b) = (a, b);
            if dir < 0 {
                let (fa, fb) = (
                    take(&mut a).split_first_mut(),
                    take(&mut b).split_first_mut(),
                );
                if let (Some((fa, ta)), Some((fb, tb))) = (fa, fb) {
                    let [h1, h2, h3] = h;
                    let s = *fa >> 5;
                    h = [h2, h3, s];
                    let (vp, vm) = solve([h1, h2, h3, s]);
                    (*fa, *fb) = split_pair(vp, vm, top16, top16);
                    (a, b) = (ta, tb);
                }
            }
            let (pa, la) = a.as_chunks_mut::<2>();
            let (pb, lb) = b.as_chunks_mut::<2>();
            for ([xa0, xa1], [xb0, xb1]) in pa.iter_mut().zip(pb.iter_mut()) {
                let [h1, h2, h3] = h;
                let (s0, s1) = (*xa0 >> 5, *xa1 >> 5);
                h = [h3, s0, s1];
                let (vp, vm) = solve([h1, h2, h3, s0]);
                (*xa0, *xb0) = split_pair(vm, vp, top16, top16);
                let (vp, vm) = solve([h2, h3, s0, s1]);
                (*xa1, *xb1) = split_pair(vp, vm, top16, top16);
            }
            for (xa, xb) in la.iter_mut().zip(lb.iter_mut()) {
                let [h1, h2, h3] = h;
                let (vp, vm) = solve([h1, h2, h3, *xa >> 5]);
                (*xa, *xb) = split_pair(vm, vp, top16, top16);
            }
        } else {
            for (xa, xb) in a.iter_mut().zip(b.iter_mut()) {
                let [h1, h2, h3] = h;
                let s = *xa >> 5;
                h = [h2, h3, s];
                let (vp, vm) = solve([h1, h2, h3, s]);
                (*xa, *xb) = split_pair(vp, vm, top16, dir);
            }
        }
    }

    /// A block of updates in place: each signal value (Q1.31) becomes the
    /// high count [`EdgeSolver::next`] would return for it, in order, with
    /// the same results. The mode is decided once a block and the history
    /// stays in registers, which saves about a third of the per-update cost
    /// of natural sampling on a Cortex-M4.
    #[inline]
    pub fn process(&mut self, buf: &mut [i32]) {
        if let [x] = buf {
            // One update (no oversampling): the block set-up would cost more.
            *x = self.next(*x);
            return;
        }
        match (self.geometry, self.order, self.iterations) {
            (Geometry::Crossing, 1, 1) => self.crossings::<1, 1>(buf),
            (Geometry::Crossing, 2, 1) => self.crossings::<2, 1>(buf),
            (Geometry::Crossing, 3, 1) => self.crossings::<3, 1>(buf),
            (Geometry::Crossing, 1, _) => self.crossings::<1, 0>(buf),
            (Geometry::Crossing, 2, _) => self.crossings::<2, 0>(buf),
            (Geometry::Crossing, 3, _) => self.crossings::<3, 0>(buf),
            (Geometry::Uniform, _, _) => {
                for x in buf.iter_mut() {
                    *x = high_count(*x, self.top16);
                }
            }
            _ => {
                for x in buf.iter_mut() {
                    *x = self.next(*x);
                }
            }
        }
    }

    /// [`EdgeSolver::process`] for the crossing modes: one interpolation
    /// order, and either exactly one Newton step (`ONE_STEP = 1`) or the
    /// configured number. The carrier's direction is fixed in each loop
    /// (two updates a period go in falling/rising pairs).
    #[inline(never)]
    fn crossings<const ORDER: u8, const ONE_STEP: u32>(&mut self, buf: &mut [i32]) {
        let steps = if ONE_STEP == 1 { 1 } else { self.iterations };
        let top16 = self.top16;
        let mut h = self.hist;
        let mut solve = |x: &mut i32, falling: bool| {
            *x = high_count(slot_crossing::<ORDER>(&mut h, *x, falling, steps), top16);
        };
        if self.toggle == 0 && self.phase != 0 {
            for x in buf.iter_mut() {
                solve(x, true);
            }
        } else if self.toggle == 0 {
            for x in buf.iter_mut() {
                solve(x, false);
            }
        } else {
            // The next slot's carrier falls when the last one's rose.
            let mut rest = &mut *buf;
            if self.phase != 0 {
                if let [first, tail @ ..] = rest {
                    solve(first, false);
                    rest = tail;
                }
            }
            let (pairs, last) = rest.as_chunks_mut::<2>();
            for [down, up] in pairs {
                solve(down, true);
                solve(up, false);
            }
            for x in last {
                solve(x, true);
            }
            if buf.len() % 2 == 1 {
                self.phase = !self.phase;
            }
        }
        self.hist = h;
    }

    /// The equivalent centred width (module docs) as a signal value, Q1.31.
    fn centred(&mut self, x: i32) -> i32 {
        if self.iterations == 0 {
            return x;
        }
        let n = self.count;
        self.count = n.wrapping_add(1);
        let at = |back: u32| (n.wrapping_sub(back) as usize) & (RING - 1);
        let y = (x >> 1) + (1 << 30); // 1 + x, Q30, [0, 2)
        let y2 = mulh(y, y); // Q28, [0, 4)
        let y3 = mulh(y2, y); // Q26, [0, 8)
        let y5 = mulh(y3, y2); // Q22, [0, 32)
        let r = &mut self.ring;
        r[at(0)] = Entry {
            x,
            y2,
            y3: y3 >> 4, // Q22
            y5,
            t1: 0,
            p: 0,
        };
        // 12 G = 12 D²(y³) about sample n-2, 5-point difference, Q22:
        // |.| <= 32 * 8 = 2^8, so within 2^30.
        let s = 16 * (r[at(1)].y3 + r[at(3)].y3) - 30 * r[at(2)].y3 - r[at(0)].y3 - r[at(4)].y3;
        // G / 96 = s / 1152 in Q31: s (Q22) * 4/9.
        let t1 = mulh(s, 1_908_874_354);
        if self.order < 3 {
            return r[at(2)].x.saturating_sub(t1);
        }
        // G = s / 12 in Q24 (s / 3), y² G in Q20, |.| < 86.
        let p = mulh(r[at(2)].y2, mulh(s, THIRD));
        r[at(2)].t1 = t1;
        r[at(2)].p = p;
        let c = at(3);
        // D²(y² G) / 3072 in Q31 = (Q20 second difference) * 2/3.
        let t2 = mulh((r[at(4)].p - 2 * r[c].p + p) << 1, THIRD);
        // D⁴(y⁵) / 30720 in Q31 = (Q22 fourth difference) / 60; |.| <= 2^30.
        let d4 = r[at(5)].y5 + r[at(1)].y5 + 6 * r[c].y5 - 4 * (r[at(4)].y5 + r[at(2)].y5);
        let t3 = mulh(d4, 71_582_788);
        r[c].x
            .saturating_sub(r[c].t1)
            .saturating_add(t2)
            .saturating_sub(t3)
    }
}

/// Push `x` (Q1.31) into the Q26 history `h` and solve the slot's crossing.
#[inline(always)]
fn slot_crossing<const ORDER: u8>(h: &mut [i32; 4], x: i32, falling: bool, steps: u32) -> i32 {
    let [_, a, b, c] = *h;
    let d = x >> 5;
    *h = [a, b, c, d];
    let p = match ORDER {
        1 => Poly::linear26(c, d),
        2 => Poly::quadratic26(b, c, d),
        _ => Poly::cubic26(a, b, c, d),
    };
    let p = if falling { p.reversed() } else { p };
    p.crossing(steps)
}

/// The split of one update of the leg pair from its two crossings, `v₊`
/// where the rising ramp meets the signal's curve and `v₋` where the
/// falling one does (Q5.27, within `[−1, 1)`): the differential and
/// common-mode parts in Q16 ticks, `dir` being `top << 16` where the slot's
/// carrier rises and its negative where it falls.
///
/// Leg A crosses at `v₊` and leg B at `−v₋` where the carrier rises, at `v₋`
/// and `−v₊` where it falls. So the differential part is
/// `(1 + (v₊ + v₋) / 2) top / 2` either way and the common-mode part
/// `±(v₊ − v₋) top / 4`, `+` where the carrier rises. The sums are Q1.31
/// after the shift (|.| <= 2^28 in Q27). The common-mode part is rounded to
/// nearest: a floor would err by about half a unit in opposite directions
/// on rising and falling slots wherever `v₊ ≈ v₋` (small signals), an
/// error alternating at half the update rate, which the carrier's
/// alternating edge offsets mix into the band (module docs of
/// [`crate::leg_pair`]). Measured in the reference scenario with a
/// 5th-order shaper at −60 dBFS: SNR 111.4 dB re full scale with a floor
/// here, 141.7 dB rounded (the shaped rounding predicts 142.8;
/// tests/leg_pair.rs).
#[inline(always)]
fn split_pair(vp: i32, vm: i32, top16: i32, dir: i32) -> (i32, i32) {
    (
        mulh((vp + vm) << 3, top16) + (top16 >> 1),
        mulh_round((vp - vm) << 3, dir),
    )
}

/// `((a - b + top16) / 2, (a + b - top16) / 2)`, floored, for two high
/// counts `a`, `b` in `[0, top16]` with `top16 <= 2^30`: the first sum lies
/// in `[0, 2^31]` (exact in `u32`), the second in `[-2^30, 2^30]`.
#[inline(always)]
pub(crate) fn split_counts(a: i32, b: i32, top16: u32) -> (i32, i32) {
    let n = ((a as u32).wrapping_sub(b as u32).wrapping_add(top16) >> 1) as i32;
    let w = a.wrapping_add(b).wrapping_sub(top16 as i32) >> 1;
    (n, w)
}

/// `(1 + x) / 2 * top` in Q16 ticks for x in Q1.31, given
/// `top16 = top << 16` (at most 2^30): exact, no rounding beyond the 16
/// fraction bits (truncation of at most 2^-16 tick). One `SMMLA`:
/// `floor((x + 2^31) top16 / 2^32) = floor(x top16 / 2^32) + top16 / 2`
/// exactly, `top16` being even.
#[inline(always)]
pub(crate) fn high_count(x: i32, top16: u32) -> i32 {
    mulh(x, top16 as i32) + (top16 >> 1) as i32
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::timer::TimerSpec;

    #[test]
    fn ends_and_middle() {
        let top16 = 128 << FRAC_BITS;
        assert_eq!(high_count(i32::MIN, top16), 0);
        assert_eq!(high_count(0, top16), 64 << FRAC_BITS);
        // x = 1 - 2^-31: one part in 2^32 short of top.
        assert_eq!(high_count(i32::MAX, top16), (128 << FRAC_BITS) - 1);
        // Largest top: 2^14, top16 = 2^30.
        assert_eq!(high_count(i32::MAX, 1 << 30), (1 << 30) - 1);
    }

    #[test]
    fn parameters_are_checked() {
        let t = Timer::try_new(TimerSpec::new(98.304e6, 384e3)).unwrap();
        for (order, iterations) in [(0, 1), (4, 1), (3, 4)] {
            let e = EdgeSolver::try_new(&t, Sampling::Natural { order, iterations });
            assert_eq!(
                e.err(),
                Some(ConfigError::NaturalSampling { order, iterations })
            );
        }
    }

    /// One polynomial for both legs: leg A agrees with what `process`
    /// gives for `x` and leg B with a second solver fed `-x`, because `-p`
    /// meets a carrier where `p` meets the reversed one. The arithmetic
    /// differs in rounding: with one Newton step the pair shares the start
    /// value, residual and slope terms of both legs; the second solver's
    /// samples are `-x` truncated, not `x` truncated and negated. Allowed:
    /// 4 parts in 2^16 of a tick. With two updates a period and one step
    /// the pair also stops the series a term earlier (crossing docs): on a
    /// full-scale 20 kHz sine (`|s| <= 0.082`) that leaves up to
    /// 0.082^4 / (1 - 0.082) = 4.9e-5 of the carrier more, 4.9e-5 * 2^22 =
    /// 206 parts in 2^16 of a tick at top = 128. Blocks of uneven lengths,
    /// so that history and direction carry across calls.
    #[test]
    fn pair_matches_a_solver_fed_minus_x() {
        // A busy full-scale signal at the update rate (slopes up to 0.3),
        // and the full-scale 20 kHz sine two updates a period see.
        let busy: [i32; 64] = core::array::from_fn(|k| {
            let t = k as f64 * 0.37;
            ((0.9 * t.sin() + 0.05 * (7.3 * t).cos()) * 2147483647.0) as i32
        });
        let tone: [i32; 64] = core::array::from_fn(|k| {
            let t = k as f64 * 2.0 * core::f64::consts::PI * 20e3 / 768e3;
            (t.sin() * 2147483647.0) as i32
        });
        let mut worst = [0; 2];
        for spec in [
            TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Double),
            TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Trailing),
            TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Leading),
        ] {
            let t = Timer::try_new(spec).unwrap();
            let top16 = t.top() << FRAC_BITS;
            for (order, iterations) in (1..=3).flat_map(|o| (0..=3).map(move |i| (o, i))) {
                let short = iterations == 1 && t.update() == UpdateScheme::Double;
                let (xs, allowed) = if short { (tone, 206 + 4) } else { (busy, 4) };
                let s = Sampling::Natural { order, iterations };
                let mut pair = EdgeSolver::try_new(&t, s).unwrap();
                let mut split = pair.clone();
                let mut plus = pair.clone();
                let mut minus = pair.clone();
                let (mut a, mut b) = (xs, [0i32; 64]);
                let (mut n, mut w) = (xs, [0i32; 64]);
                for (lo, hi) in [(0, 11), (11, 12), (12, 14), (14, 64)] {
                    assert!(pair.process_pair(&mut a[lo..hi], &mut b[lo..hi]));
                    assert!(split.process_pair_split(&mut n[lo..hi], &mut w[lo..hi]));
                }
                let mut ca = xs;
                plus.process(&mut ca);
                let mut cb = xs.map(|x| x.saturating_neg());
                minus.process(&mut cb);
                for k in 0..64 {
                    let (n1, w1) = split_counts(ca[k], cb[k], top16);
                    let d = [a[k] - ca[k], b[k] - cb[k], n[k] - n1, w[k] - w1];
                    let d = d.iter().map(|d| d.abs()).max().unwrap();
                    worst[short as usize] = worst[short as usize].max(d);
                    assert!(d <= allowed, "{spec:?} {s:?} update {k}: {d}");
                }
            }
        }
        println!("largest difference {worst:?} / 2^16 tick (same series, shorter)");
        // One update a period on up/down has no crossing a slot.
        let t = Timer::try_new(TimerSpec::new(98.304e6, 384e3)).unwrap();
        let mut e = EdgeSolver::try_new(&t, Sampling::NATURAL).unwrap();
        let (mut a, mut b) = (busy, [0i32; 64]);
        assert!(!e.process_pair(&mut a, &mut b));
        assert_eq!(a, busy);
    }

    /// Slices of different lengths: the common length is solved, the rest
    /// of the longer one left as it was, and the state (history, direction)
    /// moves on by the common length only.
    #[test]
    fn pair_of_unequal_slices_uses_the_common_length() {
        let t = Timer::try_new(TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Double))
            .unwrap();
        let xs: [i32; 9] = core::array::from_fn(|k| (k as i32 - 4) * 0x0876_5432);
        let mut even = EdgeSolver::try_new(&t, Sampling::NATURAL).unwrap();
        let mut uneven = even.clone();
        let (mut a, mut b) = (xs, [7i32; 9]);
        let (mut a2, mut b2) = (xs, [7i32; 12]);
        for (lo, hi) in [(0, 5), (5, 9)] {
            assert!(even.process_pair_split(&mut a[lo..hi], &mut b[lo..hi]));
            assert!(uneven.process_pair_split(&mut a2[lo..hi], &mut b2[lo..hi + 3]));
        }
        assert_eq!((a, b), (a2, b2[..9].try_into().unwrap()));
        assert_eq!(b2[9..], [7; 3]);
        // a longer than b: its tail keeps the input.
        let mut three = EdgeSolver::try_new(&t, Sampling::NATURAL).unwrap();
        let (mut a3, mut b3) = (xs, [0i32; 5]);
        assert!(three.process_pair_split(&mut a3, &mut b3));
        assert_eq!(a3[5..], xs[5..]);
    }

    #[test]
    fn block_equals_one_by_one() {
        let xs: [i32; 37] = core::array::from_fn(|k| (k as i32 - 18).wrapping_mul(0x0765_4321));
        for spec in [
            TimerSpec::new(98.304e6, 384e3),
            TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Double),
            TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Leading),
            TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Trailing),
        ] {
            let t = Timer::try_new(spec).unwrap();
            let natural = (1..=3).flat_map(|order| {
                (0..=3).map(move |iterations| Sampling::Natural { order, iterations })
            });
            for s in natural.chain([Sampling::Uniform]) {
                let mut one = EdgeSolver::try_new(&t, s).unwrap();
                let mut blk = one.clone();
                let mut buf = xs;
                // Uneven blocks, one of a single update: the state carries
                // across calls.
                let (head, tail) = buf.split_at_mut(11);
                let (single, tail) = tail.split_at_mut(1);
                blk.process(head);
                blk.process(single);
                blk.process(tail);
                for (k, &x) in xs.iter().enumerate() {
                    assert_eq!(buf[k], one.next(x), "{spec:?} {s:?} update {k}");
                }
            }
        }
    }

    #[test]
    fn constant_passes_after_the_delay() {
        // A constant signal crosses every carrier at its own value: natural
        // and uniform sampling agree (definition), to the 2^-26 input step,
        // once the history (4 samples; 6 for the centred width) is full.
        for spec in [
            TimerSpec::new(98.304e6, 384e3),
            TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Double),
            TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Leading),
        ] {
            let t = Timer::try_new(spec).unwrap();
            for order in 1..=3 {
                for iterations in 0..=3 {
                    let s = Sampling::Natural { order, iterations };
                    let mut e = EdgeSolver::try_new(&t, s).unwrap();
                    let x = -0x2345_6789;
                    let want = high_count(x, t.top() << FRAC_BITS);
                    for k in 0..10 {
                        let c = e.next(x);
                        if k >= 6 {
                            assert!((c - want).abs() <= 1, "{spec:?} {s:?}: {c} vs {want}");
                        }
                    }
                }
            }
        }
    }
}
