//! The spectral radius (largest eigenvalue in modulus) of a non-negative
//! weights matrix, without any dense eigendecomposition, so it works at
//! n = 10^6. Each iteration costs one product with W: O(nnz).
//!
//! * Constant row sums (row-standardized or binary k-nearest weights): the
//!   row sum is the spectral radius exactly, since W 1 = c 1 with 1 > 0
//!   (Perron-Frobenius). Likewise for constant column sums.
//! * Symmetric W, or W similar to a symmetric matrix through a diagonal
//!   scaling (w_ij / w_ji = f_i / f_j: row-standardized or
//!   variance-stabilized symmetric weights, for example), in which case
//!   M_ij = sqrt(w_ij w_ji) has the same eigenvalues: Lanczos iteration on
//!   the symmetric matrix, stopped when the Ritz residual |beta_k s_k| is
//!   below 1e-11 of the estimate, or when the estimate has not moved by
//!   1e-14 (relative) for 20 iterations. Without reorthogonalization the
//!   extreme Ritz value stays accurate (Paige 1980).
//! * Otherwise: the strongly connected components (Tarjan 1972) are treated
//!   one by one; on each (irreducible) block, power iteration on W + I with
//!   the Collatz-Wielandt bounds min_i (Bx)_i / x_i <= rho + 1 <= max_i
//!   (Bx)_i / x_i, stopped when the bounds meet to 1e-12. The shift keeps
//!   periodic (bipartite, cyclic) blocks from oscillating. Blocks with an
//!   eigenvalue gap that is very small (long directed cycles) may not
//!   converge; that is reported as an error with the bounds reached.
//!
//! Weights far from 1 in magnitude (beyond 2^+-128) are first divided by a
//! power of two near the largest (exact), so that no product or sum
//! overflows or underflows; the radius is scaled back.

use crate::csr::{Csr, CsrRef};
use crate::error::{Error, Result};
use crate::frame::{moderate, times_pow2};
use crate::guard::Guard;
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

