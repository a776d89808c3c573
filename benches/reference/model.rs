//! A plain `f64` reference model of the modulator chain, written the
//! straightforward way, for the host benchmark (`benches/chain.rs`) to
//! measure the integer chain against in the same run.
//!
//! Same stages, same filter lengths, same DMA layout as
//! `ticktone::Modulator`, but every value is an `f64` and nothing is
//! specialised:
//! - half-band interpolation, one stage per doubling, with the crate's own
//!   coefficient tables converted to `f64` (so both do the same number of
//!   multiply-accumulates), delay lines shifted by `copy_within`;
//! - uniform sampling, or natural sampling: a cubic Lagrange polynomial
//!   through four neighbouring update-rate samples and Newton-Raphson steps
//!   on its crossing with the carrier (REFERENCES.md section 3), starting
//!   from the middle of the slot;
//! - error-feedback noise shaping `q = v + NTF(z) e` with
//!   `NTF = 1 + C(z)/D(z)` as the crate's requantiser implements it
//!   (`u = v + sum c_i s[n-i]`, `q = round(u)`, `s[n] = (q - u) - sum d_i
//!   s[n-i]`), the same coefficients in `f64`, input clamp, rounding;
//! - bridge words (3-level leg B is `top - c`; separate compares place the
//!   dead time around the edge).
//!
//! It is not bit-exact with the integer chain (different rounding points):
//! it is the baseline a float implementation would be.

/// Edge sampling of the model.
#[derive(Clone, Copy, Debug)]
pub enum RefSampling {
    /// `c = (1 + x) / 2 * top` from the sample at the slot start.
    Uniform,
    /// Cubic interpolation and `iterations` Newton steps.
    Natural {
        /// Newton steps from the middle of the slot.
        iterations: u32,
    },
}

/// Bridge words of the model.
#[derive(Clone, Copy, Debug)]
pub enum RefBridge {
    /// One word, `c`.
    Half,
    /// Two words, `c` and `top - c`.
    Full3,
    /// Four words: each leg `r - below`, `r + above`.
    Full3Separate {
        /// Ticks before the edge.
        below: f64,
        /// Ticks after the edge.
        above: f64,
    },
}

/// What the model computes.
#[derive(Clone, Debug)]
pub struct RefSpec {
    /// Largest compare value (P/2 for up/down counting).
    pub top: f64,
    /// Half-band stages in cascade order, each the gain-2 coefficients of
    /// taps +-1, +-3, ... (empty: input at the update rate).
    pub halfbands: Vec<Vec<f64>>,
    /// Edge sampling.
    pub sampling: RefSampling,
    /// Two updates a period: the carrier falls in even slots, rises in odd.
    pub alternate: bool,
    /// Error-feedback coefficients `c_1..c_L` (empty: plain rounding).
    pub feedback: Vec<f64>,
    /// Pole coefficients `d_1..d_L` (zeros for an FIR NTF).
    pub poles: Vec<f64>,
    /// Input clamp range of the high count before shaping, ticks.
    pub in_low: f64,
    /// See `in_low`.
    pub in_high: f64,
    /// Clamp range of the rounded high count, ticks.
    pub low: f64,
    /// See `low`.
    pub high: f64,
    /// Bridge words.
    pub bridge: RefBridge,
}

impl RefSpec {
    /// Updates per input sample.
    pub fn ratio(&self) -> usize {
        1 << self.halfbands.len()
    }

    /// Words per update.
    pub fn words_per_update(&self) -> usize {
        match self.bridge {
            RefBridge::Half => 1,
            RefBridge::Full3 => 2,
            RefBridge::Full3Separate { .. } => 4,
        }
    }
}

/// One half-band interpolator by 2.
#[derive(Clone, Debug)]
struct HalfBand {
    c: Vec<f64>,
    line: Vec<f64>,
}

impl HalfBand {
    fn new(c: &[f64]) -> Self {
        Self {
            c: c.to_vec(),
            line: vec![0.0; 2 * c.len()],
        }
    }

