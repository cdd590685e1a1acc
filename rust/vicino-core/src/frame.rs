//! Exact rescaling by powers of two, so that extreme but finite magnitudes
//! neither overflow nor underflow the arithmetic.
//!
//! Multiplying by 2^e changes only the exponent of a float, so it is exact
//! (unless the result leaves the range of the format): a rescaled problem
//! has exactly the rescaled answer. Distances are computed from squared
//! differences, which underflow below about 1e-154 and overflow above about
//! 1e154; sums of weights overflow above about 1e308. Each computation first
//! brings its inputs to a scale near 1 with a [`Frame`] (coordinates) or
//! [`pow2_exponent`] (weights and values), computes there, and scales back.
//! O(n) when rescaling is needed, O(1) otherwise.

use crate::csr::{Csr, CsrRef};
use crate::error::{Error, Result, Unit};
use rayon::prelude::*;
use std::borrow::Cow;

/// `x * 2^e`, exactly when the result is representable.
#[inline]
pub fn times_pow2(x: f64, e: i32) -> f64 {
    // 2^e is a normal float for -1022 <= e <= 1023; larger steps are split
    let step = |e: i32| f64::from_bits(((e + 1023) as u64) << 52);
    let mut x = x;
    let mut e = e;
    while e > 1023 {
        x *= step(1023);
        e -= 1023;
    }
    while e < -1022 {
        x *= step(-1022);
        e += 1022;
    }
    x * step(e)
}

/// The exponent e with `m` in [2^e, 2^(e+1)), for finite `m > 0`.
pub fn pow2_exponent(m: f64) -> i32 {
    debug_assert!(m > 0.0 && m.is_finite());
    let bits = m.to_bits();
    let biased = ((bits >> 52) & 0x7ff) as i32;
    if biased > 0 {
        biased - 1023
    } else {
        // subnormal: mantissa * 2^-1074, so its leading one sets the exponent
        let mantissa = bits & ((1u64 << 52) - 1);
        63 - mantissa.leading_zeros() as i32 - 1074
    }
}

/// The smallest magnitude a non-zero coordinate may have, relative to a
/// frame whose largest coordinate is near 1: differences of coordinates at
/// least this large are at least 2^-511, whose squares stay normal floats.
pub const SMALLEST: f64 = f64::from_bits(((1023 - 459) as u64) << 52); // 2^-459, about 6.7e-139

/// The largest magnitude and the smallest non-zero magnitude of `xy`.
fn extremes(xy: &[f64]) -> (f64, f64) {
    xy.par_iter()
        .with_min_len(1 << 14)
        .fold(
            || (0.0f64, f64::INFINITY),
            |(hi, lo), &v| {
                let a = v.abs();
                (hi.max(a), if a > 0.0 { lo.min(a) } else { lo })
            },
        )
        .reduce(|| (0.0, f64::INFINITY), |a, b| (a.0.max(b.0), a.1.min(b.1)))
}

/// How coordinates are scaled for computing: local = world * 2^exp.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Frame {
    exp: i32,
}

impl Frame {
    /// No rescaling.
    pub const IDENTITY: Frame = Frame { exp: 0 };

    /// Choose the frame for interleaved coordinates `xy` (already checked
    /// finite). Coordinates are rescaled when squared differences could
    /// underflow and `may_scale` allows it (Euclidean coordinates; not
    /// longitude and latitude, whose distances depend on the degrees
    /// themselves). A non-zero coordinate too small to tell apart from 0
    /// beside the largest is refused.
    pub fn fit(xy: &[f64], may_scale: bool) -> Result<Frame> {
        let (largest, smallest) = extremes(xy);
        if largest == 0.0 || (smallest >= SMALLEST && largest >= 1.0 / (1u64 << 63) as f64) {
            return Ok(Frame::IDENTITY);
        }
        let exp = if may_scale { -pow2_exponent(largest) } else { 0 };
        if times_pow2(smallest, exp) < SMALLEST {
            let at = xy.iter().position(|&v| v.abs() == smallest).expect("the smallest is one of them");
            return Err(Error::CoordinateSpan { unit: Unit(at / 2), axis: at % 2, value: xy[at], largest });
        }
        Ok(Frame { exp })
    }

    /// Choose the frame that brings the largest coordinate of `xy` near 1
    /// whenever it lies outside [2^-32, 2^33) and `may_scale` allows it
    /// (polygon computations: their tolerance tests multiply four
    /// coordinate differences, so both tiny and large magnitudes need it).
    /// Coordinates of moderate size keep the identity frame (bit for bit
    /// the same results). A non-zero coordinate too small to tell apart
    /// from 0 beside the largest is refused ([`Error::CoordinateSpan`]).
    pub fn near_one(xy: &[f64], may_scale: bool) -> Result<Frame> {
        let (largest, smallest) = extremes(xy);
        if largest == 0.0 {
            return Ok(Frame::IDENTITY);
        }
        let top = pow2_exponent(largest);
        let exp = if may_scale && !(-32..=32).contains(&top) { -top } else { 0 };
        // the span is what matters: measured against the largest, in any frame
        // (degrees are absolute: without rescaling a tiny one is refused as it is)
        if times_pow2(smallest, if may_scale { -top } else { 0 }) < SMALLEST {
            let at = xy.iter().position(|&v| v.abs() == smallest).expect("the smallest is one of them");
            return Err(Error::CoordinateSpan { unit: Unit(at / 2), axis: at % 2, value: xy[at], largest });
        }
        Ok(Frame { exp })
    }

