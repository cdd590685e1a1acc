//! Standardization of weights: bring a matrix to a common scale.
//!
//! | method | w*_ij |
//! |---|---|
//! | row | w_ij / sum_j w_ij (rows sum to 1) |
//! | binary | 1 for every stored link |
//! | max_entry | w_ij / max w |
//! | max_eigenvalue | w_ij / rho(W), rho the spectral radius (Kelejian and Prucha 2010) |
//! | global | n w_ij / sum w (all weights sum to n) |
//! | variance_stabilizing | n (w_ij / q_i) / sum (w / q), q_i = sqrt(sum_j w_ij^2) (Tiefelsdorf, Griffith and Boots 1999) |
//! | none | unchanged |
//!
//! The sparsity pattern never changes, so only new data are returned.
//! Units without neighbours (islands) have empty (zero) rows. The two
//! methods that divide each row by a quantity of that row (its sum for
//! `row`, its root sum of squares for `variance_stabilizing`) refuse them
//! unless asked to keep them, since such a row has nothing to divide by;
//! the others scale every weight alike (or set it to 1), so islands need no
//! decision and are kept. O(nnz), plus the eigenvalue iteration for
//! `max_eigenvalue`.

use crate::csr::CsrRef;
use crate::error::{Error, Link, Result, Units};
use crate::frame::{moderate, pow2_exponent, times_pow2};
use crate::guard::Guard;
use crate::spectral::spectral_radius;

/// A standardization method.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    Row,
    Binary,
    MaxEntry,
    MaxEigenvalue,
    Global,
    VarianceStabilizing,
    None,
}

impl Method {
    /// Parse the public name of a method.
    pub fn parse(name: &str) -> Result<Self> {
        Ok(match name {
            "row" => Self::Row,
            "binary" => Self::Binary,
            "max_entry" => Self::MaxEntry,
            "max_eigenvalue" => Self::MaxEigenvalue,
            "global" => Self::Global,
            "variance_stabilizing" => Self::VarianceStabilizing,
            "none" => Self::None,
            _ => return Err(Error::UnknownStandardization { name: name.to_string() }),
        })
    }
}

impl Method {
    /// Whether each row is divided by a quantity of its own (which an island lacks).
    pub fn divides_rows(self) -> bool {
        matches!(self, Self::Row | Self::VarianceStabilizing)
    }
}

/// What to do with units that have no neighbours.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Islands {
    Raise,
    Keep,
}

/// The power of two nearest below the largest of `v` (1 when `v` is empty),
/// for scaling sums that could overflow: dividing by it is exact.
fn pow2_of_max(v: &[f64]) -> f64 {
    let m = v.iter().copied().fold(0.0f64, f64::max);
    if m > 0.0 {
        times_pow2(1.0, pow2_exponent(m))
    } else {
        1.0
    }
}

/// Apply `f` to the values of each row in turn, collecting into one output.
fn each_row(w: CsrRef<'_>, mut f: impl FnMut(&[f64], &mut Vec<f64>)) -> Vec<f64> {
    let mut out = Vec::with_capacity(w.nnz());
    for i in 0..w.n() {
        f(w.row(i).1, &mut out);
    }
    out
}

/// Standardize `w`; returns the new data, aligned with `w.data()`.
///
/// Sums are taken over values divided by a power of two near their largest
/// (exact), so that weights near 1e308 do not overflow them; the results
/// are the same bit for bit as the plain formulas wherever those do not
/// overflow. A standardized weight too small to represent (the weights span
/// more than the range of floating point) is refused rather than stored as 0.
///
/// ```
/// use vicino_core::{Csr, Guard, standardize::{standardize, Method, Islands}};
/// let w = Csr::from_rows(vec![vec![(1, 1.0), (2, 3.0)], vec![(0, 2.0)], vec![(0, 2.0)]]);
/// let d = standardize(w.view(), Method::Row, Islands::Raise, &Guard::unlimited()).unwrap();
/// assert_eq!(d, vec![0.25, 0.75, 1.0, 1.0]);
/// ```
pub fn standardize(w: CsrRef<'_>, method: Method, islands: Islands, guard: &Guard) -> Result<Vec<f64>> {
    if islands == Islands::Raise && method.divides_rows() {
        let isl = w.islands();
        if !isl.is_empty() {
            return Err(Error::Islands { units: Units::of(&isl) });
        }
    }
    let data = w.data();
    let need_weight = |what| if w.nnz() > 0 { Ok(()) } else { Err(Error::NoWeight { what }) };
    let out = match method {
        Method::None => data.to_vec(),
        Method::Binary => vec![1.0; data.len()],
        Method::Row => each_row(w, |v, out| {
            let m = pow2_of_max(v);
            let s = v.iter().fold(0.0, |a, &x| a + x / m);
            out.extend(v.iter().map(|&x| x / m / s));
        }),
        Method::MaxEntry => {
            need_weight("max_entry standardization")?;
            let top = data.iter().copied().fold(0.0f64, f64::max);
            data.iter().map(|&v| v / top).collect()
        }
        Method::MaxEigenvalue => {
            need_weight("max_eigenvalue standardization")?;
            // divide in the moderated frame: rho itself could be subnormal or overflow
            let (moderated, _) = moderate(w);
            let w = moderated.as_ref().map_or(w, |m| m.view());
            let data = w.data();
            let rho = spectral_radius(w, guard)?.value;
            if !(rho > 0.0) {
                return Err(Error::NoWeight {
                    what: "max_eigenvalue standardization (the spectral radius is 0: the links form no cycle)",
                });
            }
            data.iter().map(|&v| v / rho).collect()
        }
        Method::Global => {
            need_weight("global standardization")?;
            let m = pow2_of_max(data);
            let total = data.iter().fold(0.0, |a, &x| a + x / m);
            let c = w.n() as f64 / total;
            data.iter().map(|&v| v / m * c).collect()
        }
        Method::VarianceStabilizing => {
            need_weight("variance_stabilizing standardization")?;
            let mut out = each_row(w, |v, out| {
                let m = pow2_of_max(v);
                let q = v.iter().map(|&x| (x / m) * (x / m)).sum::<f64>().sqrt();
                out.extend(v.iter().map(|&x| x / m / q));
            });
            let s: f64 = out.iter().sum();
            let c = w.n() as f64 / s;
            out.iter_mut().for_each(|v| *v *= c);
            out
        }
    };
    check_range(w, &out)?;
    Ok(out)
}

/// Every standardized weight must be a positive finite number.
fn check_range(w: CsrRef<'_>, out: &[f64]) -> Result<()> {
    let Some(e) = out.iter().position(|&v| !(v > 0.0 && v.is_finite())) else { return Ok(()) };
    let row = w.indptr().partition_point(|&p| p as usize <= e) - 1;
    Err(Error::WeightOutOfRange {
        what: "standardized weight",
        link: Link(row, w.indices()[e] as usize),
        value: out[e],
        advice: "the weights span more than floating point can hold; drop the negligible weights or \
                 rescale them before standardizing",
    })
}
