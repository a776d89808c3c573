//! The leg pair of a 3-level bridge under natural sampling.
//!
//! # Why leg B needs its own crossing
//!
//! Leg A is the natural PWM of `x`, leg B of `-x`, on the same carrier. With
//! uniform sampling leg B's count is exactly `top - c_A`. With natural
//! sampling it is not: in slot 0 (carrier falling) leg A rises at
//! `tau_A = top/2 (1 - x(tau_A))` and leg B at `tau_B = top/2 (1 + x(tau_B))`,
//! at a different instant, so `c_B = top/2 (1 - x(tau_B))`. The load sees
//! `A - B`: a pulse from `tau_A` to `tau_B`. Writing `top - c_A` to leg B
//! keeps the pulse's width right to first order but centres it on the slot,
//! and the missing shift, about `top/4 x' (tau_B - tau_A)`, is a product of
//! the signal and its slope: a third harmonic of -100 dBc at 997 Hz and
//! -69 dBc at 6 kHz (reference scenario, measured with `ticktone measure`).
//!
//! # How the two counts are rounded
//!
//! The counts are split into a differential part `n = (c_A - c_B + top) / 2`
//! and a common-mode part `w = (c_A + c_B - top) / 2`, and the legs written
//! as `C_A = N + m`, `C_B = top - N + m`:
//!
//! - `N` goes through the main noise-shaped requantiser, exactly as the
//!   single count of the uniform case does. Its error reaches the legs with
//!   opposite signs, and its mixing with the alternating edge offsets of
//!   two-update PWM cancels in the load (REFERENCES.md section 4 describes
//!   the mixing).
//! - `m` carries the pulse position. Its error reaches both legs with the
//!   same sign, so it does not change the pulse width, only its position,
//!   and that mixes with the alternating offsets: the baseband receives
//!   `e_m (-1)^k x` scaled by about `w T / 4`. So with two updates a period
//!   `m` is rounded with error feedback whose noise transfer function is
//!   `(1 + z^-1)^2`: two zeros at half the update rate, which is where the
//!   mixing takes the noise from. With one update a period the carrier runs
//!   the same way every update, the shift has the same sign every time and
//!   the error reaches the band directly, so the loop uses `(1 - z^-1)^2`
//!   instead (zeros at DC); measured with `ticktone plan --verify`, trailing
//!   edge at 384 kHz and order 4 went from an SNR of 71 dB with the
//!   half-rate loop to the prediction's neighbourhood. Either loop needs
//!   `|m - w| <= 2` ticks (`sum|h| / 2`), always, without a stability
//!   question (FIR).
//!
//! The sum `N + m` can leave the bridge's range near full scale at high
//! frequencies (`|w|` reaches `pi f top^2 M^2 / (2 f_clk)`, 5 ticks at
//! 20 kHz full scale in the reference scenario). The legs are then clamped
//! to the range and the clamp is counted; the main requantiser keeps 2
//! ticks of margin so that this happens only for such signals.

use crate::edge::{split_counts, EdgeSolver, FRAC_BITS};
use crate::requant::ClampCounts;

const HALF: i32 = 1 << (FRAC_BITS - 1);

/// Ticks by which the main requantiser's range is narrowed so that the
/// common-mode part fits without clamping at normal levels.
pub const MARGIN_TICKS: u32 = 2;

/// Leg B's crossing solver and the common-mode rounding loop.
#[derive(Clone, Debug)]
pub struct LegPair {
    edge_b: EdgeSolver,
    top_q16: i32,
    /// The per-update state and constants of [`LegPair::legs`], grouped
    /// so that they load in pairs (`LDRD` on a Cortex-M4).
    loop_state: LoopState,
    counts: ClampCounts,
}

