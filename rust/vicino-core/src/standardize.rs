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
//! Units without neighbours (islands) are refused unless asked to keep them;
//! their rows stay empty (zero). O(nnz), plus the eigenvalue iteration for
//! `max_eigenvalue`.

use crate::csr::CsrRef;
use crate::error::{Error, Result, FIRST_FEW};
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

/// What to do with units that have no neighbours.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Islands {
    Raise,
    Keep,
}

/// Standardize `w`; returns the new data, aligned with `w.data()`.
///
/// ```
/// use vicino_core::{Csr, standardize::{standardize, Method, Islands}};
/// let w = Csr::from_rows(vec![vec![(1, 1.0), (2, 3.0)], vec![(0, 2.0)], vec![(0, 2.0)]]);
/// let d = standardize(w.view(), Method::Row, Islands::Raise).unwrap();
/// assert_eq!(d, vec![0.25, 0.75, 1.0, 1.0]);
/// ```
pub fn standardize(w: CsrRef<'_>, method: Method, islands: Islands) -> Result<Vec<f64>> {
    if islands == Islands::Raise {
        let isl = w.islands();
        if !isl.is_empty() {
            return Err(Error::Islands { count: isl.len(), first: isl.into_iter().take(FIRST_FEW).collect() });
        }
    }
    let data = w.data();
    let total: f64 = data.iter().sum();
    let need_weight = |what| if total > 0.0 { Ok(()) } else { Err(Error::NoWeight { what }) };
    let scale = |c: f64| data.iter().map(|&v| v * c).collect::<Vec<f64>>();
    Ok(match method {
        Method::None => data.to_vec(),
        Method::Binary => vec![1.0; data.len()],
        Method::Row => {
            let mut out = Vec::with_capacity(data.len());
            for i in 0..w.n() {
                let (_, v) = w.row(i);
                let s: f64 = v.iter().sum();
                out.extend(v.iter().map(|&x| if s > 0.0 { x / s } else { 0.0 }));
            }
            out
        }
        Method::MaxEntry => {
            need_weight("max_entry standardization")?;
            let m = data.iter().copied().fold(0.0f64, f64::max);
            scale(1.0 / m)
        }
        Method::MaxEigenvalue => {
            need_weight("max_eigenvalue standardization")?;
            let rho = spectral_radius(w)?.value;
            if !(rho > 0.0) {
                return Err(Error::NoWeight {
                    what: "max_eigenvalue standardization (the spectral radius is 0: the links form no cycle)",
                });
            }
            data.iter().map(|&v| v / rho).collect()
        }
        Method::Global => {
            need_weight("global standardization")?;
            scale(w.n() as f64 / total)
        }
        Method::VarianceStabilizing => {
            need_weight("variance_stabilizing standardization")?;
            let mut out = Vec::with_capacity(data.len());
            for i in 0..w.n() {
                let (_, v) = w.row(i);
                let q = v.iter().map(|x| x * x).sum::<f64>().sqrt();
                out.extend(v.iter().map(|&x| if q > 0.0 { x / q } else { 0.0 }));
            }
            let s: f64 = out.iter().sum();
            let c = w.n() as f64 / s;
            out.iter_mut().for_each(|v| *v *= c);
            out
        }
    })
}
