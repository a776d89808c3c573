//! The planner (host): which timer clock, carrier, counting mode, update
//! scheme and noise-shaper order reach a target in-band SNR, with the input
//! rate locked to the update rate by a supported oversampling ratio.
//!
//! # The prediction
//!
//! A high count `c = (1 + x) / 2 * top` is rounded to whole ticks, so one
//! tick is `2 / top` of the signal's full swing. Rounding error that is
//! white with variance `(2 / top)^2 / 12` a update, shaped by the
//! implemented NTF `N(z) / D(z)`, leaves in the band `[0, B]`
//!
//! ```text
//! P = (2 / top)^2 / 12 * (1 / pi) * Int_0^{2 pi B / f_u} |N / D|^2 dw
//! ```
//!
//! and a full-scale sine has power 1/2: `SNR = 10 log10(0.5 / P)`. Without
//! shaping this is the textbook `6.02 log2(top) + 1.76 + 10 log10(OSR)` with
//! `OSR = f_u / (2 B)` (Schreier & Temes 2005, ch. 4 \[memory\]). It is the
//! quantisation bound only: uniform-sampling harmonics and the mixing of
//! shaped noise by PWM's edge offsets are not in it, so `ticktone plan
//! --verify N` measures the first rows with the lab.
//!
//! # Rate locking
//!
//! Only timers whose update rate is exactly a supported multiple of the
//! input rate are listed: then the carrier and the audio clock come from one
//! source and no sample is ever slipped. A clock that misses every lock is
//! reported with the nearest clock that would lock and its error in ppm,
//! which is the rate at which an unlocked system would slip samples.

use std::vec::Vec;

use crate::bridge::{BridgeKind, BridgeSpec};
use crate::edge::Sampling;
use crate::error::ConfigError;
use crate::modulator::{Modulator, ModulatorSpec};
use crate::requant::{Requantiser, ShaperSpec};
use crate::timer::{Edge, Timer, TimerSpec, UpdateScheme, MAX_TOP};

/// -1 dBFS as a modulation: a plan must pass it unclamped.
pub const MINUS_1_DBFS: f64 = 0.891_250_938_133_745_6;

/// Oversampling ratios the oversampler supports.
pub const RATIOS: [u32; 7] = [1, 2, 4, 6, 8, 12, 16];

/// What the engineer wants.
#[derive(Clone, Debug, PartialEq)]
pub struct PlanSpec {
    /// Input sample rate, Hz.
    pub input_rate_hz: f64,
    /// Timer clocks the part can run at, Hz.
    pub clocks_hz: Vec<f64>,
    /// Lowest carrier worth considering, Hz.
    pub carrier_min_hz: f64,
    /// Highest carrier (switching losses grow with it), Hz.
    pub carrier_max_hz: f64,
    /// Audio band edge, Hz.
    pub band_hz: f64,
    /// In-band SNR to reach, dB.
    pub target_snr_db: f64,
    /// Bridge.
    pub bridge: BridgeKind,
    /// Highest noise-shaper order to consider.
    pub max_order: u8,
}

/// One configuration and its predicted quality.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Candidate {
    /// Timer clock, Hz.
    pub clock_hz: f64,
    /// Carrier, Hz.
    pub carrier_hz: f64,
    /// Ticks a period.
    pub period_ticks: u32,
    /// Modulated edge(s) (and so the counting mode).
    pub edge: Edge,
    /// Updates a period.
    pub update: UpdateScheme,
    /// Update rate over input rate.
    pub ratio: u32,
    /// Compare range `top` (positions an edge can take: `top + 1`).
    pub top: u32,
    /// Update rate over twice the band.
    pub osr: f64,
    /// Lowest shaper order that reaches the target (or the best one).
    pub order: u8,
    /// Largest modulation the shaper's headroom allows.
    pub max_modulation: f64,
    /// Predicted in-band SNR, dB.
    pub predicted_snr_db: f64,
}

impl Candidate {
    /// Whether the prediction reaches `target_db` and a -1 dBFS tone (the
    /// AES17 level) passes without clamping.
    pub fn meets(&self, target_db: f64) -> bool {
        self.predicted_snr_db >= target_db && self.max_modulation >= MINUS_1_DBFS
    }

    /// The modulator spec of this candidate (uniform sampling, ideal
    /// bridge of `kind`, the chosen shaper), for `input_rate_hz`.
    pub fn modulator_spec(&self, kind: BridgeKind, input_rate_hz: f64) -> ModulatorSpec {
        ModulatorSpec {
            shaper: shaper(self.order),
            ..ModulatorSpec::new(self.timer_spec(), BridgeSpec::ideal(kind), input_rate_hz)
        }
    }

    /// The timer spec of this candidate.
    pub fn timer_spec(&self) -> TimerSpec {
        TimerSpec::new(self.clock_hz, self.carrier_hz)
            .with_edge(self.edge)
            .with_update(self.update)
    }
}

