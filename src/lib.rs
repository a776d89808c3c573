//! # ticktone
//!
//! A `no_std`, allocation-free sample-to-compare PWM modulator for switching
//! (class D) audio stages and other bridge loads, and, behind the `std`
//! feature, host tools that rebuild the switched output from exactly the
//! compare values the firmware writes and measure it.
//!
//! The firmware path, one file a stage:
//!
//! ```text
//! sample   -> edge       -> requant     -> bridge        -> modulator
//! (input)     (sampling)    (to ticks)     (legs, dead      (chain, block API,
//!                                           time, clamps)    DMA layout)
//! ```
//!
//! Start at [`Modulator`]; the timer conventions are in [`timer`].
//!
//! # Safety of the power stage
//! This crate computes compare values. Whether a power stage survives them
//! depends on the gate driver, the switches, the current limit and the
//! wiring: check dead time and minimum pulse against the real parts' data,
//! limit current, and follow local electrical codes and licensed practice
//! for anything connected to mains.
#![no_std]
#![cfg_attr(docsrs, feature(doc_cfg))]

#[cfg(feature = "std")]
extern crate std;

pub mod bridge;
pub mod edge;
pub mod error;
pub mod modulator;
pub mod oversample;
pub mod requant;
pub mod sample;
pub mod timer;

#[cfg(feature = "std")]
pub mod rebuild;

pub use bridge::{Bridge, BridgeKind, BridgeSpec, DeadTimeForm, LegMode};
pub use edge::Sampling;
pub use error::ConfigError;
pub use modulator::{CompareWord, Counters, Modulator, ModulatorSpec};
pub use requant::ShaperSpec;
pub use sample::Sample;
pub use timer::{Counting, Edge, Timer, TimerSpec, UpdateScheme};
