//! Oversampler: from the input rate to the update rate.
//!
//! Only the ratio 1 (input already at the update rate) is built so far; the
//! interpolating filters come with the next stage of work.

use crate::error::ConfigError;

/// Largest oversampling ratio.
pub const MAX_RATIO: usize = 16;

/// Interpolates each input sample to `ratio` samples at the update rate.
#[derive(Clone, Debug)]
pub struct Oversampler {
    ratio: usize,
}

impl Oversampler {
    /// An oversampler for `ratio` = update rate / input rate.
    ///
    /// # Errors
    /// [`ConfigError::OversamplingRatio`] for an unsupported ratio.
    pub fn try_new(ratio: u32) -> Result<Self, ConfigError> {
        if ratio != 1 {
            return Err(ConfigError::OversamplingRatio { ratio });
        }
        Ok(Self {
            ratio: ratio as usize,
        })
    }

    /// Output samples a input sample.
    pub const fn ratio(&self) -> usize {
        self.ratio
    }

    /// Updates of delay the filters add, at the update rate.
    pub const fn delay_updates(&self) -> u32 {
        0
    }

    /// One input sample (Q1.31) in, `ratio` samples (Q1.31) out, written to
    /// the front of `out`.
    #[inline]
    pub fn push(&mut self, x: i32, out: &mut [i32; MAX_RATIO]) {
        out[0] = x;
    }
}