/// What [`LegPair::legs`] reads every update.
#[derive(Clone, Copy, Debug)]
#[repr(C)]
struct LoopState {
    /// Last two common-mode rounding errors `[e1, e2]`, Q16 ticks.
    err: [i32; 2],
    /// Lowest count and the width of the range, `[low, high - low]`.
    range: [i32; 2],
    top: i32,
    /// Middle coefficient of the loop's NTF `1 + k1 z^-1 + z^-2`: +2 puts
    /// both zeros at half the update rate, -2 both at DC.
    k1: i32,
}

impl LegPair {
    /// A pair for a bridge whose high counts must lie in `[low, high]`
    /// ticks, with `edge_b` a solver configured like leg A's. An empty
    /// range (`low > high`) is taken as `[low, low]`.
    /// `alternating`: the carrier runs the other way in every other update
    /// (two updates a period), which picks the common-mode loop's NTF
    /// (module docs).
    pub fn new(edge_b: EdgeSolver, top: u32, low: u32, high: u32, alternating: bool) -> Self {
        Self {
            edge_b,
            top_q16: (top as i32) << FRAC_BITS,
            loop_state: LoopState {
                err: [0, 0],
                range: [low as i32, (high.max(low) - low) as i32],
                top: top as i32,
                k1: if alternating { 2 } else { -2 },
            },
            counts: ClampCounts::default(),
        }
    }

    /// Clamps of the legs, in updates.
    pub const fn counts(&self) -> ClampCounts {
        self.counts
    }

    /// Clear the clamp counts.
    pub fn clear_counts(&mut self) {
        self.counts = ClampCounts::default();
    }

    /// Solve both legs. On entry `a` holds the signal `x` of a block of
    /// updates (`b` the same length, any content); on return `a` holds the
    /// differential counts `n` and `b` the common-mode parts `w`, all in
    /// Q16 ticks. One interpolation serves both legs where the solver has a
    /// crossing a slot ([`EdgeSolver::process_pair`]); otherwise leg B has
    /// its own solver, fed `-x`.
    #[inline]
    pub fn split(&mut self, edge_a: &mut EdgeSolver, a: &mut [i32], b: &mut [i32]) {
        // Slices of different lengths: the common length (no panic path).
        let len = a.len().min(b.len());
        let (a, b) = (&mut a[..len], &mut b[..len]);
        if edge_a.process_pair_split(a, b) {
            return;
        }
        b.copy_from_slice(a);
        edge_a.process(a);
        for v in b.iter_mut() {
            *v = v.saturating_neg();
        }
        self.edge_b.process(b);
        // Both counts lie in [0, top << 16] (high_count).
        let top16 = self.top_q16 as u32;
        for (ca, cb) in a.iter_mut().zip(b.iter_mut()) {
            (*ca, *cb) = split_counts(*ca, *cb, top16);
        }
    }

    /// The two legs' counts in ticks from the rounded differential count
    /// `n` and the common-mode part `w` (Q16) of one update.
    #[inline(always)]
    pub fn legs(&mut self, n: u32, w: i32) -> (u32, u32) {
        let LoopState {
            err: [e1, e2],
            range,
            top,
            k1,
        } = self.loop_state;
        // Error feedback with NTF (1 +- z^-1)^2: y = w + e + k1 e1 + e2.
        let v = w + k1 * e1 + e2;
        let r = v + HALF;
        let m = r >> FRAC_BITS;
        // The error (m << 16) - v, from the fraction bits alone (`UXTH`).
        self.loop_state.err = [HALF - (r & 0xFFFF), e1];
        let n = n as i32;
        (self.clamp(n + m, range), self.clamp(top - n + m, range))
    }

    #[inline(always)]
    fn clamp(&mut self, c: i32, [low, span]: [i32; 2]) -> u32 {
        // One unsigned compare for the usual case.
        if (c.wrapping_sub(low) as u32) <= span as u32 {
            c as u32
        } else if c < low {
            self.counts.low = self.counts.low.wrapping_add(1);
            low as u32
        } else {
            self.counts.high = self.counts.high.wrapping_add(1);
            (low + span) as u32
        }
    }
}
