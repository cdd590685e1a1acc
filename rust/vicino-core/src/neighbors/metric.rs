//! Distance metrics and the coordinate checks that go with them.
//!
//! * Euclidean: straight-line distance in the units of the coordinates.
//! * Great circle: (longitude, latitude) in degrees, distance in kilometres on
//!   a sphere of radius [`EARTH_RADIUS_KM`] (the IUGG mean radius R1), by the
//!   haversine formula, which stays accurate for small separations.
//!   The search itself runs on unit vectors in 3-D, where the chord length is
//!   a monotone function of the arc length, so nearest by chord is nearest by
//!   arc; every reported distance and every comparison with a radius uses the
//!   haversine arc length.

use crate::error::{Error, Result, Unit};

/// IUGG mean Earth radius R1, in kilometres.
pub const EARTH_RADIUS_KM: f64 = 6371.0088;

/// How distances between units are measured.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Metric {
    Euclidean,
    GreatCircle,
}

impl Metric {
    /// Parse the public name of a metric.
    pub fn parse(name: &str) -> Result<Self> {
        match name {
            "euclidean" => Ok(Self::Euclidean),
            "great_circle" => Ok(Self::GreatCircle),
            _ => Err(Error::UnknownMetric { name: name.to_string() }),
        }
    }

    /// Check coordinates given as interleaved pairs (x0, y0, x1, y1, ...).
    pub fn check(self, xy: &[f64]) -> Result<usize> {
        if !xy.len().is_multiple_of(2) {
            return Err(Error::OddCoordinates { len: xy.len() });
        }
        let n = xy.len() / 2;
        if n == 0 {
            return Err(Error::Empty);
        }
        for (index, p) in xy.chunks_exact(2).enumerate() {
            for (axis, &value) in p.iter().enumerate() {
                if !value.is_finite() {
                    return Err(Error::NonFiniteCoordinate { unit: Unit(index), axis, value });
                }
                if value.abs() > 1e150 {
                    return Err(Error::CoordinateTooLarge { unit: Unit(index), axis, value });
                }
            }
            if self == Self::GreatCircle {
                if !(-180.0..=360.0).contains(&p[0]) {
                    return Err(Error::LongitudeOutOfRange { unit: Unit(index), value: p[0] });
                }
                if !(-90.0..=90.0).contains(&p[1]) {
                    return Err(Error::LatitudeOutOfRange { unit: Unit(index), value: p[1] });
                }
            }
        }
        Ok(n)
    }

    /// Coordinates in one canonical spelling, so that one place is always
    /// written the same way: for great circle, longitudes in [180, 360] move
    /// to [-180, 0] (exact by Sterbenz's lemma) and both poles get longitude
    /// 0. Euclidean coordinates are returned as they are.
    pub fn canonical(self, xy: &[f64]) -> std::borrow::Cow<'_, [f64]> {
        if self == Self::Euclidean || !xy.chunks_exact(2).any(|p| p[0] >= 180.0 || p[1].abs() == 90.0) {
            return std::borrow::Cow::Borrowed(xy);
        }
        let mut out = xy.to_vec();
        for p in out.chunks_exact_mut(2) {
            if p[1].abs() == 90.0 {
                p[0] = 0.0;
            } else if p[0] >= 180.0 {
                p[0] -= 360.0;
            }
        }
        std::borrow::Cow::Owned(out)
    }

    /// Distance between two points in this metric.
    #[inline]
    pub fn distance(self, a: [f64; 2], b: [f64; 2]) -> f64 {
        match self {
            Self::Euclidean => {
                let (dx, dy) = (a[0] - b[0], a[1] - b[1]);
                let d = (dx * dx + dy * dy).sqrt();
                // squares of separations below ~1e-154 underflow; only distinct
                // points at such tiny separations need the slower exact form
                if d == 0.0 && (dx != 0.0 || dy != 0.0) {
                    dx.hypot(dy)
                } else {
                    d
                }
            }
            Self::GreatCircle => haversine_km(a, b),
        }
    }
}

/// Great-circle distance in km between two (longitude, latitude) points in
/// degrees, by the haversine formula on the IUGG mean sphere.
#[inline]
pub fn haversine_km(a: [f64; 2], b: [f64; 2]) -> f64 {
    let (lon1, lat1) = (a[0].to_radians(), a[1].to_radians());
    let (lon2, lat2) = (b[0].to_radians(), b[1].to_radians());
    let s_lat = ((lat2 - lat1) * 0.5).sin();
    let s_lon = ((lon2 - lon1) * 0.5).sin();
    let h = s_lat * s_lat + lat1.cos() * lat2.cos() * s_lon * s_lon;
    2.0 * EARTH_RADIUS_KM * h.sqrt().min(1.0).asin()
}

/// A (longitude, latitude) point in degrees as a unit vector.
#[inline]
pub fn unit_vector(p: [f64; 2]) -> [f64; 3] {
    let (lon, lat) = (p[0].to_radians(), p[1].to_radians());
    [lat.cos() * lon.cos(), lat.cos() * lon.sin(), lat.sin()]
}

/// Chord length on the unit sphere that matches an arc of `km` kilometres.
#[inline]
pub fn chord_for_km(km: f64) -> f64 {
    let angle = (km / EARTH_RADIUS_KM).min(std::f64::consts::PI);
    2.0 * (angle * 0.5).sin()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quarter_meridian() {
        // A quarter of a great circle is pi/2 * R. # common practice
        let d = haversine_km([0.0, 0.0], [0.0, 90.0]);
        assert!((d - std::f64::consts::FRAC_PI_2 * EARTH_RADIUS_KM).abs() < 1e-9);
        // chord of that arc on the unit sphere is sqrt(2)
        assert!((chord_for_km(d) - 2f64.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn checks() {
        assert!(Metric::GreatCircle.check(&[0.0, 91.0]).is_err());
        assert!(Metric::GreatCircle.check(&[-181.0, 0.0]).is_err());
        assert!(Metric::Euclidean.check(&[1e9, f64::NAN]).is_err());
        assert_eq!(Metric::Euclidean.check(&[]), Err(Error::Empty));
        assert_eq!(Metric::Euclidean.check(&[1.0, 2.0, 3.0, 4.0]), Ok(2));
    }
}