/// The shaper the planner uses for an order: plain rounding for 0, else the
/// crate's default family (band-optimised zeros, poles for sum|h| <= 8).
pub fn shaper(order: u8) -> ShaperSpec {
    if order == 0 {
        ShaperSpec::ROUND
    } else {
        ShaperSpec::new(order)
    }
}

/// `(1 / pi) Int_0^{w_b} |N / D|^2 dw` by Simpson's rule, for NTF
/// coefficients `num`, `den` (of `z^0, z^-1, ...`).
pub fn inband_power_gain(num: &[f64], den: &[f64], w_b: f64) -> f64 {
    let mag2 = |w: f64| {
        let eval = |c: &[f64]| {
            let (mut re, mut im) = (0.0, 0.0);
            for (k, &a) in c.iter().enumerate() {
                re += a * (k as f64 * w).cos();
                im -= a * (k as f64 * w).sin();
            }
            re * re + im * im
        };
        eval(num) / eval(den)
    };
    let n = 2000;
    let h = w_b / n as f64;
    let mut s = mag2(0.0) + mag2(w_b);
    for i in 1..n {
        s += mag2(i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
    }
    s * h / 3.0 / core::f64::consts::PI
}

/// Predicted in-band SNR (dB re a full-scale sine) of rounding to the ticks
/// of `timer` with `quant`'s NTF over `[0, band_hz]` (module docs).
pub fn predicted_snr_db(timer: &Timer, quant: &Requantiser, band_hz: f64) -> f64 {
    let w_b = 2.0 * core::f64::consts::PI * band_hz / timer.update_rate_hz();
    let ntf = quant.ntf();
    // Plain rounding has N = D = 1: the integral is w_b / pi.
    let gain = inband_power_gain(&ntf.numerator(), &ntf.denominator(), w_b);
    let step = 2.0 / timer.top() as f64;
    10.0 * (0.5 / (step * step / 12.0 * gain)).log10()
}

/// Nearest clock to `clock_hz` that locks some carrier in range to the
/// input rate, and its error in ppm (`None` if none is near).
pub fn nearest_lock(spec: &PlanSpec, clock_hz: f64) -> Option<(f64, f64)> {
    let mut best: Option<(f64, f64)> = None;
    for (_, upp) in layouts() {
        for &ratio in &RATIOS {
            let carrier_base = spec.input_rate_hz * ratio as f64 / upp as f64;
            if carrier_base < spec.carrier_min_hz || carrier_base > spec.carrier_max_hz {
                continue;
            }
            let p = (clock_hz / carrier_base).round().max(8.0);
            let locked = p * carrier_base;
            let ppm = (clock_hz - locked) / locked * 1e6;
            if best.is_none_or(|(_, b)| ppm.abs() < b.abs()) {
                best = Some((locked, ppm));
            }
        }
    }
    best
}

/// (edge, updates a period) of every timer layout.
fn layouts() -> [((Edge, UpdateScheme), u32); 3] {
    [
        ((Edge::Trailing, UpdateScheme::Single), 1),
        ((Edge::Double, UpdateScheme::Single), 1),
        ((Edge::Double, UpdateScheme::Double), 2),
    ]
}

/// Every locked configuration with the lowest shaper order that reaches
/// the target (or, where none does, the order with the best prediction),
/// those that reach it first, then by carrier (lowest first: switching
/// losses), then by order (lowest first: CPU).
///
/// # Errors
/// A [`ConfigError`] if the input rate or band is not positive and finite.
pub fn plan(spec: &PlanSpec) -> Result<Vec<Candidate>, ConfigError> {
    if !(spec.input_rate_hz.is_finite() && spec.input_rate_hz > 0.0) {
        return Err(ConfigError::RatesNotLocked {
            input_hz: spec.input_rate_hz,
            update_hz: 0.0,
        });
    }
    let mut out = Vec::new();
    for &clock in &spec.clocks_hz {
        for ((edge, update), upp) in layouts() {
            for &ratio in &RATIOS {
                let carrier = spec.input_rate_hz * ratio as f64 / upp as f64;
                if carrier < spec.carrier_min_hz || carrier > spec.carrier_max_hz {
                    continue;
                }
                let p = clock / carrier;
                if (p - p.round()).abs() > 1e-9 * p || p.round() > 2.0 * MAX_TOP as f64 {
                    continue;
                }
                let tspec = TimerSpec::new(clock, carrier)
                    .with_edge(edge)
                    .with_update(update);
                let mspec =
                    ModulatorSpec::new(tspec, BridgeSpec::ideal(spec.bridge), spec.input_rate_hz);
                // The modulator's own validation decides what is buildable.
                if Modulator::<1>::try_new(mspec).is_err() {
                    continue;
                }
                let timer = Timer::try_new(tspec)?;
                let top = timer.top();
                let mut best: Option<Candidate> = None;
                for order in 0..=spec.max_order {
                    let Ok(q) = Requantiser::try_new(&timer, 0, top, shaper(order)) else {
                        continue;
                    };
                    // The range the whole chain leaves (natural sampling:
                    // a 3-level leg pair keeps a margin too).
                    let mspec = ModulatorSpec {
                        sampling: Sampling::NATURAL,
                        shaper: shaper(order),
                        ..mspec
                    };
                    let Ok(m) = Modulator::<1>::try_new(mspec) else {
                        continue;
                    };
                    let c = Candidate {
                        clock_hz: clock,
                        carrier_hz: carrier,
                        period_ticks: timer.period_ticks(),
                        edge,
                        update,
                        ratio,
                        top,
                        osr: timer.update_rate_hz() / (2.0 * spec.band_hz),
                        order,
                        max_modulation: m.max_modulation() as f64,
                        predicted_snr_db: predicted_snr_db(&timer, &q, spec.band_hz),
                    };
                    let better = best.is_none_or(|b| c.predicted_snr_db > b.predicted_snr_db);
                    if c.meets(spec.target_snr_db) {
                        best = Some(c);
                        break;
                    }
                    if better {
                        best = Some(c);
                    }
                }
                out.extend(best);
            }
        }
    }
    out.sort_by(|a, b| {
        b.meets(spec.target_snr_db)
            .cmp(&a.meets(spec.target_snr_db))
            .then(a.carrier_hz.total_cmp(&b.carrier_hz))
            .then(a.order.cmp(&b.order))
            .then(b.predicted_snr_db.total_cmp(&a.predicted_snr_db))
    });
    Ok(out)
}

/// A readable table of the first `rows` candidates, with the clocks that
/// lock nothing and their nearest locking clock.
pub fn table(spec: &PlanSpec, candidates: &[Candidate], rows: usize) -> std::string::String {
    use core::fmt::Write as _;
    let mut o = std::string::String::new();
    let _ = writeln!(
        o,
        "ticktone plan: {:.3} kHz input, band {:.1} kHz, target SNR {:.1} dB, {:?} bridge",
        spec.input_rate_hz / 1e3,
        spec.band_hz / 1e3,
        spec.target_snr_db,
        spec.bridge
    );
    let _ = writeln!(
        o,
        "predicted SNR: shaped rounding only (see --verify for the lab's measurement)\n"
    );
    let _ = writeln!(
        o,
        "  {:>10} {:>11} {:>6} {:>8} {:>7} {:>5} {:>6} {:>6} {:>5} {:>7} {:>9}",
        "clock MHz",
        "carrier kHz",
        "ticks",
        "counting",
        "updates",
        "ratio",
        "levels",
        "OSR",
        "order",
        "max mod",
        "SNR dB"
    );
    for c in candidates.iter().take(rows) {
        let counting = match c.edge {
            Edge::Double => "up/down",
            _ => "up",
        };
        let updates = match c.update {
            UpdateScheme::Single => 1,
            UpdateScheme::Double => 2,
        };
        let _ = writeln!(
            o,
            "  {:>10.4} {:>11.3} {:>6} {:>8} {:>7} {:>5} {:>6} {:>6.1} {:>5} {:>7.3} {:>8.1}{}",
            c.clock_hz / 1e6,
            c.carrier_hz / 1e3,
            c.period_ticks,
            counting,
            updates,
            c.ratio,
            c.top + 1,
            c.osr,
            c.order,
            c.max_modulation,
            c.predicted_snr_db,
            if c.max_modulation < MINUS_1_DBFS {
                "  (clamps a -1 dBFS tone)"
            } else if c.meets(spec.target_snr_db) {
                ""
            } else {
                "  (short of target)"
            }
        );
    }
    if candidates.len() > rows {
        let _ = writeln!(o, "  ... {} more (--rows)", candidates.len() - rows);
    }
    for &clock in &spec.clocks_hz {
        if candidates.iter().all(|c| c.clock_hz != clock) {
            match nearest_lock(spec, clock) {
                Some((near, ppm)) => {
                    let _ = writeln!(
                        o,
                        "\n  {:.4} MHz locks no carrier in range to {:.3} kHz input; nearest \
                         clock that does: {:.4} MHz ({ppm:+.0} ppm; unlocked, the audio would slip \
                         {:.1} samples a second)",
                        clock / 1e6,
                        spec.input_rate_hz / 1e3,
                        near / 1e6,
                        (ppm * 1e-6 * spec.input_rate_hz).abs()
                    );
                }
                None => {
                    let _ = writeln!(o, "\n  {:.4} MHz: no carrier in range", clock / 1e6);
                }
            }
        }
    }
    o
}
