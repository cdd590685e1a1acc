//! The smallest real eigenvalue of a large sparse non-symmetric matrix by
//! implicitly restarted Arnoldi (Sorensen 1992; Lehoucq and Sorensen 1996),
//! the method behind ARPACK.
//!
//! An Arnoldi basis of `BASIS` vectors (classical Gram-Schmidt twice) gives
//! A V = V H + f e^T with H upper Hessenberg. The Ritz values (eigenvalues
//! of H, by Francis QR) are sorted by real part; the wanted ones are the
//! leftmost up to and including the first real one (at least four). The
//! others are applied as exact shifts by implicit double-shift QR steps on
//! H (Golub and Van Loan 2013, Algorithm 7.5.1), which filters them out of
//! the basis, and the factorization is extended again. A Ritz pair
//! (theta, V s) has residual ||A V s - theta V s|| = ||f|| |s_m| (s from
//! inverse iteration on H): theta is an exact eigenvalue of a matrix within
//! that distance of A. The run stops when the first real Ritz value and
//! every Ritz value to its left have residuals below `tol` times the largest
//! Ritz value in modulus: the eigenvalues left of the smallest real one are
//! complex, so the first real one among the leftmost is the smallest real
//! eigenvalue. Each step costs one product with A, O(nnz), plus O(n BASIS)
//! for the orthogonalization and O(n BASIS^2) per restart; memory is
//! (BASIS + 1) n numbers.

use super::basis::{combine, norm, orthogonalize, start_vector};
use super::dense::hessenberg_eigenvalues;
use super::lanczos::BASIS;
use crate::csr::CsrRef;
use crate::error::{Error, Result};
use crate::guard::Guard;
use crate::lag::lag_unchecked;

/// The smallest (or, with `largest`, the largest) real eigenvalue found,
/// with its residual bound.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RealEnd {
    pub value: f64,
    pub error: f64,
    pub products: usize,
}

/// A Householder reflection that maps `x` (length 2 or 3) to a multiple of
/// e1: returns v and 2 / v^T v (0 when x = 0).
fn house(x: &[f64]) -> ([f64; 3], f64) {
    let nx = x.iter().map(|a| a * a).sum::<f64>().sqrt();
    let mut v = [0.0; 3];
    v[..x.len()].copy_from_slice(x);
    if nx == 0.0 {
        return (v, 0.0);
    }
    v[0] += if x[0] >= 0.0 { nx } else { -nx };
    let vv: f64 = v.iter().map(|a| a * a).sum();
    (v, 2.0 / vv)
}

/// Apply the reflection (v, tau) to the `r` numbers of `h` at `idx`.
fn reflect(h: &mut [f64], idx: [usize; 3], r: usize, v: &[f64; 3], tau: f64) {
    let d: f64 = (0..r).map(|i| v[i] * h[idx[i]]).sum::<f64>() * tau;
    for i in 0..r {
        h[idx[i]] -= d * v[i];
    }
}

/// One implicit double-shift QR step on the upper Hessenberg `h` (m x m,
/// m >= 3) with shifts of sum `s` and product `t`, accumulated into `q`.
fn double_shift(h: &mut [f64], q: &mut [f64], m: usize, s: f64, t: f64) {
    let at = |i: usize, j: usize| i * m + j;
    let mut x = h[at(0, 0)] * h[at(0, 0)] + h[at(0, 1)] * h[at(1, 0)] - s * h[at(0, 0)] + t;
    let mut y = h[at(1, 0)] * (h[at(0, 0)] + h[at(1, 1)] - s);
    let mut z = h[at(1, 0)] * h[at(2, 1)];
    for k in 0..m - 1 {
        let r = if k + 2 < m { 3 } else { 2 };
        let (v, tau) = house(&[x, y, z][..r]);
        let near = |c: usize| [c, c + 1, c + 2.min(r - 1)];
        if tau != 0.0 {
            for j in k.saturating_sub(1)..m {
                reflect(h, [at(k, j), at(k + 1, j), at(k + r - 1, j)], r, &v, tau);
            }
            for i in 0..(k + 4).min(m) {
                reflect(h, near(at(i, k)), r, &v, tau);
            }
            for i in 0..m {
                reflect(q, near(at(i, k)), r, &v, tau);
            }
        }
        if k > 0 {
            // the bulge below the subdiagonal is gone (up to rounding)
            h[at(k + 1, k - 1)] = 0.0;
            if r == 3 {
                h[at(k + 2, k - 1)] = 0.0;
            }
        }
        if k + 2 < m {
            x = h[at(k + 1, k)];
            y = h[at(k + 2, k)];
            z = if k + 3 < m { h[at(k + 3, k)] } else { 0.0 };
        }
    }
}

