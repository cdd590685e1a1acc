//! The extreme eigenvalues of a large sparse symmetric matrix by Lanczos
//! iteration: plain Lanczos first, thick-restart Lanczos (Wu and Simon 2000)
//! with full reorthogonalization when that does not check out.
//!
//! Plain Lanczos ([`plain`]) runs the three-term recurrence without
//! reorthogonalization: one product and O(n) work per step, five vectors of
//! memory, and no restarts, so the extreme Ritz values converge at the rate
//! of the whole Krylov space (lost orthogonality only adds copies of
//! converged values: Paige 1980, Greenbaum 1989). The tridiagonal T_j is
//! solved every few steps (Sturm bisection; the last component of a Ritz
//! vector by inverse iteration on T_j); when the residual beta_j |s_j| of
//! each wanted end is below `tol` times the largest Ritz value in modulus
//! the recurrence runs a second time, repeating the first bit for bit, to
//! form the Ritz vectors, whose Rayleigh quotients and residuals are then
//! computed explicitly: for a symmetric matrix some eigenvalue lies within
//! that residual of the quotient (Parlett 1998, theorem 4.5.1). So the run
//! costs about twice the products of the first pass.
//!
//! Thick restart ([`thick`]): a basis of at most `BASIS` vectors is built by
//! Lanczos steps, each orthogonalized against the whole basis (classical
//! Gram-Schmidt twice). The projected matrix T = V^T A V is diagonalized
//! (Jacobi); a Ritz pair (theta, V s) has the residual norm beta |s_m|; the
//! run stops when the residual of each wanted end is below `tol` times the
//! largest Ritz value in modulus. Otherwise the basis is cut to the
//! `BASIS / 2` Ritz vectors nearest the wanted ends plus the residual
//! direction, and the steps resume from there. Each step costs one product
//! with A, O(nnz), and O(n BASIS) for the orthogonalization; memory is
//! (BASIS + 1) n numbers.

use super::basis::{axpy, combine, dots, norm, orthogonalize, start_vector, three_term};
use super::dense::{jacobi, tridiagonal_extreme};
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
    /// Whether the thick restart was needed (plain Lanczos did not check out).
    pub restarted: bool,
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
/// `max_error` is infinite): plain Lanczos first ([`plain`]), and the
/// thick restart when its Ritz vector does not check out.
pub fn extremes(a: CsrRef<'_>, want_max: bool, tol: f64, guard: &Guard) -> Result<Extremes> {
    let (first, spent) = plain(a, want_max, tol, guard)?;
    if let Some(e) = first {
        return Ok(e);
    }
    let r = thick(a, want_max, tol, guard)?;
    Ok(Extremes { products: r.products + spent, restarted: true, ..r })
}

/// The three-term Lanczos recurrence without reorthogonalization: the
/// current vector `q`, the previous `p` and the last coupling.
struct Recurrence {
    q: Vec<f64>,
    p: Vec<f64>,
    beta: f64,
}

impl Recurrence {
    fn new(n: usize) -> Self {
        Recurrence { q: start_vector(n), p: vec![0.0; n], beta: 0.0 }
    }

    /// One step: (alpha_j, beta_j); `q` becomes the next vector unless
    /// beta_j is 0. The same operations in the same order every time, so a
    /// second run repeats the first bit for bit.
    fn step(&mut self, a: CsrRef<'_>) -> (f64, f64) {
        let mut w = lag_unchecked(a, &self.q, 1);
        let alpha = dots(std::slice::from_ref(&self.q), &w)[0];
        let b = three_term(&mut w, &self.q, &self.p, alpha, self.beta);
        if b > 0.0 {
            let inv = 1.0 / b;
            scale_in_place(&mut w, inv);
            self.p = std::mem::replace(&mut self.q, w);
        }
        self.beta = b;
        (alpha, b)
    }
}