    /// Whether this frame changes anything.
    pub fn is_identity(&self) -> bool {
        self.exp == 0
    }

    /// The power of two: local = world * 2^exponent.
    pub fn exponent(&self) -> i32 {
        self.exp
    }

    /// The coordinates in this frame (borrowed when unchanged).
    pub fn local<'a>(&self, xy: &'a [f64]) -> Cow<'a, [f64]> {
        if self.is_identity() {
            Cow::Borrowed(xy)
        } else {
            Cow::Owned(xy.par_iter().with_min_len(1 << 14).map(|&v| times_pow2(v, self.exp)).collect())
        }
    }

    /// A length given in world units, in this frame (saturating at the
    /// largest float).
    pub fn to_local(&self, d: f64) -> f64 {
        times_pow2(d, self.exp).min(f64::MAX)
    }

    /// A length or coordinate computed in this frame, in world units.
    pub fn to_world(&self, d: f64) -> f64 {
        times_pow2(d, -self.exp)
    }

    /// Lengths computed in this frame, brought to world units in place.
    pub fn lengths_to_world(&self, d: &mut [f64]) {
        if !self.is_identity() {
            d.par_iter_mut().with_min_len(1 << 14).for_each(|v| *v = self.to_world(*v));
        }
    }
}

/// The data of `w` divided by 2^e, a power of two near the largest weight,
/// when the weights are far from 1 (exact), so that the weight sums cannot
/// overflow; statistics are invariant to the scale of W. Returns the
/// rescaled matrix (None when not needed) and e (0 when not needed).
pub fn moderate(w: CsrRef<'_>) -> (Option<Csr>, i32) {
    let top = w.data().par_iter().copied().fold(|| 0.0f64, f64::max).reduce(|| 0.0, f64::max);
    if !(top > 0.0) {
        return (None, 0);
    }
    let e = pow2_exponent(top);
    if e.abs() <= 128 {
        return (None, 0);
    }
    (Some(w.with_data(w.data().iter().map(|&v| times_pow2(v, -e)).collect())), e)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn powers_of_two() {
        // exact by the IEEE 754 binary64 layout (common practice)
        assert_eq!(times_pow2(3.0, 4), 48.0);
        assert_eq!(times_pow2(1.0, -1074), f64::from_bits(1));
        assert_eq!(times_pow2(f64::from_bits(1), 1074 + 1023), 2f64.powi(1023));
        assert_eq!(pow2_exponent(1.0), 0);
        assert_eq!(pow2_exponent(0.75), -1);
        assert_eq!(pow2_exponent(f64::from_bits(1)), -1074);
        assert_eq!(pow2_exponent(f64::MAX), 1023);
        assert_eq!(SMALLEST, times_pow2(1.0, -459));
    }

    #[test]
    fn frames() {
        assert!(Frame::fit(&[0.0, 1.0, 5e5, -3.0], true).unwrap().is_identity());
        let f = Frame::fit(&[1e-170, 0.0, 3e-170, 2e-170], true).unwrap();
        assert!(!f.is_identity());
        let local = f.local(&[1e-170, 3e-170]);
        assert!(local[1] >= 1.0 && local[1] < 2.0);
        assert_eq!(f.to_world(local[0]), 1e-170);
        // a tiny coordinate beside a large one cannot be rescaled away
        assert!(matches!(Frame::fit(&[1e-170, 0.0, 1.0, 2.0], true), Err(Error::CoordinateSpan { .. })));
        // longitude / latitude are never rescaled
        assert!(Frame::fit(&[1e-170, 0.0, 2e-170, 0.0], false).is_err());
        // polygon frames: moderate data untouched, tiny and large brought near 1
        assert!(Frame::near_one(&[0.0, 1.0, 5e5, -3.0], true).unwrap().is_identity());
        for top in [3e-170, 3e140] {
            let f = Frame::near_one(&[top / 3.0, 0.0, top, top / 2.0], true).unwrap();
            let world = [top];
            let local = f.local(&world);
            assert!(local[0] >= 1.0 && local[0] < 2.0);
            assert_eq!(f.to_world(local[0]), top);
        }
        assert!(matches!(Frame::near_one(&[1e-170, 1e10], true), Err(Error::CoordinateSpan { .. })));
        assert!(Frame::near_one(&[1e-170, 2e-170], false).is_err());
        assert!(Frame::near_one(&[1e-10, 2e100], false).unwrap().is_identity());
    }
}
