//! The measurement lab (host, `std`): rebuild the switched output of the
//! firmware path exactly, measure its audio band the way the audio trade
//! does, and check the lab against published theory.
//!
//! | file | concept |
//! |---|---|
//! | [`wave`] | piecewise-constant waveforms, switch nodes, bridge output |
//! | [`exact`] | the exact `f64` modulator, the lab's reference |
//! | [`tone`] | coherent records, the test-tone source |
//! | [`spectrum`] | alias-free spectrum from the edges (B-spline projection, FFT) |
//! | [`window`] | the analysis window |
//! | [`weighting`] | A-weighting (IEC 61672-1) |
//! | [`metrics`] | THD, THD+N, SNR, dynamic range (AES17) |
//! | [`run`] | one measurement from end to end |
//! | [`plot`] | SVG spectra |
//! | [`units`] | numbers with units for the command line |
//!
//! ```
//! use ticktone::lab::run::{measure_once, LabSpec};
//! use ticktone::lab::exact::ExactSampling;
//! // Exact natural sampling, 10 ms: the fundamental is the input level.
//! let spec = LabSpec {
//!     exact: true,
//!     sampling: ExactSampling::Natural,
//!     record_s: 0.01,
//!     tone_hz: 1000.0,
//!     ..LabSpec::reference()
//! };
//! let (_, _, m) = measure_once(&spec).unwrap();
//! assert!((m.fundamental_dbfs + 1.0).abs() < 1e-6);
//! assert!(m.thd_db < -150.0);
//! ```

use core::fmt;

use crate::error::ConfigError;

pub mod exact;
pub mod metrics;
pub mod plot;
pub mod run;
pub mod spectrum;
pub mod tone;
pub mod units;
pub mod wave;
pub mod weighting;
pub mod window;

/// The caution every report of the lab carries.
pub const SAFETY_CAUTION: &str = "Caution: these figures come from a model of the switches. \
Check dead time and minimum pulse against the real gate driver and switches, limit the \
current, and treat anything connected to mains as dangerous: follow local electrical codes \
and licensed practice.";

/// Why a measurement could not be made.
#[derive(Clone, Debug, PartialEq)]
pub enum LabError {
    /// The firmware path's configuration was refused.
    Config(ConfigError),
    /// The record or tone cannot be planned.
    Record(std::string::String),
}

impl From<ConfigError> for LabError {
    fn from(e: ConfigError) -> Self {
        LabError::Config(e)
    }
}

impl fmt::Display for LabError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LabError::Config(e) => write!(f, "configuration refused: {e}"),
            LabError::Record(s) => write!(f, "{s}"),
        }
    }
}

impl std::error::Error for LabError {}
