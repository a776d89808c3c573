//! Sample input: i16, left-justified i32 (24-bit audio), f32 and the `fixed`
//! Q formats, all turned into the internal Q1.31 signal.
//!
//! Full scale is [-1, 1): `i16::MIN` is -1.0 exactly, `i16::MAX` is
//! 1 - 2^-15. Integer formats cannot be out of range. An `f32` that is NaN,
//! infinite or outside [-1, 1] is clamped (NaN to 0) and counted; it is
//! never passed on.

use fixed::types::{I1F15, I1F31};

/// Largest Q1.31 value, 1 - 2^-31.
pub const Q31_MAX: i32 = i32::MAX;

/// A PCM sample the modulator accepts.
pub trait Sample: Copy {
    /// The sample as Q1.31. `clamped` is incremented when the value had to be
    /// clamped or replaced (only `f32` can be out of range).
    fn to_q31(self, clamped: &mut u32) -> i32;
}

impl Sample for i16 {
    #[inline(always)]
    fn to_q31(self, _: &mut u32) -> i32 {
        (self as i32) << 16
    }
}

/// Left-justified: a 24-bit sample sits in the top 24 bits; the low 8 bits
/// are used as they are (zero for 24-bit audio), so the value is Q1.31.
impl Sample for i32 {
    #[inline(always)]
    fn to_q31(self, _: &mut u32) -> i32 {
        self
    }
}

impl Sample for I1F15 {
    #[inline(always)]
    fn to_q31(self, _: &mut u32) -> i32 {
        (self.to_bits() as i32) << 16
    }
}

impl Sample for I1F31 {
    #[inline(always)]
    fn to_q31(self, _: &mut u32) -> i32 {
        self.to_bits()
    }
}

impl Sample for f32 {
    /// NaN becomes 0; values above `1 - 2^-31` or below -1, and infinities,
    /// are clamped; each of these increments `clamped`.
    #[inline]
    fn to_q31(self, clamped: &mut u32) -> i32 {
        // 2^31 as f32 is exact; the cast saturates, and maps NaN to 0.
        let scaled = self * 2_147_483_648.0;
        if scaled.is_nan() || !(-2_147_483_648.0..2_147_483_648.0).contains(&scaled) {
            *clamped = clamped.wrapping_add(1);
        }
        scaled as i32
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn full_scale_and_clamps() {
        let mut n = 0;
        assert_eq!(i16::MIN.to_q31(&mut n), i32::MIN);
        assert_eq!(0x4000i16.to_q31(&mut n), 0x4000_0000);
        assert_eq!(0.5f32.to_q31(&mut n), 0x4000_0000);
        assert_eq!((-1.0f32).to_q31(&mut n), i32::MIN);
        assert_eq!(n, 0);
        assert_eq!(1.0f32.to_q31(&mut n), i32::MAX);
        assert_eq!(f32::NAN.to_q31(&mut n), 0);
        assert_eq!(f32::NEG_INFINITY.to_q31(&mut n), i32::MIN);
        assert_eq!(7.0f32.to_q31(&mut n), i32::MAX);
        assert_eq!(n, 4);
        assert_eq!(I1F15::from_num(0.25).to_q31(&mut n), 0x2000_0000);
    }
}