fn scale_in_place(w: &mut [f64], c: f64) {
    use rayon::prelude::*;
    w.par_iter_mut().with_min_len(1 << 15).for_each(|x| *x *= c);
}

/// The unit eigenvector of the tridiagonal T (diagonal `a`, off-diagonal
/// `b`) for its extreme eigenvalue `theta` (the smallest, or with `largest`
/// the largest), by three steps of inverse iteration with a shift just
/// outside the spectrum: +-(T - sigma I) is then positive definite and its
/// LDL^T factorization needs no pivoting (Golub and Van Loan 2013, 4.1).
fn tridiagonal_vector(a: &[f64], b: &[f64], theta: f64, largest: bool, scale: f64) -> Vec<f64> {
    let m = a.len();
    let s = if largest { -1.0 } else { 1.0 };
    let sigma = theta - s * 1e-12 * scale.max(f64::MIN_POSITIVE);
    let tiny = f64::MIN_POSITIVE.sqrt();
    let mut d = vec![0.0; m];
    let mut l = vec![0.0; m];
    for i in 0..m {
        let diag = s * (a[i] - sigma);
        d[i] = if i == 0 { diag } else { diag - b[i - 1] * b[i - 1] / d[i - 1] };
        d[i] = d[i].max(tiny);
        if i + 1 < m {
            l[i] = s * b[i] / d[i];
        }
    }
    let mut x = vec![1.0; m];
    for _ in 0..3 {
        for i in 1..m {
            x[i] -= l[i - 1] * x[i - 1];
        }
        for i in 0..m {
            x[i] /= d[i];
        }
        for i in (0..m - 1).rev() {
            x[i] -= l[i] * x[i + 1];
        }
        let nx = x.iter().map(|v| v * v).sum::<f64>().sqrt();
        x.iter_mut().for_each(|v| *v /= nx);
    }
    x
}

/// Plain Lanczos (Lanczos 1950; Paige 1980): the three-term recurrence
/// without reorthogonalization, O(n) work and memory per step beside the
/// product, run until the Ritz residual of each wanted end of the
/// tridiagonal T_j is below `tol` times its largest Ritz value in modulus.
/// Lost orthogonality only adds copies of converged Ritz values, and the
/// extreme ones converge as in exact arithmetic (Greenbaum 1989). The Ritz
/// vectors are then formed by running the recurrence again (it repeats bit
/// for bit) and checked explicitly; `None` (with the products spent) when
/// a check fails or the steps run out, so that the thick restart can try.
fn plain(a: CsrRef<'_>, want_max: bool, tol: f64, guard: &Guard) -> Result<(Option<Extremes>, usize)> {
    let n = a.n();
    guard.reserve(
        (6 * n * 8) as f64,
        "the Lanczos vectors for the extreme eigenvalues",
        "plain Lanczos keeps six vectors of the units' length",
    )?;
    let mut r = Recurrence::new(n);
    let (mut alpha, mut beta) = (Vec::new(), Vec::new());
    let mut next_check = 8;
    let mut products = 0;
    let (lo, hi, scale) = loop {
        guard.check()?;
        let (aj, bj) = r.step(a);
        products += 1;
        alpha.push(aj);
        let j = alpha.len();
        if j >= next_check || bj == 0.0 || products >= MAX_PRODUCTS {
            let lo = tridiagonal_extreme(&alpha, &beta, false);
            let hi = tridiagonal_extreme(&alpha, &beta, true);
            let scale = lo.abs().max(hi.abs());
            let invariant = bj <= 64.0 * f64::EPSILON * scale;
            let res = |theta: f64, largest: bool| {
                bj * tridiagonal_vector(&alpha, &beta, theta, largest, scale).last().map_or(0.0, |v| v.abs())
            };
            if invariant || (res(lo, false) <= tol * scale && (!want_max || res(hi, true) <= tol * scale)) {
                break (lo, hi, scale);
            }
            if products >= MAX_PRODUCTS {
                return Ok((None, products));
            }
            next_check = j + (j / 16).max(4);
        }
        beta.push(bj);
    };
    // the second run: the Ritz vectors from the same Lanczos vectors
    let m = alpha.len();
    let sb = &beta[..m - 1];
    let s_lo = tridiagonal_vector(&alpha, sb, lo, false, scale);
    let s_hi = want_max.then(|| tridiagonal_vector(&alpha, sb, hi, true, scale));
    let mut r = Recurrence::new(n);
    let mut y_lo = vec![0.0; n];
    let mut y_hi = if want_max { vec![0.0; n] } else { Vec::new() };
    for j in 0..m {
        if j % 16 == 0 {
            guard.check()?;
        }
        axpy(&mut y_lo, s_lo[j], &r.q);
        if let Some(s) = &s_hi {
            axpy(&mut y_hi, s[j], &r.q);
        }
        if j + 1 < m {
            r.step(a);
            products += 1;
        }
    }
    let (min, min_error) = checked_pair(a, &y_lo, scale);
    products += 1;
    let (max, max_error) = if want_max {
        products += 1;
        checked_pair(a, &y_hi, scale)
    } else {
        (hi, f64::INFINITY)
    };
    // lost orthogonality can spoil a Ritz vector; the explicit residual tells
    let bad = |e: f64| !(e <= 100.0 * tol * scale);
    if bad(min_error) || (want_max && bad(max_error)) {
        return Ok((None, products));
    }
    Ok((Some(Extremes { min, min_error, max, max_error, products, restarted: false }), products))
}

