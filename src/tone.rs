//! A bring-up test tone for the firmware: a sine from a table computed once,
//! at configuration time, with `micromath` (f32, no `std`), then played back
//! with no arithmetic per sample. Use it to hear a stage before the audio
//! input works, not to measure it: micromath states a maximum error of
//! 0.002 for its sine, so the tone's harmonics can reach about -54 dBc.
//!
//! ```
//! use ticktone::tone::BringUpTone;
//! // 1 kHz at 48 kHz: 1 cycle in 48 samples, half scale.
//! let mut t = BringUpTone::<48>::try_new(1, 0.5).unwrap();
//! assert_eq!(t.sample(), 0);
//! let quarter = (0..12).map(|_| t.sample()).last().unwrap(); // sample 12 of 48
//! assert!((quarter as i32 - 16384).abs() <= 66); // 0.5 +- 0.002 of full scale
//! ```

use micromath::F32Ext;

use crate::error::ConfigError;

/// A sine of `cycles` whole cycles every `N` samples: frequency
/// `cycles * fs / N`.
#[derive(Clone, Debug)]
pub struct BringUpTone<const N: usize> {
    table: [i16; N],
    pos: usize,
}

impl<const N: usize> BringUpTone<N> {
    /// The tone at peak `level` (0 to 1 of full scale).
    ///
    /// # Errors
    /// [`ConfigError::BringUpTone`] if `cycles` is 0 or not below `N / 2`
    /// (at or above half the sample rate), or `level` is outside [0, 1].
    pub fn try_new(cycles: u32, level: f32) -> Result<Self, ConfigError> {
        if cycles == 0 || cycles as usize * 2 >= N || !(0.0..=1.0).contains(&level) {
            return Err(ConfigError::BringUpTone {
                cycles,
                samples: N as u32,
            });
        }
        let table = core::array::from_fn(|k| {
            // Reduce the phase to [-pi, pi) before micromath's sine.
            let turns = (k as u64 * cycles as u64 % N as u64) as f32 / N as f32;
            let phase = if turns < 0.5 { turns } else { turns - 1.0 };
            // micromath's sine explicitly, also on the host, so both compute the
            // same table.
            let s = F32Ext::sin(phase * core::f32::consts::TAU) * level * 32767.0;
            s.clamp(-32767.0, 32767.0) as i16
        });
        Ok(Self { table, pos: 0 })
    }

    /// The next sample.
    #[inline]
    pub fn sample(&mut self) -> i16 {
        let s = self.table.get(self.pos).copied().unwrap_or(0);
        self.pos = if self.pos + 1 >= N { 0 } else { self.pos + 1 };
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Against the standard library's sine: within micromath's stated
    /// maximum error of 0.002 (its `sin` docs) plus one LSB of rounding.
    #[test]
    fn accuracy_as_stated() {
        extern crate std;
        let mut t = BringUpTone::<480>::try_new(7, 0.9).unwrap();
        for k in 0..480 {
            let exact = (std::f64::consts::TAU * 7.0 * k as f64 / 480.0).sin() * 0.9 * 32767.0;
            let got = t.sample() as f64;
            assert!(
                (got - exact).abs() <= 0.002 * 32767.0 + 1.0,
                "{k}: {got} vs {exact}"
            );
        }
        assert!(BringUpTone::<48>::try_new(24, 0.5).is_err());
        assert!(BringUpTone::<48>::try_new(1, 1.5).is_err());
    }
}
