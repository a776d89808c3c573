//! The modulator: one validated configuration chaining the stages, and the
//! block API that fills a DMA buffer.
//!
//! ```text
//! samples (fs) -> oversampler -> edge solver -> requantiser -> bridge mapper -> compare words
//! ```
//!
//! # Output layout
//!
//! For each input frame (one sample per audio channel, interleaved), for each
//! of the `R` updates it makes (`R` = update rate / input rate), for each
//! audio channel, the bridge's words: leg A high side, (leg A low side), leg
//! B high side, (leg B low side). That is the order a timer DMA burst writes
//! consecutive compare registers in: map the channels to the registers in
//! that order.
//!
//! # Cost and memory
//!
//! [`Modulator::process`] runs the stages over passes of up to 64 updates
//! a channel (4 input frames at 16x oversampling, 64 at 1x), so that each
//! stage's set-up is paid once a pass; the words do not depend on how the
//! input is cut into calls. Per call that takes up to 1.8 KB of stack for
//! stereo (the pass scratch, `2 x 80` words a channel, and the stages'
//! frames); a `Modulator<2>` holds about 4.5 KB of state, most of it the
//! oversamplers' delay lines. Instruction counts per configuration on an
//! emulated Cortex-M4, and these memory figures, come from
//! `benches/cortex-m4` (its `memory` lines measure the stack by painting).
//!
//! ```
//! use ticktone::{Modulator, ModulatorSpec, BridgeKind, BridgeSpec};
//! use ticktone::timer::{TimerSpec, Edge};
//! // 256-tick period, trailing edge, half bridge, input at the carrier rate.
//! let spec = ModulatorSpec::new(
//!     TimerSpec::new(98.304e6, 384e3).with_edge(Edge::Trailing),
//!     BridgeSpec::ideal(BridgeKind::Half),
//!     384e3,
//! );
//! let mut m = Modulator::<1>::try_new(spec).unwrap();
//! let mut out = [0u16; 3];
//! // +0.5, 0 and -0.5 full scale: compare 192, 128 and 64 of 256.
//! assert_eq!(m.process(&[0.5f32, 0.0, -0.5], &mut out), 3);
//! assert_eq!(out, [192, 128, 64]);
//! ```

use crate::bridge::{Bridge, BridgeKind, BridgeSpec, MAX_WORDS};
use crate::edge::{EdgeSolver, Sampling};
use crate::error::ConfigError;
use crate::leg_pair::{LegPair, MARGIN_TICKS};
use crate::oversample::{Oversampler, MAX_RATIO};
use crate::requant::{Requantiser, ShaperSpec};
use crate::sample::Sample;
use crate::timer::{Timer, TimerSpec};

/// Updates a channel that one pass of the stages covers (a whole number of
/// frames, at least one): stack scratch of `2 (PASS_UPDATES + 16)` words a
/// channel.
const PASS_UPDATES: usize = 64;

/// A compare register word: `u16` or `u32`. Every compare value the
/// modulator writes is at most [`crate::timer::MAX_TOP`] * 2, so both hold
/// it without loss.
pub trait CompareWord: Copy {
    /// Word from a compare value.
    fn from_ticks(ticks: u32) -> Self;
}

impl CompareWord for u16 {
    #[inline(always)]
    fn from_ticks(ticks: u32) -> Self {
        ticks as u16
    }
}

impl CompareWord for u32 {
    #[inline(always)]
    fn from_ticks(ticks: u32) -> Self {
        ticks
    }
}

/// Everything the modulator needs, before validation.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ModulatorSpec {
    /// Timer.
    pub timer: TimerSpec,
    /// Bridge, dead time and clamps.
    pub bridge: BridgeSpec,
    /// Rate of the samples given to [`Modulator::process`], Hz.
    pub input_rate_hz: f64,
    /// Edge sampling method.
    pub sampling: Sampling,
    /// Noise shaping of the rounding to ticks.
    pub shaper: ShaperSpec,
}

impl ModulatorSpec {
    /// Uniform sampling and plain rounding; set the other fields as needed.
    pub const fn new(timer: TimerSpec, bridge: BridgeSpec, input_rate_hz: f64) -> Self {
        Self {
            timer,
            bridge,
            input_rate_hz,
            sampling: Sampling::Uniform,
            shaper: ShaperSpec::ROUND,
        }
    }
}