/// Solve the dense system `a x = b` (n x n row-major, overwritten) by
/// Gaussian elimination with partial pivoting; tiny pivots are raised to
/// `floor` (enough for inverse iteration).
fn solve(a: &mut [f64], b: &mut [f64], n: usize, floor: f64) {
    for c in 0..n {
        let p = (c..n).max_by(|&i, &j| a[i * n + c].abs().total_cmp(&a[j * n + c].abs())).unwrap_or(c);
        if p != c {
            for j in 0..n {
                a.swap(c * n + j, p * n + j);
            }
            b.swap(c, p);
        }
        if a[c * n + c].abs() < floor {
            a[c * n + c] = if a[c * n + c] < 0.0 { -floor } else { floor };
        }
        for i in c + 1..n {
            let f = a[i * n + c] / a[c * n + c];
            if f != 0.0 {
                for j in c..n {
                    a[i * n + j] -= f * a[c * n + j];
                }
                b[i] -= f * b[c];
            }
        }
    }
    for c in (0..n).rev() {
        let s: f64 = (c + 1..n).map(|j| a[c * n + j] * b[j]).sum();
        b[c] = (b[c] - s) / a[c * n + c];
    }
}

/// |last component| of the unit eigenvector of `h` (m x m) for the Ritz
/// value re + i im, by two steps of inverse iteration on the real form
/// [[H - re I, im I], [-im I, H - re I]] of H - theta I.
fn last_component(h: &[f64], m: usize, re: f64, im: f64, scale: f64) -> f64 {
    let n2 = 2 * m;
    let mut x = vec![1.0; n2];
    x[m..].iter_mut().for_each(|v| *v = 0.0);
    for _ in 0..2 {
        let mut a = vec![0.0; n2 * n2];
        for i in 0..m {
            for j in 0..m {
                a[i * n2 + j] = h[i * m + j];
                a[(i + m) * n2 + j + m] = h[i * m + j];
            }
            a[i * n2 + i] -= re;
            a[(i + m) * n2 + i + m] -= re;
            a[i * n2 + i + m] = im;
            a[(i + m) * n2 + i] = -im;
        }
        solve(&mut a, &mut x, n2, f64::EPSILON * scale);
        let s = x.iter().map(|v| v * v).sum::<f64>().sqrt();
        x.iter_mut().for_each(|v| *v /= s);
    }
    (x[m - 1] * x[m - 1] + x[n2 - 1] * x[n2 - 1]).sqrt()
}

/// The unit eigenvector of `h` (m x m) for the real Ritz value `theta`, by
/// two steps of inverse iteration.
fn real_eigenvector(h: &[f64], m: usize, theta: f64, scale: f64) -> Vec<f64> {
    let mut x = vec![1.0; m];
    for _ in 0..2 {
        let mut a = h.to_vec();
        for i in 0..m {
            a[i * m + i] -= theta;
        }
        solve(&mut a, &mut x, m, f64::EPSILON * scale);
        let s = x.iter().map(|v| v * v).sum::<f64>().sqrt();
        x.iter_mut().for_each(|v| *v /= s);
    }
    x
}

