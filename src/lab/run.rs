//! One measurement from end to end: plan a coherent record, make the
//! waveform (firmware path or exact mode), rebuild the bridge output,
//! analyse it.
//!
//! The firmware path runs the crate's [`Modulator`] on Q1.31 samples of
//! the tone at the input rate, after a lead-in of about 10 ms (whole
//! periods) that lets filters and noise shapers settle and is discarded;
//! [`crate::rebuild::leg_switches`] then turns the compare words back into
//! switch waveforms, to the tick. Exact mode uses
//! [`crate::lab::exact`] instead.

use std::vec::Vec;

use crate::bridge::{BridgeKind, BridgeSpec};
use crate::edge::Sampling;
use crate::lab::exact::{exact_legs, ExactSampling, ToneSignal};
use crate::lab::metrics::{analyse, dynamic_range_db, Metrics, AES17_BAND_HZ, AES17_TONE_HZ};
use crate::lab::spectrum::{band_grid, spectrum, Spectrum};
use crate::lab::tone::{plan, q31_samples, RecordPlan};
use crate::lab::wave::{bridge_output, DeadNode, Wave};
use crate::lab::LabError;
use crate::modulator::{Counters, Modulator, ModulatorSpec};
use crate::rebuild::{leg_switches, LegSwitches};
use crate::requant::ShaperSpec;
use crate::timer::{Timer, TimerSpec, UpdateScheme};

/// Everything one measurement needs.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LabSpec {
    /// Timer.
    pub timer: TimerSpec,
    /// Bridge, dead time and clamps.
    pub bridge: BridgeSpec,
    /// Rate of the samples fed to the firmware path, Hz.
    pub input_rate_hz: f64,
    /// Edge sampling (firmware path: the modulator's; exact mode: exact).
    pub sampling: ExactSampling,
    /// Noise shaping of the firmware path.
    pub shaper: ShaperSpec,
    /// Tone frequency asked for, Hz (moved to a coherent one).
    pub tone_hz: f64,
    /// Tone peak, dBFS (0 dBFS = modulation index 1).
    pub level_dbfs: f64,
    /// Record length asked for, s.
    pub record_s: f64,
    /// Upper edge of the measurement band, Hz.
    pub bandwidth_hz: f64,
    /// Exact mode instead of the firmware path.
    pub exact: bool,
    /// Switch node during dead time.
    pub dead_node: DeadNode,
}

impl LabSpec {
    /// The reference scenario: 48 kHz input, 98.304 MHz clock, 384 kHz
    /// carrier, up/down counting, double edge, two updates a period, 3-level
    /// full bridge, no dead time, 997 Hz at -1 dBFS, 1 s record, 20 kHz band,
    /// uniform sampling, plain rounding.
    pub fn reference() -> Self {
        Self {
            timer: TimerSpec::new(98.304e6, 384e3).with_update(UpdateScheme::Double),
            bridge: BridgeSpec::ideal(BridgeKind::Full3),
            input_rate_hz: 48e3,
            sampling: ExactSampling::Uniform,
            shaper: ShaperSpec::ROUND,
            tone_hz: AES17_TONE_HZ,
            level_dbfs: -1.0,
            record_s: 1.0,
            bandwidth_hz: AES17_BAND_HZ.1,
            exact: false,
            dead_node: DeadNode::Midpoint,
        }
    }
}

/// A rendered record.
#[derive(Clone, Debug)]
pub struct Rendered {
    /// The validated timer.
    pub timer: Timer,
    /// The coherent record.
    pub plan: RecordPlan,
    /// Switches of each leg.
    pub legs: Vec<LegSwitches>,
    /// Bridge output (normalised, see [`crate::lab::wave`]).
    pub output: Wave,
    /// The modulator's clamp counts (firmware path).
    pub counters: Option<Counters>,
}

/// The firmware path's sampling for the lab's choice.
fn firmware_sampling(s: ExactSampling) -> Sampling {
    match s {
        ExactSampling::Uniform => Sampling::Uniform,
        ExactSampling::Natural => Sampling::NATURAL,
    }
}