/// Counts of values that were changed to keep the output safe.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Counters {
    /// Input samples clamped or replaced (NaN, infinite, out of range).
    pub input_clamped: u32,
    /// Updates whose high count was raised to the minimum (minimum pulse,
    /// dead time).
    pub low_clamped: u32,
    /// Updates whose high count was lowered to the maximum (minimum pulse,
    /// dead time, bootstrap refresh).
    pub high_clamped: u32,
}

#[derive(Clone, Debug)]
struct Channel {
    over: Oversampler,
    edge: EdgeSolver,
    /// 3-level bridge with natural sampling only: leg B's own crossing and
    /// the common-mode rounding (see [`crate::leg_pair`]).
    pair: Option<LegPair>,
    quant: Requantiser,
}

/// Sample-to-compare modulator for `CH` audio channels sharing one timer
/// configuration.
#[derive(Clone, Debug)]
pub struct Modulator<const CH: usize> {
    timer: Timer,
    bridge: Bridge,
    ratio: usize,
    channels: [Channel; CH],
    input_clamped: u32,
}

impl<const CH: usize> Modulator<CH> {
    /// Validate `spec` and build the stages.
    ///
    /// # Errors
    /// Any [`ConfigError`] of the timer, the bridge or the stages; and
    /// [`ConfigError::RatesNotLocked`] / [`ConfigError::OversamplingRatio`]
    /// when the input rate does not divide the update rate by a supported
    /// ratio.
    pub fn try_new(spec: ModulatorSpec) -> Result<Self, ConfigError> {
        const { assert!(CH > 0, "a modulator needs at least one channel") };
        let timer = Timer::try_new(spec.timer)?;
        let bridge = Bridge::try_new(spec.bridge, &timer)?;
        let update_hz = timer.update_rate_hz();
        let input_hz = spec.input_rate_hz;
        if !(input_hz.is_finite() && input_hz > 0.0) {
            return Err(ConfigError::RatesNotLocked {
                input_hz,
                update_hz,
            });
        }
        let ratio_f = update_hz / input_hz;
        let ratio = crate::timer::round_pos(ratio_f);
        if ratio < 1.0 || (ratio_f - ratio).abs() > 1e-9 * ratio_f {
            return Err(ConfigError::RatesNotLocked {
                input_hz,
                update_hz,
            });
        }
        let ratio = ratio as u32;
        let (low, high) = bridge.high_count_range();
        let pair = matches!(
            (spec.bridge.kind, spec.sampling),
            (BridgeKind::Full3, Sampling::Natural { .. })
        );
        // Room for the common-mode part of a leg pair (see `leg_pair`).
        let margin = if pair {
            MARGIN_TICKS.min((high - low) / 4)
        } else {
            0
        };
        let channel = Channel {
            over: Oversampler::try_new(ratio)?,
            edge: EdgeSolver::try_new(&timer, spec.sampling)?,
            pair: match pair {
                true => Some(LegPair::new(
                    EdgeSolver::try_new(&timer, spec.sampling)?,
                    timer.top(),
                    low,
                    high,
                    timer.update() == crate::timer::UpdateScheme::Double,
                )),
                false => None,
            },
            quant: Requantiser::try_new(&timer, low + margin, high - margin, spec.shaper)?,
        };
        Ok(Self {
            timer,
            bridge,
            ratio: ratio as usize,
            // Each channel its own dither sequence: correlated dither between
            // channels would add coherently in a phantom centre image.
            channels: core::array::from_fn(|i| {
                let mut c = channel.clone();
                c.quant.reseed(i as u32);
                c
            }),
            input_clamped: 0,
        })
    }

    /// The validated timer.
    pub const fn timer(&self) -> &Timer {
        &self.timer
    }

    /// The validated bridge mapper.
    pub const fn bridge(&self) -> &Bridge {
        &self.bridge
    }

    /// Largest modulation |x| (fraction of full scale) that passes without
    /// clamping: the bridge's range narrowed by the noise shaper's headroom
    /// (and, for a 3-level natural leg pair, its margin).
    pub fn max_modulation(&self) -> f32 {
        self.channels[0].quant.max_modulation()
    }

    /// Updates made from each input frame (the oversampling ratio).
    pub const fn updates_per_frame(&self) -> usize {
        self.ratio
    }

    /// Compare words written for each input frame: ratio x channels x words
    /// per update.
    pub const fn words_per_frame(&self) -> usize {
        self.ratio * CH * self.bridge.words_per_update()
    }

