//! The extreme eigenvalues of a large sparse symmetric matrix by thick-restart
//! Lanczos (Wu and Simon 2000) with full reorthogonalization.
//!
//! A basis of at most `BASIS` vectors is built by Lanczos steps, each
//! orthogonalized against the whole basis (classical Gram-Schmidt twice), so
//! no spurious copies of converged eigenvalues appear. The projected matrix
//! T = V^T A V is diagonalized (Jacobi); a Ritz pair (theta, V s) has the
//! residual norm ||A V s - theta V s|| = beta |s_m|, and for a symmetric
//! matrix some eigenvalue lies within that residual of theta (Parlett 1998,
//! theorem 4.5.1); the run stops when the residual of each wanted end is
//! below `tol` times the largest Ritz value in modulus. Otherwise the basis
//! is cut to the `BASIS / 2` Ritz vectors nearest the wanted ends plus the
//! residual direction, and the steps resume from there. Each step costs one
//! product with A, O(nnz), and O(n BASIS) for the orthogonalization; memory
//! is (BASIS + 1) n numbers.

use super::basis::{combine, dots, norm, orthogonalize, start_vector};
use super::dense::jacobi;
use crate::csr::CsrRef;
use crate::error::{Error, Result};
use crate::guard::Guard;
use crate::lag::lag_unchecked;

/// Largest basis kept by the Krylov methods.
pub const BASIS: usize = 40;
/// Products with the matrix before giving up.
pub const MAX_PRODUCTS: usize = 40_000;

/// The extreme eigenvalues of a symmetric matrix with their error bounds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Extremes {
    pub min: f64,
    pub min_error: f64,
    pub max: f64,
    pub max_error: f64,
    /// Products with the matrix.
    pub products: usize,
}

/// The Rayleigh quotient of `y` and the norm of its residual (plus a few
/// rounding units of `scale`): for a symmetric `a` some eigenvalue lies
/// within that distance of the quotient.
pub fn checked_pair(a: CsrRef<'_>, y: &[f64], scale: f64) -> (f64, f64) {
    let ay = lag_unchecked(a, y, 1);
    let yy = dots(std::slice::from_ref(&y.to_vec()), y)[0];
    let theta = dots(std::slice::from_ref(&y.to_vec()), &ay)[0] / yy;
    let r: Vec<f64> = ay.iter().zip(y).map(|(u, v)| u - theta * v).collect();
    (theta, norm(&r) / yy.sqrt() + 16.0 * f64::EPSILON * scale)
}

/// The smallest eigenvalue of the symmetric `a`, and the largest too when
/// `want_max` (otherwise `max` is the largest Ritz value, without a bound:
/// `max_error` is infinite).
pub fn extremes(a: CsrRef<'_>, want_max: bool, tol: f64, guard: &Guard) -> Result<Extremes> {
    let n = a.n();
    let m = n.min(BASIS);
    guard.reserve(
        ((m + 3) * n * 8) as f64,
        "the Lanczos basis for the extreme eigenvalues",
        "the basis holds 40 vectors of the units' length",
    )?;
    let mut vs: Vec<Vec<f64>> = vec![start_vector(n)];
    let mut t = vec![0.0; m * m];
    let (mut k, mut products) = (0, 0);
    loop {
        let mut size = m;
        let mut beta = 0.0;
        for j in k..m {
            guard.check()?;
            let mut w = lag_unchecked(a, &vs[j], 1);
            products += 1;
            let h = orthogonalize(&vs[..=j], &mut w);
            for (i, &hi) in h.iter().enumerate() {
                t[i * m + j] = hi;
                t[j * m + i] = hi;
            }
            beta = norm(&w);
            let scale = h.iter().fold(0.0f64, |s, x| s.max(x.abs())).max(beta);
            if beta <= 64.0 * f64::EPSILON * scale || j + 1 == n {
                // an invariant subspace: its Ritz values are eigenvalues
                size = j + 1;
                beta = 0.0;
                break;
            }
            w.iter_mut().for_each(|x| *x /= beta);
            if j + 1 < m {
                t[(j + 1) * m + j] = beta;
                t[j * m + j + 1] = beta;
            }
            vs.push(w);
        }
        let mut sub: Vec<f64> = (0..size).flat_map(|i| t[i * m..i * m + size].to_vec()).collect();
        let (theta, s) = jacobi(&mut sub, size);
        let residual: Vec<f64> = (0..size).map(|i| beta * s[(size - 1) * size + i].abs()).collect();
        let mut order: Vec<usize> = (0..size).collect();
        order.sort_by(|&x, &y| theta[x].total_cmp(&theta[y]));
        let (lo, hi) = (order[0], order[size - 1]);
        let scale = theta[lo].abs().max(theta[hi].abs());
        let done = residual[lo] <= tol * scale && (!want_max || residual[hi] <= tol * scale);
        if done || size < m {
            // the Rayleigh quotient and residual of each Ritz vector, formed
            // explicitly: the bound then holds whatever rounding the restarts left
            let mut end = |c: usize| {
                products += 1;
                checked_pair(a, &combine(&vs[..size], &s, size, &[c])[0], scale)
            };
            let (min, min_error) = end(lo);
            let (max, max_error) = if want_max { end(hi) } else { (theta[hi], f64::INFINITY) };
            return Ok(Extremes { min, min_error, max, max_error, products });
        }
        if products >= MAX_PRODUCTS {
            let (what, value, error) = if residual[lo] > tol * scale {
                ("the smallest eigenvalue", theta[lo], residual[lo])
            } else {
                ("the largest eigenvalue", theta[hi], residual[hi])
            };
            return Err(Error::EigenNotConverged { what, products, value, error, wanted: tol * scale });
        }
        // thick restart: keep the Ritz vectors nearest the wanted ends
        let keep = m / 2;
        let kept: Vec<usize> = if want_max {
            order[..keep / 2].iter().chain(&order[size - (keep - keep / 2)..]).copied().collect()
        } else {
            order[..keep].to_vec()
        };
        let last = vs.pop().expect("the residual direction");
        let mut next = combine(&vs, &s, size, &kept);
        next.push(last);
        vs = next;
        t.iter_mut().for_each(|x| *x = 0.0);
        for (i, &c) in kept.iter().enumerate() {
            t[i * m + i] = theta[c];
            let coupling = beta * s[(size - 1) * size + c];
            t[i * m + keep] = coupling;
            t[keep * m + i] = coupling;
        }
        k = keep;
    }
}
