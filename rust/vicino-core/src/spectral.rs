//! The spectral radius (largest eigenvalue in modulus) of a non-negative
//! weights matrix, without any dense eigendecomposition, so it works at
//! n = 10^6.
//!
//! * Constant row sums (row-standardized or binary k-nearest weights): the
//!   row sum is the spectral radius exactly, since W 1 = c 1 with 1 > 0
//!   (Perron-Frobenius). Likewise for constant column sums.
//! * Symmetric W: Lanczos iteration (without reorthogonalization, which
//!   leaves the extreme Ritz value exact) with the Ritz value found by
//!   bisection on the Sturm sequence of the tridiagonal matrix.
//! * Otherwise: power iteration on W + I. The shift keeps the Perron root
//!   strictly dominant in modulus even for periodic (bipartite) graphs;
//!   the Collatz-Wielandt upper bound max_i (Bx)_i / x_i caps the estimate.
//!
//! Each iteration costs one product with W: O(nnz).

use crate::csr::CsrRef;
use crate::error::{Error, Result};
use crate::lag::lag_unchecked;

/// How the spectral radius was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpectralMethod {
    ConstantSums,
    Lanczos,
    ShiftedPower,
}

/// The spectral radius and how it was found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpectralRadius {
    pub value: f64,
    pub iterations: usize,
    pub method: SpectralMethod,
}

const TOL: f64 = 1e-12;
const MAX_LANCZOS: usize = 3000;
const MAX_POWER: usize = 100_000;

fn constant(v: &[f64]) -> Option<f64> {
    let (lo, hi) = v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| (a.min(x), b.max(x)));
    (hi - lo <= 1e-15 * hi.abs()).then_some(hi)
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// The largest eigenvalue of a symmetric tridiagonal matrix with diagonal
/// `a` and off-diagonal `b`, by bisection on Sturm sequence counts.
fn largest_tridiagonal(a: &[f64], b: &[f64]) -> f64 {
    let m = a.len();
    // Gershgorin interval
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for i in 0..m {
        let r = if i > 0 { b[i - 1].abs() } else { 0.0 } + if i + 1 < m { b[i].abs() } else { 0.0 };
        lo = lo.min(a[i] - r);
        hi = hi.max(a[i] + r);
    }
    // number of eigenvalues < x
    let below = |x: f64| {
        let mut count = 0;
        let mut q = 1.0;
        for i in 0..m {
            let off = if i > 0 { b[i - 1] * b[i - 1] } else { 0.0 };
            q = a[i] - x - if i > 0 { off / q } else { 0.0 };
            if q == 0.0 {
                q = f64::EPSILON * (x.abs() + 1.0);
            }
            if q < 0.0 {
                count += 1;
            }
        }
        count
    };
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if below(mid) == m {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    hi
}

fn lanczos(w: CsrRef<'_>) -> Result<SpectralRadius> {
    let n = w.n();
    // start from a positive vector: it is not orthogonal to the Perron vector
    let mut q: Vec<f64> = (0..n).map(|i| 1.0 + ((i * 7919) % 104729) as f64 / 104729.0).collect();
    let norm = dot(&q, &q).sqrt();
    q.iter_mut().for_each(|v| *v /= norm);
    let mut q_prev = vec![0.0; n];
    let (mut alpha, mut beta) = (Vec::new(), Vec::new());
    let mut last = f64::NAN;
    let mut stable = 0;
    for it in 1..=MAX_LANCZOS.min(n + 1) {
        let mut v = lag_unchecked(w, &q);
        let a = dot(&q, &v);
        let b_prev = beta.last().copied().unwrap_or(0.0);
        for i in 0..n {
            v[i] -= a * q[i] + b_prev * q_prev[i];
        }
        alpha.push(a);
        let b = dot(&v, &v).sqrt();
        let theta = largest_tridiagonal(&alpha, &beta);
        if (theta - last).abs() <= TOL * theta.abs().max(f64::MIN_POSITIVE) {
            stable += 1;
        } else {
            stable = 0;
        }
        last = theta;
        // an invariant subspace was found, or the estimate is settled
        if b <= TOL * theta.abs().max(1.0) || stable >= 3 || it == n {
            return Ok(SpectralRadius { value: theta, iterations: it, method: SpectralMethod::Lanczos });
        }
        beta.push(b);
        q_prev = std::mem::replace(&mut q, v);
        q.iter_mut().for_each(|x| *x /= b);
    }
    Err(Error::NotConverged { iterations: MAX_LANCZOS, estimate: last })
}

fn shifted_power(w: CsrRef<'_>) -> Result<SpectralRadius> {
    let n = w.n();
    let mut x = vec![1.0 / (n as f64).sqrt(); n];
    let mut last = f64::NAN;
    let mut stable = 0;
    for it in 1..=MAX_POWER {
        let mut y = lag_unchecked(w, &x);
        for i in 0..n {
            y[i] += x[i];
        }
        let norm = dot(&y, &y).sqrt();
        let upper = y.iter().zip(&x).filter(|(_, &xi)| xi > 0.0).map(|(yi, xi)| yi / xi).fold(0.0f64, f64::max);
        let est = norm.min(upper) - 1.0;
        if (est - last).abs() <= TOL * est.abs().max(f64::MIN_POSITIVE) {
            stable += 1;
        } else {
            stable = 0;
        }
        last = est;
        if stable >= 5 {
            return Ok(SpectralRadius { value: est, iterations: it, method: SpectralMethod::ShiftedPower });
        }
        y.iter_mut().for_each(|v| *v /= norm);
        x = y;
    }
    Err(Error::NotConverged { iterations: MAX_POWER, estimate: last })
}

/// The spectral radius of a non-negative weights matrix.
///
/// ```
/// use vicino_core::{Csr, spectral::spectral_radius};
/// // path 0 - 1 - 2: eigenvalues of the adjacency matrix are 0 and +-sqrt(2)
/// let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0)]]);
/// let r = spectral_radius(w.view()).unwrap();
/// assert!((r.value - 2f64.sqrt()).abs() < 1e-12);
/// ```
pub fn spectral_radius(w: CsrRef<'_>) -> Result<SpectralRadius> {
    if w.nnz() == 0 || w.data().iter().all(|&v| v == 0.0) {
        return Err(Error::NoWeight { what: "the largest eigenvalue" });
    }
    for sums in [w.row_sums(), w.col_sums()] {
        if let Some(c) = constant(&sums) {
            return Ok(SpectralRadius { value: c, iterations: 0, method: SpectralMethod::ConstantSums });
        }
    }
    if w.is_symmetric() {
        lanczos(w)
    } else {
        shifted_power(w)
    }
}