    /// One input, two outputs: the computed sample, then the centre tap.
    fn push(&mut self, x: f64) -> [f64; 2] {
        let k = self.c.len();
        self.line.copy_within(1.., 0);
        self.line[2 * k - 1] = x;
        let mut y = 0.0;
        for j in 0..k {
            y += self.c[j] * (self.line[k - 1 - j] + self.line[k + j]);
        }
        [y.clamp(-1.0, 1.0), self.line[k]]
    }
}

#[derive(Clone, Debug)]
struct Channel {
    stages: Vec<HalfBand>,
    /// Last four update-rate samples, oldest first.
    hist: [f64; 4],
    /// Shaper state, newest first.
    state: Vec<f64>,
    slot: usize,
    /// 3-level natural leg pair: last two pulse-position rounding errors.
    pos_err: [f64; 2],
}

/// The reference chain for `CH` interleaved channels.
#[derive(Clone, Debug)]
pub struct RefChain {
    spec: RefSpec,
    channels: Vec<Channel>,
}

/// Cubic Lagrange polynomial through (-1, a), (0, b), (1, c), (2, d) and
/// its derivative at `t`.
fn cubic(p: &[f64; 4], t: f64) -> (f64, f64) {
    let [a, b, c, d] = *p;
    let l0 = -t * (t - 1.0) * (t - 2.0) / 6.0;
    let l1 = (t + 1.0) * (t - 1.0) * (t - 2.0) / 2.0;
    let l2 = -(t + 1.0) * t * (t - 2.0) / 2.0;
    let l3 = (t + 1.0) * t * (t - 1.0) / 6.0;
    let d0 = -(3.0 * t * t - 6.0 * t + 2.0) / 6.0;
    let d1 = (3.0 * t * t - 4.0 * t - 1.0) / 2.0;
    let d2 = -(3.0 * t * t - 2.0 * t - 2.0) / 2.0;
    let d3 = (3.0 * t * t - 1.0) / 6.0;
    (
        a * l0 + b * l1 + c * l2 + d * l3,
        a * d0 + b * d1 + c * d2 + d * d3,
    )
}

impl RefChain {
    /// A chain for `channels` channels.
    pub fn new(spec: RefSpec, channels: usize) -> Self {
        let ch = Channel {
            stages: spec.halfbands.iter().map(|c| HalfBand::new(c)).collect(),
            hist: [0.0; 4],
            state: vec![0.0; spec.feedback.len()],
            slot: 0,
            pos_err: [0.0; 2],
        };
        Self {
            channels: vec![ch; channels],
            spec,
        }
    }

    /// The signal values (in [-1, 1]) that set the edge of the next update
    /// for `x` and, for the second leg of a 3-level bridge, for `-x`.
    fn edge_value(spec: &RefSpec, ch: &mut Channel, x: f64) -> (f64, f64) {
        ch.hist.copy_within(1.., 0);
        ch.hist[3] = x;
        let falling = spec.alternate && ch.slot.is_multiple_of(2);
        ch.slot += 1;
        let minus: [f64; 4] = ch.hist.map(|v| -v);
        (
            Self::crossing(spec, &ch.hist, falling, x),
            Self::crossing(spec, &minus, falling, -x),
        )
    }

    /// The crossing of the cubic through `hist` with the slot's carrier.
    fn crossing(spec: &RefSpec, hist: &[f64; 4], falling: bool, x: f64) -> f64 {
        match spec.sampling {
            RefSampling::Uniform => x,
            RefSampling::Natural { iterations } => {
                // Slot from node 0 to node 1; the carrier runs from -1 to +1
                // (rising) or +1 to -1 (falling) across it.
                let (c0, slope) = if falling { (1.0, -2.0) } else { (-1.0, 2.0) };
                let mut t = 0.5;
                for _ in 0..iterations {
                    let (s, ds) = cubic(hist, t);
                    let g = c0 + slope * t - s;
                    t = (t - g / (slope - ds)).clamp(0.0, 1.0);
                }
                if iterations == 0 {
                    cubic(hist, t).0
                } else {
                    c0 + slope * t
                }
            }
        }
    }

