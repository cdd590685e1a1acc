//! Weights that fall with distance, from the links and distances of a
//! neighbour search ([`crate::neighbors`]).
//!
//! * Inverse distance: w_ij = 1 / d_ij^p (p >= 0), optionally with a floor
//!   distance under which d is raised to the floor. Coincident units (d = 0,
//!   no floor) are refused, naming the pair, or their link is dropped.
//! * Kernels (Silverman 1986, table 3.1), u = d_ij / h_i with the bandwidth
//!   h_i of unit i (one fixed value, or adaptive: the distance to unit i's
//!   k-th nearest neighbour, Fotheringham, Brunsdon and Charlton 2002), for
//!   u <= 1:
//!
//!   | kernel | K(u) |
//!   |---|---|
//!   | uniform | 1/2 |
//!   | triangular | 1 - u |
//!   | Epanechnikov | 3/4 (1 - u^2) |
//!   | quartic (biweight) | 15/16 (1 - u^2)^2 |
//!   | Gaussian | exp(-u^2 / 2) / sqrt(2 pi), truncated at u = 1 |
//!
//!   (Silverman writes the Epanechnikov kernel for a unit variance, on
//!   |t| < sqrt 5; here it is on the unit interval, t = sqrt 5 u, up to the
//!   constant.) A weight of 0 (u = 1 for the kernels that vanish there) is
//!   no link. With a self weight each unit also gets w_ii = K(0). A unit
//!   whose bandwidth is 0 (its k-th neighbour shares its location) weighs
//!   only the units at its location, with K(0).
//!
//! Every weight must be a positive finite float: one that overflows or
//! underflows (d^p beyond the range of binary64) is refused with the link
//! named. O(links), parallel over rows.

use crate::csr::{build_rows, Csr, CsrRef, PARALLEL_MIN_NNZ};
use crate::error::{Error, Link, Pair, Result};
use crate::guard::Guard;
use crate::neighbors::{self, Metric};

/// What to do with links between units at the same location.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Coincident {
    Error,
    Drop,
}

impl Coincident {
    pub fn parse(name: &str) -> Result<Self> {
        match name {
            "error" => Ok(Self::Error),
            "drop" => Ok(Self::Drop),
            _ => Err(Error::UnknownOption {
                what: "coincident policy",
                name: name.into(),
                options: "\"error\", \"drop\" (or give min_distance)",
            }),
        }
    }
}

/// A kernel shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kernel {
    Uniform,
    Triangular,
    Epanechnikov,
    Quartic,
    Gaussian,
}

impl Kernel {
    pub fn parse(name: &str) -> Result<Self> {
        Ok(match name {
            "uniform" => Self::Uniform,
            "triangular" => Self::Triangular,
            "epanechnikov" => Self::Epanechnikov,
            "quartic" | "bisquare" => Self::Quartic,
            "gaussian" => Self::Gaussian,
            _ => {
                return Err(Error::UnknownOption {
                    what: "kernel",
                    name: name.into(),
                    options: "\"uniform\", \"triangular\", \"epanechnikov\", \"quartic\" (\"bisquare\"), \"gaussian\"",
                })
            }
        })
    }

    /// K(u) for 0 <= u <= 1.
    #[inline]
    pub fn at(self, u: f64) -> f64 {
        match self {
            Self::Uniform => 0.5,
            Self::Triangular => 1.0 - u,
            Self::Epanechnikov => 0.75 * (1.0 - u * u),
            Self::Quartic => {
                let a = 1.0 - u * u;
                15.0 / 16.0 * a * a
            }
            Self::Gaussian => (-0.5 * u * u).exp() / (2.0 * std::f64::consts::PI).sqrt(),
        }
    }
}

/// The weights (data) and kept distances of links, row by row.
type Weighted = (Csr, Vec<f64>);

fn out_of_range(i: usize, j: usize, value: f64) -> Error {
    Error::WeightOutOfRange {
        what: "distance weight",
        link: Link(i, j),
        value,
        advice: "rescale the coordinates (for example to kilometres) or use a smaller power",
    }
}

fn split(n: usize, parts: crate::csr::Parts<(f64, f64)>) -> Weighted {
    let (indptr, indices, pairs) = parts;
    let (data, dist): (Vec<f64>, Vec<f64>) = pairs.into_iter().unzip();
    (Csr::from_parts(n, (indptr, indices, data)), dist)
}