const MAX_LANCZOS: usize = 5000;
const MAX_POWER: usize = 20_000;
const LANCZOS_TOL: f64 = 1e-11;
/// Lanczos also stops when the estimate, which only grows, has moved by
/// less than this (relative) for `STALL_ITERATIONS` iterations in a row:
/// with close eigenvalues the Ritz value settles long before the residual
/// is small, and lost orthogonality then keeps the residual from falling.
const STALL_TOL: f64 = 1e-14;
const STALL_ITERATIONS: usize = 20;
const POWER_TOL: f64 = 1e-12;

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
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for i in 0..m {
        let r = if i > 0 { b[i - 1].abs() } else { 0.0 } + if i + 1 < m { b[i].abs() } else { 0.0 };
        lo = lo.min(a[i] - r);
        hi = hi.max(a[i] + r);
    }
    // number of eigenvalues below x
    let below = |x: f64| {
        let mut count = 0;
        let mut q = 1.0;
        for i in 0..m {
            q = a[i] - x - if i > 0 { b[i - 1] * b[i - 1] / q } else { 0.0 };
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

/// |last component| of the normalized eigenvector of the tridiagonal
/// matrix for its largest eigenvalue `theta`, by the three-term recursion
/// (stable here: the leading minors do not change sign at the top
/// eigenvalue), rescaled as it goes.
fn last_component(a: &[f64], b: &[f64], theta: f64) -> f64 {
    let m = a.len();
    let (mut prev, mut cur) = (0.0f64, 1.0f64);
    let mut norm2 = 1.0;
    for j in 0..m - 1 {
        let next = ((theta - a[j]) * cur - if j > 0 { b[j - 1] * prev } else { 0.0 }) / b[j];
        prev = cur;
        cur = next;
        norm2 += cur * cur;
        if norm2 > 1e200 {
            let s = norm2.sqrt();
            prev /= s;
            cur /= s;
            norm2 /= s * s;
        }
    }
    cur.abs() / norm2.sqrt()
}

fn lanczos(w: CsrRef<'_>, guard: &Guard) -> Result<SpectralRadius> {
    let n = w.n();
    // a positive start is never orthogonal to the Perron vector
    let mut q: Vec<f64> = (0..n).map(|i| 1.0 + ((i * 7919) % 104_729) as f64 / 104_729.0).collect();
    let norm = dot(&q, &q).sqrt();
    q.iter_mut().for_each(|v| *v /= norm);
    let mut q_prev = vec![0.0; n];
    let (mut alpha, mut beta) = (Vec::new(), Vec::new());
    let mut theta = f64::NAN;
    let (mut last, mut stalled) = (f64::NAN, 0);
    for it in 1..=MAX_LANCZOS {
        guard.check()?;
        let mut v = lag_unchecked(w, &q, 1);
        let a = dot(&q, &v);
        let b_prev = beta.last().copied().unwrap_or(0.0);
        for i in 0..n {
            v[i] -= a * q[i] + b_prev * q_prev[i];
        }
        alpha.push(a);
        let b = dot(&v, &v).sqrt();
        theta = largest_tridiagonal(&alpha, &beta);
        let residual = b * last_component(&alpha, &beta, theta);
        if (theta - last).abs() <= STALL_TOL * theta.abs() {
            stalled += 1;
        } else {
            stalled = 0;
        }
        last = theta;
        if residual <= LANCZOS_TOL * theta.abs()
            || stalled >= STALL_ITERATIONS
            || b <= f64::EPSILON * theta.abs()
            || it >= n
        {
            return Ok(SpectralRadius { value: theta, iterations: it, method: SpectralMethod::Lanczos });
        }
        beta.push(b);
        q_prev = std::mem::replace(&mut q, v);
        q.iter_mut().for_each(|x| *x /= b);
    }
    Err(Error::NotConverged { iterations: MAX_LANCZOS, estimate: theta })
}

/// A symmetric matrix with the eigenvalues of `w`, when there is one of the
/// form D^(1/2) W D^(-1/2): `w` itself when symmetric, else
/// sqrt(w_ij w_ji) when the pattern is symmetric and the ratios
/// w_ij / w_ji factor as f_i / f_j (checked on every link).
fn symmetric_form(w: CsrRef<'_>) -> Option<Option<Csr>> {
    let t = w.transpose();
    let tv = t.view();
    if tv.indptr() != w.indptr() || tv.indices() != w.indices() {
        return None;
    }
    if tv.data() == w.data() {
        return Some(None);
    }
    if w.data().iter().any(|&v| !(v > 0.0)) {
        return None;
    }
    // log f along a spanning forest, then check every link
    let n = w.n();
    let mut g = vec![f64::NAN; n];
    let mut stack = Vec::new();
    for root in 0..n {
        if !g[root].is_nan() {
            continue;
        }
        g[root] = 0.0;
        stack.push(root);
        while let Some(i) = stack.pop() {
            let (c, v) = w.row(i);
            let (_, vt) = tv.row(i);
            for ((&j, &wij), &wji) in c.iter().zip(v).zip(vt) {
                let j = j as usize;
                if g[j].is_nan() {
                    g[j] = g[i] - (wij / wji).ln();
                    stack.push(j);
                }
            }
        }
    }
    for i in 0..n {
        let (c, v) = w.row(i);
        let (_, vt) = tv.row(i);
        for ((&j, &wij), &wji) in c.iter().zip(v).zip(vt) {
            if ((g[i] - g[j as usize]) - (wij / wji).ln()).abs() > 1e-11 {
                return None;
            }
        }
    }
    let data = w.data().iter().zip(tv.data()).map(|(a, b)| (a * b).sqrt()).collect();
    Some(Some(w.with_data(data)))
}

/// Strongly connected components (iterative Tarjan): a component label per unit.
fn strong_components(w: CsrRef<'_>) -> (Vec<usize>, usize) {
    let n = w.n();
    const NONE: usize = usize::MAX;
    let mut index = vec![NONE; n];
    let mut low = vec![0; n];
    let mut on_stack = vec![false; n];
    let mut label = vec![NONE; n];
    let mut stack = Vec::new();
    let mut call: Vec<(usize, usize)> = Vec::new();
    let (mut next, mut count) = (0, 0);
    for root in 0..n {
        if index[root] != NONE {
            continue;
        }
        call.push((root, 0));
        index[root] = next;
        low[root] = next;
        next += 1;
        stack.push(root);
        on_stack[root] = true;
        while let Some(&mut (v, ref mut pos)) = call.last_mut() {
            let (cols, _) = w.row(v);
            if *pos < cols.len() {
                let u = cols[*pos] as usize;
                *pos += 1;
                if index[u] == NONE {
                    index[u] = next;
                    low[u] = next;
                    next += 1;
                    stack.push(u);
                    on_stack[u] = true;
                    call.push((u, 0));
                } else if on_stack[u] {
                    low[v] = low[v].min(index[u]);
                }
            } else {
                call.pop();
                if let Some(&(parent, _)) = call.last() {
                    low[parent] = low[parent].min(low[v]);
                }
                if low[v] == index[v] {
                    loop {
                        let u = stack.pop().expect("Tarjan stack holds the component");
                        on_stack[u] = false;
                        label[u] = count;
                        if u == v {
                            break;
                        }
                    }
                    count += 1;
                }
            }
        }
    }
    (label, count)
}

/// Collatz-Wielandt power iteration on B = W + c I for one irreducible block
/// (c = 1, or the block's smallest row sum when that is below 1).
/// Returns (lower, upper) bounds of rho, or an error when they do not meet.
fn block_radius(w: CsrRef<'_>, floor: f64, guard: &Guard) -> Result<(f64, f64, usize)> {
    let n = w.n();
    // the shift: 1 for weights near 1 (the moderated scale), smaller for a block
    // of faint links, whose radius would otherwise drown in the shift's rounding
    let least = w.row_sums().into_iter().fold(f64::INFINITY, f64::min);
    let c = if least > 0.0 { least.min(1.0) } else { 1.0 };
    let mut x = vec![1.0; n];
    let (mut lo, mut hi) = (0.0, f64::INFINITY);
    for it in 1..=MAX_POWER {
        if it % 16 == 0 {
            guard.check()?;
        }
        let mut y = lag_unchecked(w, &x, 1);
        let (mut l, mut u) = (f64::INFINITY, 0.0f64);
        for i in 0..n {
            y[i] += c * x[i];
            let r = y[i] / x[i];
            l = l.min(r);
            u = u.max(r);
        }
        lo = f64::max(lo, l - c);
        hi = f64::min(hi, u - c);
        // done when the bounds meet, or when this block cannot beat the best so far
        if hi - lo <= POWER_TOL * hi || hi <= floor {
            return Ok((lo, hi, it));
        }
        let top = y.iter().copied().fold(0.0f64, f64::max);
        y.iter_mut().for_each(|v| *v = (*v / top).max(f64::MIN_POSITIVE));
        x = y;
    }
    Err(Error::NotConverged { iterations: MAX_POWER, estimate: 0.5 * (lo + hi) })
}

fn general(w: CsrRef<'_>, guard: &Guard) -> Result<SpectralRadius> {
    let (label, count) = strong_components(w);
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); count];
    for (i, &c) in label.iter().enumerate() {
        members[c].push(i);
    }
    let mut local = vec![0usize; w.n()];
    let (mut best, mut iterations) = (0.0f64, 0);
    for m in &members {
        for (k, &i) in m.iter().enumerate() {
            local[i] = k;
        }
        // the block W[m, m] in local numbering
        let rows: Vec<Vec<(usize, f64)>> = m
            .iter()
            .map(|&i| {
                let (c, v) = w.row(i);
                c.iter()
                    .zip(v)
                    .filter(|(&j, _)| label[j as usize] == label[i])
                    .map(|(&j, &x)| (local[j as usize], x))
                    .collect()
            })
            .collect();
        if rows.iter().all(|r| r.is_empty()) {
            continue; // a single unit without a self-link: eigenvalue 0
        }
        let block = Csr::from_rows(rows);
        let (lo, hi, it) = block_radius(block.view(), best, guard)?;
        iterations += it;
        if hi > best {
            best = 0.5 * (lo + hi);
        }
    }
    Ok(SpectralRadius { value: best, iterations, method: SpectralMethod::ShiftedPower })
}