    /// Clamp counts so far.
    pub fn counters(&self) -> Counters {
        let mut c = Counters {
            input_clamped: self.input_clamped,
            ..Counters::default()
        };
        for ch in &self.channels {
            let q = ch.quant.counts();
            c.low_clamped = c.low_clamped.wrapping_add(q.low);
            c.high_clamped = c.high_clamped.wrapping_add(q.high);
            if let Some(p) = &ch.pair {
                let q = p.counts();
                c.low_clamped = c.low_clamped.wrapping_add(q.low);
                c.high_clamped = c.high_clamped.wrapping_add(q.high);
            }
        }
        c
    }

    /// Clear the clamp counts.
    pub fn clear_counters(&mut self) {
        self.input_clamped = 0;
        for ch in &mut self.channels {
            ch.quant.clear_counts();
            if let Some(p) = &mut ch.pair {
                p.clear_counts();
            }
        }
    }

    /// Turn interleaved input frames into compare words (layout in the module
    /// docs). Processes as many whole frames as both slices hold,
    /// `min(input.len() / CH, out.len() / words_per_frame())`, and returns
    /// that number; a partial frame at the end of either slice is left alone.
    pub fn process<S: Sample, W: CompareWord>(&mut self, input: &[S], out: &mut [W]) -> usize {
        // The words of one update are a fixed-size array from here on, so
        // the loops below carry no length checks.
        match self.bridge.words_per_update() {
            1 => self.process_n::<S, W, 1>(input, out),
            2 => self.process_n::<S, W, 2>(input, out),
            _ => self.process_n::<S, W, MAX_WORDS>(input, out),
        }
    }

    /// [`Modulator::process`] for `N` words an update.
    #[inline(always)]
    fn process_n<S: Sample, W: CompareWord, const N: usize>(
        &mut self,
        input: &[S],
        out: &mut [W],
    ) -> usize {
        // 1 <= ratio <= MAX_RATIO by construction; the clamp lets the
        // compiler see it (no slice or chunk-size checks left).
        let ratio = self.ratio.clamp(1, MAX_RATIO);
        let per_frame = ratio * CH * N;
        let frames = (input.len() / CH).min(out.len() / per_frame);
        // Frames a pass of the stages takes: up to PASS_UPDATES updates a
        // channel, so that each stage's set-up (state into registers and
        // back) is paid once for several frames.
        let pass = (PASS_UPDATES / ratio).max(1);
        // Per channel: the updates of one pass (signal, then high counts,
        // then ticks), and for a 3-level natural leg pair the common-mode
        // parts. MAX_RATIO of slack: the oversampler writes a whole
        // MAX_RATIO array from each frame's offset.
        let mut fine = [[0i32; PASS_UPDATES + MAX_RATIO]; CH];
        let mut common = [[0i32; PASS_UPDATES + MAX_RATIO]; CH];
        // The bridge's words as affine maps, worked out once a call (`N` is
        // the bridge's word count, so they exist).
        let (Some(count_map), Some(leg_map)) =
            (self.bridge.count_map::<N>(), self.bridge.leg_map::<N>())
        else {
            return 0;
        };
        // Exactly the whole frames both slices hold: every pass then writes
        // the words of exactly the frames it reads.
        let input = input.get(..frames * CH).unwrap_or_default();
        let out = out.get_mut(..frames * per_frame).unwrap_or_default();
        for (frames_in, words) in input
            .chunks(pass * CH)
            .zip(out.chunks_mut(pass * per_frame))
        {
            let n = (frames_in.len() / CH) * ratio;
            // Stage by stage over the pass, one channel at a time.
            for (ch, ((channel, f), w)) in self
                .channels
                .iter_mut()
                .zip(fine.iter_mut())
                .zip(common.iter_mut())
                .enumerate()
            {
                for (frame, at) in frames_in.chunks_exact(CH).zip((0..).step_by(ratio)) {
                    let s = frame
                        .get(ch)
                        .map_or(0, |s| s.to_q31(&mut self.input_clamped));
                    if let Some(dst) = f.get_mut(at..).and_then(|d| d.first_chunk_mut()) {
                        channel.over.push(s, dst);
                    }
                }
                let (f, w) = (&mut f[..n.min(PASS_UPDATES)], &mut w[..n.min(PASS_UPDATES)]);
                match &mut channel.pair {
                    None => channel.edge.process(f),
                    // 3-level, natural sampling: leg B's own crossing (see
                    // `leg_pair`); `f` becomes the differential count, `w`
                    // the common-mode part.
                    Some(pair) => pair.split(&mut channel.edge, f, w),
                }
                channel.quant.process(f);
            }
            // Words in DMA order: update by update, channel by channel;
            // written channel by channel so that a channel's leg-pair state
            // and word map stay in registers for the pass.
            let (slots, _) = words.as_chunks_mut::<N>();
            let (groups, _) = slots.as_chunks_mut::<CH>();
            for (ch, ((channel, f), w)) in
                self.channels.iter_mut().zip(&fine).zip(&common).enumerate()
            {
                match &mut channel.pair {
                    None => {
                        for (group, &c) in groups.iter_mut().zip(f) {
                            let v = count_map.words_of(c as u32);
                            for (d, &v) in group[ch].iter_mut().zip(&v) {
                                *d = W::from_ticks(v);
                            }
                        }
                    }
                    Some(pair) => {
                        for ((group, &c), &w) in groups.iter_mut().zip(f).zip(w) {
                            let (a, b) = pair.legs(c as u32, w);
                            let v = leg_map.words(a, b);
                            for (d, &v) in group[ch].iter_mut().zip(&v) {
                                *d = W::from_ticks(v);
                            }
                        }
                    }
                }
            }
        }
        frames
    }