/// Thick-restart Lanczos with full reorthogonalization.
fn thick(a: CsrRef<'_>, want_max: bool, tol: f64, guard: &Guard) -> Result<Extremes> {
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
            return Ok(Extremes { min, min_error, max, max_error, products, restarted: true });
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Csr;

    /// A weighted path: w_{i,i+1} = 1 + (i mod 3) / 2, symmetric.
    fn weighted_path(n: usize) -> Csr {
        let w = |i: usize| 1.0 + (i % 3) as f64 / 2.0;
        Csr::from_rows(
            (0..n)
                .map(|i| {
                    let mut r = Vec::new();
                    if i > 0 {
                        r.push((i - 1, w(i - 1)));
                    }
                    if i + 1 < n {
                        r.push((i + 1, w(i)));
                    }
                    r
                })
                .collect(),
        )
    }

    #[test]
    fn plain_lanczos_matches_the_path_formula() {
        // from memory: the path of n units has eigenvalues 2 cos(pi k / (n + 1)), k = 1..n
        let n: usize = 3000;
        let path = Csr::from_rows(
            (0..n)
                .map(|i| {
                    [i.checked_sub(1), (i + 1 < n).then_some(i + 1)].into_iter().flatten().map(|j| (j, 1.0)).collect()
                })
                .collect(),
        );
        let want = 2.0 * (std::f64::consts::PI / (n + 1) as f64).cos();
        let (r, _) = plain(path.view(), true, 1e-10, &Guard::unlimited()).unwrap();
        let r = r.expect("plain Lanczos checks out on a path");
        assert!((r.max - want).abs() <= r.max_error && r.max_error <= 1e-8, "{r:?}");
        assert!((r.min + want).abs() <= r.min_error && r.min_error <= 1e-8, "{r:?}");
    }

    #[test]
    fn plain_and_thick_restart_agree() {
        // two different Krylov methods on the same matrix: the same ends within their bounds
        let w = weighted_path(2500);
        let g = Guard::unlimited();
        let p = extremes(w.view(), true, 1e-10, &g).unwrap();
        let t = thick(w.view(), true, 1e-10, &g).unwrap();
        assert!(!p.restarted);
        assert!((p.min - t.min).abs() <= p.min_error + t.min_error, "{p:?} {t:?}");
        assert!((p.max - t.max).abs() <= p.max_error + t.max_error, "{p:?} {t:?}");
    }
}