/// The spectral radius of a non-negative weights matrix.
///
/// ```
/// use vicino_core::{Csr, Guard, spectral::spectral_radius};
/// // path 0 - 1 - 2: eigenvalues of the adjacency matrix are 0 and +-sqrt(2)
/// let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0)]]);
/// let r = spectral_radius(w.view(), &Guard::unlimited()).unwrap();
/// assert!((r.value - 2f64.sqrt()).abs() < 1e-12);
/// ```
pub fn spectral_radius(w: CsrRef<'_>, guard: &Guard) -> Result<SpectralRadius> {
    let top = w.data().iter().copied().fold(0.0f64, f64::max);
    if !(top > 0.0) {
        return Err(Error::NoWeight { what: "the largest eigenvalue" });
    }
    if let (Some(scaled), e) = moderate(w) {
        let r = spectral_radius(scaled.view(), guard)?;
        return Ok(SpectralRadius { value: times_pow2(r.value, e), ..r });
    }
    for sums in [w.row_sums(), w.col_sums()] {
        if let Some(c) = constant(&sums) {
            return Ok(SpectralRadius { value: c, iterations: 0, method: SpectralMethod::ConstantSums });
        }
    }
    match symmetric_form(w) {
        Some(None) => lanczos(w, guard),
        Some(Some(m)) => lanczos(m.view(), guard),
        None => general(w, guard),
    }
}