    /// One input frame: writes [`Modulator::words_per_frame`] words to the
    /// front of `out` and returns `true`, or `false` (writing nothing) if
    /// `out` is too short.
    pub fn process_frame<S: Sample, W: CompareWord>(
        &mut self,
        frame: &[S; CH],
        out: &mut [W],
    ) -> bool {
        self.process(frame, out) == 1
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::timer::UpdateScheme;

    /// Modulators whose passes hold 4 (16x), 64 (1x, uniform and natural)
    /// and 10 (6x) frames. Natural at 1x called frame by frame makes passes
    /// of one update: the leg pair's odd-length passes, whose next slot
    /// starts the other way.
    fn modulators() -> [Modulator<2>; 4] {
        let timer = TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Double);
        let bridge = BridgeSpec::ideal(BridgeKind::Full3);
        let spec = |rate: f64, sampling| ModulatorSpec {
            sampling,
            shaper: ShaperSpec::new(3).with_dither(true),
            ..ModulatorSpec::new(timer, bridge, rate)
        };
        [
            Modulator::try_new(spec(48e3, Sampling::NATURAL)).unwrap(),
            Modulator::try_new(spec(768e3, Sampling::Uniform)).unwrap(),
            Modulator::try_new(spec(128e3, Sampling::NATURAL)).unwrap(),
            Modulator::try_new(spec(768e3, Sampling::NATURAL)).unwrap(),
        ]
    }

    #[test]
    fn block_calls_equal_frame_calls_and_write_only_whole_frames() {
        // The block API's contract (module docs): the words do not depend
        // on how the input is cut into calls, a call writes the words of the
        // whole frames both slices hold and nothing else.
        for m in modulators() {
            let (mut one, mut block) = (m.clone(), m);
            let wpf = one.words_per_frame();
            // 150 frames and a half, a busy signal near full scale.
            let input: [i16; 301] = core::array::from_fn(|i| {
                ((i as i32 * 7919 + (i as i32 * i as i32) * 31) % 60_000 - 30_000) as i16
            });
            let mut want = [0u16; 150 * 16 * 2 * 2 + 8];
            for (frame, out) in input.chunks_exact(2).zip(want.chunks_exact_mut(wpf)) {
                assert!(one.process_frame(&[frame[0], frame[1]], out));
            }
            // Room for 150 frames and 8 words more: those stay untouched.
            let mut got = [0xAAAAu16; 150 * 16 * 2 * 2 + 8];
            assert_eq!(block.process(&input, &mut got[..150 * wpf + 8]), 150);
            assert_eq!(got[..150 * wpf], want[..150 * wpf]);
            assert!(got[150 * wpf..].iter().all(|&w| w == 0xAAAA));
            assert_eq!(block.counters(), one.counters());
            // Too little room: only the frames that fit.
            let mut short = [0u16; 3 * 16 * 2 * 2];
            assert_eq!(block.process(&input, &mut short[..3 * wpf - 1]), 2);
        }
    }
}
