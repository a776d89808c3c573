#![doc = include_str!("../README.md")]
#![no_std]
#![cfg_attr(docsrs, feature(doc_cfg))]

// Host modules use `vec!` and `format!`; the firmware modules never do.
#[cfg(feature = "std")]
#[macro_use]
extern crate std;

pub mod bridge;
pub mod crossing;
pub mod dither;
pub mod edge;
pub mod error;
pub mod leg_pair;
pub mod modulator;
pub mod ntf;
pub mod oversample;
pub mod queue;
pub mod requant;
pub mod sample;
pub mod timer;
pub mod tone;

#[cfg(feature = "std")]
pub mod lab;
#[cfg(feature = "std")]
pub mod oversample_design;
#[cfg(feature = "std")]
pub mod plan;
#[cfg(feature = "std")]
pub mod rebuild;

pub use bridge::{Bridge, BridgeKind, BridgeSpec, DeadTimeForm, LegMode};
pub use edge::Sampling;
pub use error::ConfigError;
pub use modulator::{CompareWord, Counters, Modulator, ModulatorSpec};
pub use ntf::{NtfPoles, NtfZeros};
pub use requant::ShaperSpec;
pub use sample::Sample;
pub use timer::{Counting, Edge, Timer, TimerSpec, UpdateScheme};