/// The smallest real eigenvalue of `a`, or with `largest` the largest (the
/// method applied to -A), in at most about `max_products` products.
pub fn real_end(a: CsrRef<'_>, largest: bool, tol: f64, max_products: usize, guard: &Guard) -> Result<RealEnd> {
    let n = a.n();
    let m = n.min(BASIS);
    guard.reserve(
        ((m + 3) * n * 8) as f64,
        "the Arnoldi basis for the extreme eigenvalues",
        "the basis holds 40 vectors of the units' length",
    )?;
    let sign = if largest { -1.0 } else { 1.0 };
    let product = |x: &[f64]| {
        let mut y = lag_unchecked(a, x, 1);
        if largest {
            y.iter_mut().for_each(|v| *v = -*v);
        }
        y
    };
    let mut vs: Vec<Vec<f64>> = vec![start_vector(n)];
    let mut h = vec![0.0; m * m];
    let (mut k, mut products) = (0usize, 0usize);
    loop {
        let mut size = m;
        let mut beta = 0.0;
        for j in k..m {
            guard.check()?;
            let mut w = product(&vs[j]);
            products += 1;
            let c = orthogonalize(&vs[..=j], &mut w);
            for (i, &ci) in c.iter().enumerate() {
                h[i * m + j] = ci;
            }
            beta = norm(&w);
            let scale = c.iter().fold(0.0f64, |s, x| s.max(x.abs())).max(beta);
            if beta <= 64.0 * f64::EPSILON * scale || j + 1 == n {
                size = j + 1;
                beta = 0.0;
                break;
            }
            w.iter_mut().for_each(|x| *x /= beta);
            if j + 1 < m {
                h[(j + 1) * m + j] = beta;
            }
            vs.push(w);
        }
        let sub: Vec<f64> = (0..size).flat_map(|i| h[i * m..i * m + size].to_vec()).collect();
        let mut ritz = hessenberg_eigenvalues(&mut sub.clone(), size).ok_or(Error::EigenNotConverged {
            what: "the eigenvalues of the projected Arnoldi matrix",
            products,
            value: f64::NAN,
            error: f64::NAN,
            wanted: tol,
        })?;
        ritz.sort_by(|x, y| x.0.total_cmp(&y.0).then(x.1.total_cmp(&y.1)));
        let scale = ritz.iter().fold(0.0f64, |s, &(re, im)| s.max(re.hypot(im)));
        let is_real = |im: f64| im.abs() <= 1e-8 * scale;
        let first_real = ritz.iter().position(|&(_, im)| is_real(im));
        let residual = |re: f64, im: f64| beta * last_component(&sub, size, re, im, scale.max(f64::MIN_POSITIVE));
        if let Some(j) = first_real.filter(|&j| j < m / 2 || size < m) {
            let res: Vec<f64> = ritz[..=j].iter().map(|&(re, im)| residual(re, im)).collect();
            if size < m || res.iter().all(|&r| r <= tol * scale) {
                // the residual of the Ritz vector formed explicitly: a backward error bound
                let s = real_eigenvector(&sub, size, ritz[j].0, scale.max(f64::MIN_POSITIVE));
                let y = combine(&vs[..size], &s, 1, &[0]).remove(0);
                let ay = lag_unchecked(a, &y, 1);
                let r: Vec<f64> = ay.iter().zip(&y).map(|(u, v)| sign * u - ritz[j].0 * v).collect();
                let error = norm(&r) / norm(&y) + 16.0 * f64::EPSILON * scale;
                return Ok(RealEnd { value: sign * ritz[j].0, error, products: products + 1 });
            }
        }
        if first_real.is_none_or(|j| j >= m / 2) {
            // the leftmost half are all complex: once they have converged the
            // smallest real eigenvalue is known to lie inside the spectrum
            // (a basis that closed early holds fewer Ritz values)
            let half = &ritz[..(m / 2).min(ritz.len())];
            if size < m || half.iter().all(|&(re, im)| residual(re, im) <= tol * scale) {
                let (re, im) = half[0];
                return Err(Error::NoRealEigenvalue {
                    count: half.len(),
                    re: sign * re,
                    im: im.abs(),
                    largest,
                    products,
                });
            }
        }
        if products >= max_products || size < m {
            let (value, error) = match first_real {
                Some(j) => (sign * ritz[j].0, residual(ritz[j].0, ritz[j].1)),
                None => (f64::NAN, f64::NAN),
            };
            let what = match (first_real.is_some(), largest) {
                (true, false) => "the smallest real eigenvalue",
                (true, true) => "the largest real eigenvalue",
                (false, false) => "the smallest real eigenvalue (the leftmost Ritz values are all complex)",
                (false, true) => "the largest real eigenvalue (the rightmost Ritz values are all complex)",
            };
            return Err(Error::EigenNotConverged { what, products, value, error, wanted: tol * scale });
        }
        // wanted: the leftmost up to the first real one, at least 4, whole conjugate pairs
        let mut want = first_real.map_or(m / 2, |j| (j + 1).max(4)).min(m / 2);
        while want < m && !is_real(ritz[want - 1].1) && ritz[want].0 == ritz[want - 1].0 {
            want += 1;
        }
        // shifts: the others, in pairs (conjugates together, reals two by two)
        let mut rest: Vec<(f64, f64)> = ritz[want..].to_vec();
        let mut pairs = Vec::new();
        let mut pending: Option<f64> = None;
        while let Some((re, im)) = rest.pop() {
            if !is_real(im) {
                rest.pop(); // its conjugate, next in the order
                pairs.push((2.0 * re, re * re + im * im));
            } else if let Some(other) = pending.take() {
                pairs.push((re + other, re * other));
            } else {
                pending = Some(re);
            }
        }
        let shifts = 2 * pairs.len();
        let mut q = vec![0.0; m * m];
        for i in 0..m {
            q[i * m + i] = 1.0;
        }
        for &(s, t) in &pairs {
            double_shift(&mut h, &mut q, m, s, t);
        }
        k = m - shifts;
        let f: Vec<f64> = vs.pop().expect("the residual direction").into_iter().map(|x| x * beta).collect();
        let cols: Vec<usize> = (0..=k).collect();
        let mut next = combine(&vs, &q, m, &cols);
        let hat = next.pop().expect("column k");
        let (b_hat, sigma) = (h[k * m + k - 1], q[(m - 1) * m + k - 1]);
        let mut fk: Vec<f64> = hat.iter().zip(&f).map(|(v, r)| v * b_hat + r * sigma).collect();
        let bk = norm(&fk);
        // a new Hessenberg matrix: the leading k x k block
        for i in 0..m {
            for j in 0..m {
                if i >= k || j >= k {
                    h[i * m + j] = 0.0;
                }
            }
        }
        if bk <= 64.0 * f64::EPSILON * scale {
            // the kept basis is invariant: continue from a fresh direction
            fk = start_vector(n).iter().enumerate().map(|(i, x)| x * (1.0 + (i % 7) as f64)).collect();
            orthogonalize(&next, &mut fk);
            let b = norm(&fk);
            fk.iter_mut().for_each(|x| *x /= b);
        } else {
            fk.iter_mut().for_each(|x| *x /= bk);
            h[k * m + k - 1] = bk;
        }
        next.push(fk);
        vs = next;
    }
}