/// Make the record `spec` describes.
///
/// # Errors
/// The modulator's [`crate::ConfigError`] (as [`LabError::Config`]) or a
/// record that cannot be planned.
pub fn render(spec: &LabSpec) -> Result<Rendered, LabError> {
    let timer = Timer::try_new(spec.timer)?;
    let amplitude = 10f64.powf(spec.level_dbfs / 20.0);
    if amplitude > 1.0 {
        return Err(LabError::Record(format!(
            "level {} dBFS is above full scale",
            spec.level_dbfs
        )));
    }
    if spec.exact {
        crate::bridge::Bridge::try_new(spec.bridge, &timer)?;
        let plan = plan(&timer, None, spec.record_s, spec.tone_hz)?;
        let ticks = plan.periods as f64 * timer.period_ticks() as f64;
        let tone = ToneSignal {
            amplitude,
            cycles_per_tick: plan.cycles as f64 / ticks,
            phase: 0.0,
        };
        let legs = exact_legs(
            &timer,
            &spec.bridge,
            spec.sampling,
            &tone,
            plan.periods as usize,
        );
        let output = bridge_output(spec.bridge.kind, &legs, spec.dead_node);
        return Ok(Rendered {
            timer,
            plan,
            legs,
            output,
            counters: None,
        });
    }
    let mut mspec = ModulatorSpec::new(spec.timer, spec.bridge, spec.input_rate_hz);
    mspec.sampling = firmware_sampling(spec.sampling);
    mspec.shaper = spec.shaper;
    let mut m = Modulator::<1>::try_new(mspec)?;
    let plan = plan(
        &timer,
        Some(spec.input_rate_hz),
        spec.record_s,
        spec.tone_hz,
    )?;
    // Lead-in: about 10 ms, a whole number of periods.
    let upp = timer.updates_per_period() as u64;
    let align = upp / gcd(plan.ratio, upp);
    let lead = ((0.01 * spec.input_rate_hz / align as f64).ceil() as u64).max(1) * align;
    let wpf = m.words_per_frame();
    let mut scratch = vec![0u32; lead as usize * wpf];
    let input = q31_samples(&plan, amplitude, -(lead as i64), lead as usize);
    m.process(&input, &mut scratch);
    m.clear_counters();
    let n = plan.input_samples as usize;
    let input = q31_samples(&plan, amplitude, 0, n);
    let mut words = vec![0u32; n * wpf];
    m.process(&input, &mut words);
    let bridge = *m.bridge();
    let legs: Vec<LegSwitches> = (0..bridge.legs())
        .map(|leg| leg_switches(&timer, &bridge, &words, 1, 0, leg))
        .collect();
    let output = bridge_output(spec.bridge.kind, &legs, spec.dead_node);
    Ok(Rendered {
        timer,
        plan,
        legs,
        output,
        counters: Some(m.counters()),
    })
}

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 {
        a
    } else {
        gcd(b, a % b)
    }
}

/// The in-band spectrum of a rendered record (up to the band edge plus
/// the window's lobe).
pub fn band_spectrum(r: &Rendered, bandwidth_hz: f64) -> Spectrum {
    let grid = band_grid(r.timer.carrier_hz(), bandwidth_hz);
    let margin = 8.0 / r.plan.record_s;
    spectrum(
        &r.output,
        r.timer.clock_hz(),
        r.timer.period_ticks() as f64,
        grid,
        bandwidth_hz + margin,
    )
}

/// Render and analyse one record.
///
/// # Errors
/// As [`render`].
pub fn measure_once(spec: &LabSpec) -> Result<(Rendered, Spectrum, Metrics), LabError> {
    let r = render(spec)?;
    let s = band_spectrum(&r, spec.bandwidth_hz);
    let m = analyse(&s, r.plan.tone_hz, AES17_BAND_HZ.0, spec.bandwidth_hz);
    Ok((r, s, m))
}

/// A full report: the measurement at the spec's level and the dynamic
/// range from a second one at -60 dBFS.
#[derive(Clone, Debug)]
pub struct Report {
    /// The record measured at the spec's level.
    pub rendered: Rendered,
    /// Its in-band spectrum.
    pub spectrum: Spectrum,
    /// Its figures.
    pub metrics: Metrics,
    /// Dynamic range (AES17 -60 dBFS method), dB; `None` if the -60 dBFS
    /// tone did not come through (see [`dynamic_range_db`]).
    pub dynamic_range_db: Option<f64>,
}

/// Measure at the spec's level and at -60 dBFS.
///
/// # Errors
/// As [`render`].
pub fn measure(spec: &LabSpec) -> Result<Report, LabError> {
    let (rendered, spectrum, metrics) = measure_once(spec)?;
    let low = LabSpec {
        level_dbfs: -60.0,
        ..*spec
    };
    let (_, _, m60) = measure_once(&low)?;
    Ok(Report {
        rendered,
        spectrum,
        metrics,
        dynamic_range_db: dynamic_range_db(&m60),
    })
}