/// Inverse-distance weights of the links of `nb`, whose data are distances.
///
/// ```
/// use vicino_core::{Csr, distance_weights::{inverse_distance, Coincident}};
/// let nb = Csr::from_rows(vec![vec![(1, 2.0)], vec![(0, 2.0)]]);
/// let (w, d) = inverse_distance(nb.view(), 2.0, None, Coincident::Error).unwrap();
/// assert_eq!(w.data(), &[0.25, 0.25]);
/// assert_eq!(d, vec![2.0, 2.0]);
/// ```
pub fn inverse_distance(nb: CsrRef<'_>, power: f64, floor: Option<f64>, coincident: Coincident) -> Result<Weighted> {
    if !(power >= 0.0 && power.is_finite()) {
        return Err(Error::InvalidPower { name: "power", value: power });
    }
    if let Some(f) = floor {
        if !(f > 0.0 && f.is_finite()) {
            return Err(Error::InvalidPower { name: "min_distance", value: f });
        }
    }
    let parts = build_rows(
        nb.n(),
        None,
        nb.nnz() >= PARALLEL_MIN_NNZ,
        || (),
        |_, i, cols, out| {
            let (c, d) = nb.row(i);
            for (&j, &dist) in c.iter().zip(d) {
                let eff = floor.map_or(dist, |f| dist.max(f));
                if eff == 0.0 {
                    match coincident {
                        Coincident::Drop => continue,
                        Coincident::Error => return Err(Error::CoincidentUnits { pair: Pair(i, j as usize) }),
                    }
                }
                let w = eff.powf(-power);
                if !(w > 0.0 && w.is_finite()) {
                    return Err(out_of_range(i, j as usize, w));
                }
                cols.push(j);
                out.push((w, dist));
            }
            Ok(())
        },
    )?;
    Ok(split(nb.n(), parts))
}

/// Kernel weights of the links of `nb` (data: distances) with bandwidth
/// `bandwidth[i]` for unit i; with `self_weight`, w_ii = K(0) too.
///
/// ```
/// use vicino_core::{Csr, distance_weights::{kernel_weights, Kernel}};
/// let nb = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0)]]);
/// let (w, _) = kernel_weights(nb.view(), &[2.0, 1.0], Kernel::Triangular, true).unwrap();
/// // unit 0: K(0) = 1 for itself, K(1/2) = 1/2 for unit 1; unit 1: K(1) = 0 drops its link
/// assert_eq!(w.view().indices(), &[0, 1, 1]);
/// assert_eq!(w.data(), &[1.0, 0.5, 1.0]);
/// ```
pub fn kernel_weights(nb: CsrRef<'_>, bandwidth: &[f64], kernel: Kernel, self_weight: bool) -> Result<Weighted> {
    if bandwidth.len() != nb.n() {
        return Err(Error::LengthMismatch { what: "the bandwidths", expected: nb.n(), got: bandwidth.len() });
    }
    if let Some(&b) = bandwidth.iter().find(|b| !(**b >= 0.0 && b.is_finite())) {
        return Err(Error::InvalidPower { name: "bandwidth", value: b });
    }
    let parts = build_rows(
        nb.n(),
        None,
        nb.nnz() >= PARALLEL_MIN_NNZ,
        || (),
        |_, i, cols, out| {
            let h = bandwidth[i];
            let (c, d) = nb.row(i);
            let mut own = self_weight;
            for (&j, &dist) in c.iter().zip(d) {
                if own && j as usize > i {
                    cols.push(i as i64);
                    out.push((kernel.at(0.0), 0.0));
                    own = false;
                }
                if j as usize == i {
                    continue; // a stored self link is replaced by the self weight
                }
                let u = if dist == 0.0 { 0.0 } else { dist / h };
                if u > 1.0 {
                    continue;
                }
                let w = kernel.at(u);
                if w > 0.0 {
                    cols.push(j);
                    out.push((w, dist));
                }
            }
            if own {
                cols.push(i as i64);
                out.push((kernel.at(0.0), 0.0));
            }
            Ok(())
        },
    )?;
    Ok(split(nb.n(), parts))
}

/// Which units an inverse-distance weight links.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Cutoff {
    /// units within this distance (inclusive)
    Radius(f64),
    /// the k nearest
    Nearest(usize),
    /// every other unit (small n only, see [`neighbors::ALL_PAIRS_MAX_UNITS`])
    Everyone,
}