    /// Noise-shaped rounding of a high count in ticks.
    fn requantise(spec: &RefSpec, ch: &mut Channel, v: f64) -> f64 {
        let v = v.clamp(spec.in_low, spec.in_high);
        let mut u = v;
        let mut p = 0.0;
        for ((c, d), s) in spec.feedback.iter().zip(&spec.poles).zip(&ch.state) {
            u += c * s;
            p += d * s;
        }
        let q = (u + 0.5).floor().clamp(spec.low, spec.high);
        if !ch.state.is_empty() {
            ch.state.rotate_right(1);
            ch.state[0] = (q - u) - p;
        }
        q
    }

    /// Interleaved input frames (f64 in [-1, 1]) to compare words in the
    /// modulator's DMA layout; returns the frames processed.
    pub fn process(&mut self, input: &[f64], out: &mut [u32]) -> usize {
        let nch = self.channels.len();
        let ratio = self.spec.ratio();
        let wpu = self.spec.words_per_update();
        let per_frame = ratio * nch * wpu;
        let mut frames = 0;
        let mut fine = [0.0f64; 16];
        for (frame, words) in input.chunks_exact(nch).zip(out.chunks_exact_mut(per_frame)) {
            for (c, (ch, &x)) in self.channels.iter_mut().zip(frame).enumerate() {
                // Oversample: each stage doubles the rate.
                let mut n = 1;
                fine[0] = x;
                for stage in &mut ch.stages {
                    let mut next = [0.0f64; 16];
                    for i in 0..n {
                        let [a, b] = stage.push(fine[i]);
                        next[2 * i] = a;
                        next[2 * i + 1] = b;
                    }
                    n *= 2;
                    fine[..n].copy_from_slice(&next[..n]);
                }
                for (u, &xu) in fine[..ratio].iter().enumerate() {
                    let (s, s_minus) = Self::edge_value(&self.spec, ch, xu);
                    let top = self.spec.top;
                    let ca = (1.0 + s) / 2.0 * top;
                    let cb = (1.0 + s_minus) / 2.0 * top;
                    let pair = !matches!(self.spec.bridge, RefBridge::Half)
                        && matches!(self.spec.sampling, RefSampling::Natural { .. });
                    let (r, b) = if pair {
                        // 3-level natural (ticktone's leg_pair.rs): the
                        // differential count through the shaper, the pulse
                        // position rounded with error feedback (1 + z^-1)^2.
                        let n = Self::requantise(&self.spec, ch, (ca - cb + top) / 2.0);
                        let w = (ca + cb - top) / 2.0;
                        let v = w + 2.0 * ch.pos_err[0] + ch.pos_err[1];
                        let m = (v + 0.5).floor();
                        ch.pos_err = [m - v, ch.pos_err[0]];
                        let (lo, hi) = (self.spec.low, self.spec.high);
                        ((n + m).clamp(lo, hi), (top - n + m).clamp(lo, hi))
                    } else {
                        let r = Self::requantise(&self.spec, ch, ca);
                        (r, top - r)
                    };
                    let dst = &mut words[(u * nch + c) * wpu..][..wpu];
                    match self.spec.bridge {
                        RefBridge::Half => dst[0] = r as u32,
                        RefBridge::Full3 => {
                            dst[0] = r as u32;
                            dst[1] = b as u32;
                        }
                        RefBridge::Full3Separate { below, above } => {
                            dst[0] = (r - below) as u32;
                            dst[1] = (r + above) as u32;
                            dst[2] = (b - below) as u32;
                            dst[3] = (b + above) as u32;
                        }
                    }
                }
            }
            frames += 1;
        }
        frames
    }
}