/// How kernel bandwidths are set.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Bandwidth {
    /// one bandwidth for all units
    Fixed(f64),
    /// each unit's distance to its k-th nearest neighbour
    Adaptive(usize),
}

/// Weights from points, their distances kept, and the units sharing a location.
pub struct PointWeights {
    pub graph: Csr,
    pub distances: Vec<f64>,
    pub duplicate_units: usize,
}

/// Inverse-distance weights of points: one search (radius, k nearest or
/// all pairs), then the weights from its distances.
pub fn inverse_distance_points(
    xy: &[f64],
    metric: Metric,
    power: f64,
    cutoff: Cutoff,
    floor: Option<f64>,
    coincident: Coincident,
    guard: &Guard,
) -> Result<PointWeights> {
    let nb = match cutoff {
        Cutoff::Radius(r) => neighbors::within_distance(xy, r, metric, guard)?,
        Cutoff::Nearest(k) => neighbors::k_nearest(xy, k, metric, guard)?,
        Cutoff::Everyone => neighbors::all_pairs(xy, metric, guard)?,
    };
    let (graph, distances) = inverse_distance(nb.graph.view(), power, floor, coincident)?;
    Ok(PointWeights { graph, distances, duplicate_units: nb.duplicate_units })
}

/// Kernel weights of points: a fixed bandwidth searches within it; an
/// adaptive one finds each unit's k-th neighbour distance first, then (for
/// kernels that do not vanish at u = 1) searches within each unit's own
/// bandwidth, so units tied with the k-th are all included.
pub fn kernel_points(
    xy: &[f64],
    metric: Metric,
    kernel: Kernel,
    bandwidth: Bandwidth,
    self_weight: bool,
    guard: &Guard,
) -> Result<PointWeights> {
    let (nb, h) = match bandwidth {
        Bandwidth::Fixed(h) => {
            if !(h > 0.0 && h.is_finite()) {
                return Err(Error::InvalidPower { name: "bandwidth", value: h });
            }
            let nb = neighbors::within_distance(xy, h, metric, guard)?;
            let n = nb.graph.n();
            (nb, vec![h; n])
        }
        Bandwidth::Adaptive(k) => {
            let near = neighbors::k_nearest(xy, k, metric, guard)?;
            let g = near.graph.view();
            let h: Vec<f64> = (0..g.n()).map(|i| g.row(i).1.iter().copied().fold(0.0, f64::max)).collect();
            if kernel.at(1.0) == 0.0 {
                // units tied with the k-th at u = 1 would weigh 0: the k nearest are all the links
                (near, h)
            } else {
                drop(near);
                (neighbors::within_radii(xy, &h, metric, guard)?, h)
            }
        }
    };
    let (graph, distances) = kernel_weights(nb.graph.view(), &h, kernel, self_weight)?;
    Ok(PointWeights { graph, distances, duplicate_units: nb.duplicate_units })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kernel_shapes_by_hand() {
        // Silverman (1986), table 3.1, on the unit interval
        assert_eq!(Kernel::Triangular.at(0.25), 0.75);
        assert_eq!(Kernel::Epanechnikov.at(0.5), 0.5625);
        assert_eq!(Kernel::Quartic.at(0.5), 15.0 / 16.0 * 0.5625);
        assert!((Kernel::Gaussian.at(0.0) - 0.3989422804014327).abs() < 1e-16);
        assert_eq!(Kernel::Uniform.at(1.0), 0.5);
    }

    #[test]
    fn coincident_units() {
        let nb = Csr::from_canonical(2, vec![0, 1, 2], vec![1, 0], vec![0.0, 0.0]);
        assert!(matches!(
            inverse_distance(nb.view(), 1.0, None, Coincident::Error),
            Err(Error::CoincidentUnits { .. })
        ));
        assert_eq!(inverse_distance(nb.view(), 1.0, None, Coincident::Drop).unwrap().0.view().nnz(), 0);
        let (w, _) = inverse_distance(nb.view(), 1.0, Some(0.5), Coincident::Error).unwrap();
        assert_eq!(w.data(), &[2.0, 2.0]);
        assert!(inverse_distance(nb.view(), f64::NAN, None, Coincident::Drop).is_err());
        let far = Csr::from_rows(vec![vec![(1, 1e300)], vec![(0, 1e300)]]);
        assert!(matches!(
            inverse_distance(far.view(), 2.0, None, Coincident::Error),
            Err(Error::WeightOutOfRange { .. })
        ));
    }
}
