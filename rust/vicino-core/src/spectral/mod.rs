//! Eigenvalues of a non-negative weights matrix without a dense
//! eigendecomposition of the whole matrix, so they work at n = 10^6: the
//! spectral radius, and the smallest and largest real eigenvalues that bound
//! the autoregressive parameter (LeSage and Pace 2009, chapter 4). Each
//! iteration costs one product with W: O(nnz).
//!
//! The spectral radius:
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
//!   one by one (the eigenvalues of W are those of its diagonal blocks in
//!   that order). A block that is a simple directed cycle of L links has
//!   the eigenvalues g exp(2 pi i k / L), g the geometric mean of its
//!   weights, since lambda^L is the product of the weights; a block of at
//!   most `DENSE_MAX` units is solved densely (Hessenberg reduction and
//!   Francis QR, see [`dense`]); a larger one by power iteration on W + c I
//!   with the Collatz-Wielandt bounds min_i (Bx)_i / x_i <= rho + c <= max_i
//!   (Bx)_i / x_i, stopped when the bounds meet to 1e-12 (the shift keeps
//!   periodic blocks from oscillating), then, if they have not met, by
//!   restarted Arnoldi for the rightmost eigenvalue (for a non-negative
//!   matrix the spectral radius is its rightmost eigenvalue). When neither
//!   converges the error reports the bracket reached.
//!
//! The real extreme eigenvalues ([`eigenvalue_bounds`]): exact (dense) up to
//! `DENSE_MAX` units; beyond, Lanczos on the symmetric form ([`lanczos`]:
//! plain Lanczos with explicitly checked Ritz vectors, thick restart when
//! those do not check out), or per strongly connected block the largest
//! from the spectral radius and the smallest by implicitly restarted
//! Arnoldi ([`arnoldi`]); a block of at most `DENSE_FALLBACK` units on which
//! Arnoldi does not settle within `FALLBACK_PRODUCTS` products is solved
//! densely.
//!
//! Weights far from 1 in magnitude (beyond 2^+-128) are first divided by a
//! power of two near the largest (exact), so that no product or sum
//! overflows or underflows; the results are scaled back.

mod arnoldi;
mod basis;
pub mod dense;
mod lanczos;

use crate::csr::{Csr, CsrRef};
use crate::error::{Error, Result};
use crate::frame::{moderate, pow2_exponent, times_pow2};
use crate::guard::Guard;
use crate::lag::lag_unchecked;

/// How the spectral radius was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpectralMethod {
    ConstantSums,
    Lanczos,
    ShiftedPower,
    /// Dense Hessenberg QR (small matrices or blocks).
    Dense,
    /// The closed form of a simple directed cycle.
    Cycle,
    /// Restarted Lanczos with full reorthogonalization (thick restart).
    ThickLanczos,
    /// Implicitly restarted Arnoldi.
    Arnoldi,
    /// Strongly connected blocks treated each by the fitting method.
    Blocks,
    /// A bipartite pattern: the spectrum is symmetric about 0.
    Bipartite,
}

/// The spectral radius and how it was found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpectralRadius {
    pub value: f64,
    pub iterations: usize,
    pub method: SpectralMethod,
    /// A bound on the error of `value`: the Ritz residual, half the
    /// Collatz-Wielandt bracket, or the backward error of a dense solve.
    pub error: f64,
}

/// Largest matrix (or strongly connected block) solved densely.
pub const DENSE_MAX: usize = 300;
/// Largest non-symmetric block solved densely when Arnoldi does not settle
/// within `FALLBACK_PRODUCTS` products (a long directed cycle with a few
/// chords: hundreds of eigenvalues near a circle, the real ones inside).
/// The dense solve takes about 10 n^3 operations: a few seconds at 1,000.
pub const DENSE_FALLBACK: usize = 1000;
const FALLBACK_PRODUCTS: usize = 3000;

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

/// The constant row (or column) sum of `w`, if there is one.
fn constant_sums(w: CsrRef<'_>) -> Option<f64> {
    [w.row_sums(), w.col_sums()].iter().find_map(|s| constant(s))
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
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
        theta = dense::largest_tridiagonal(&alpha, &beta);
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
            return Ok(SpectralRadius {
                value: theta,
                iterations: it,
                method: SpectralMethod::Lanczos,
                error: residual,
            });
        }
        beta.push(b);
        q_prev = std::mem::replace(&mut q, v);
        q.iter_mut().for_each(|x| *x /= b);
    }
    Err(Error::EigenNotConverged {
        what: "the largest eigenvalue",
        products: MAX_LANCZOS,
        value: theta,
        error: f64::NAN,
        wanted: LANCZOS_TOL * theta.abs(),
    })
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
    Err(Error::NotConverged { iterations: MAX_POWER, low: lo, high: hi })
}

/// A diagonal block of W on one strongly connected component.
enum Block {
    /// One unit: its self-weight (0 without a self-link) is the eigenvalue.
    Single(f64),
    /// A simple directed cycle of `len` links: eigenvalues g exp(2 pi i k / len).
    Cycle {
        len: usize,
        g: f64,
    },
    Matrix(Csr),
}

/// Call `f` with each diagonal block of `w` on its strongly connected components.
fn each_block(w: CsrRef<'_>, mut f: impl FnMut(Block) -> Result<()>) -> Result<()> {
    let (label, count) = strong_components(w);
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); count];
    for (i, &c) in label.iter().enumerate() {
        members[c].push(i);
    }
    let mut local = vec![0usize; w.n()];
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
        let block = if rows.len() == 1 {
            Block::Single(rows[0].first().map_or(0.0, |e| e.1))
        } else if rows.iter().all(|r| r.len() == 1) {
            // irreducible with one link per row: a simple cycle (lambda^len = product of weights)
            let logs: f64 = rows.iter().map(|r| r[0].1.ln()).sum();
            Block::Cycle { len: rows.len(), g: (logs / rows.len() as f64).exp() }
        } else {
            Block::Matrix(Csr::from_rows(rows))
        };
        f(block)?;
    }
    Ok(())
}

/// The dense matrix of `w` (row-major).
fn dense_of(w: CsrRef<'_>) -> Vec<f64> {
    let n = w.n();
    let mut a = vec![0.0; n * n];
    for i in 0..n {
        let (c, v) = w.row(i);
        for (&j, &x) in c.iter().zip(v) {
            a[i * n + j as usize] = x;
        }
    }
    a
}

/// A block brought to moderate weights without changing its eigenvalues:
/// a diagonal similarity D B D^-1 by powers of two (exact), chosen by
/// max-balancing the exponents (Osborne-style sweeps on the largest
/// exponent of each row against that of its column, in integer log2), then
/// divided by a power of two near its largest weight. Returns the block and
/// e such that its eigenvalues times 2^e are those of `b`. Weights spanning
/// more than the range of floating point (1e300 beside 1e-300 on one cycle)
/// would otherwise underflow to 0 beside the largest, and the block's
/// radius with them.
fn tame(b: Csr) -> (Csr, i32) {
    let v = b.view();
    let n = v.n();
    let exps = |data: &[f64]| data.iter().map(|&x| i64::from(pow2_exponent(x))).collect::<Vec<_>>();
    let (lo, hi) = v.data().iter().fold((i32::MAX, i32::MIN), |(l, h), &x| {
        let e = pow2_exponent(x);
        (l.min(e), h.max(e))
    });
    let mut g = vec![0i64; n];
    if i64::from(hi) - i64::from(lo) > 64 {
        let t = v.transpose();
        let tv = t.view();
        let (le, lt) = (exps(v.data()), exps(tv.data()));
        let (ip, ix, tp, tx) = (v.indptr(), v.indices(), tv.indptr(), tv.indices());
        for _ in 0..200 {
            let mut moved = false;
            for i in 0..n {
                let row = ip[i] as usize..ip[i + 1] as usize;
                let col = tp[i] as usize..tp[i + 1] as usize;
                let r = row.filter(|&k| ix[k] as usize != i).map(|k| le[k] - g[ix[k] as usize]).max();
                let c = col.filter(|&k| tx[k] as usize != i).map(|k| lt[k] + g[tx[k] as usize]).max();
                if let (Some(r), Some(c)) = (r, c) {
                    let want = (c - r).div_euclid(2);
                    if (want - g[i]).abs() > 1 {
                        g[i] = want;
                        moved = true;
                    }
                }
            }
            if !moved {
                break;
            }
        }
    }
    let (ip, ix) = (v.indptr(), v.indices());
    let mut data = v.data().to_vec();
    for i in 0..n {
        for k in ip[i] as usize..ip[i + 1] as usize {
            let shift = (g[i] - g[ix[k] as usize]).clamp(-4200, 4200) as i32;
            data[k] = times_pow2(data[k], shift);
        }
    }
    let balanced = v.with_data(data);
    match moderate(balanced.view()) {
        (Some(m), e) => (m, e),
        (None, _) => (balanced, 0),
    }
}

/// Whether a block suits the dense route: its weights within 10^40 of each
/// other. A dense solver's error is relative to the largest weight, so it
/// would lose the eigenvalues of faint cycles beside strong links, which the
/// (multiplicative) power iteration keeps.
fn dense_suits(w: CsrRef<'_>) -> bool {
    w.n() <= DENSE_MAX && dense_suits_entries(w)
}

/// Whether the weights lie within 10^40 of each other (see [`dense_suits`]).
fn dense_suits_entries(w: CsrRef<'_>) -> bool {
    let (lo, hi) = w.data().iter().fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
    lo > 0.0 && hi <= lo * 1e40
}

/// Backward error of a dense solve: a few rounding units of ||W||_F per unit.
fn dense_error(w: CsrRef<'_>) -> f64 {
    let fro = w.data().iter().map(|x| x * x).sum::<f64>().sqrt();
    w.n() as f64 * f64::EPSILON * fro
}

/// All eigenvalues (re, im) of a small matrix.
fn dense_eigenvalues(w: CsrRef<'_>) -> Result<Vec<(f64, f64)>> {
    let n = w.n();
    let mut a = dense_of(w);
    dense::balance(&mut a, n);
    dense::hessenberg(&mut a, n);
    dense::hessenberg_eigenvalues(&mut a, n).ok_or(Error::EigenNotConverged {
        what: "the dense eigenvalues (Francis QR)",
        products: 0,
        value: f64::NAN,
        error: f64::NAN,
        wanted: 0.0,
    })
}

/// The spectral radius of one irreducible block with links (n > DENSE_MAX).
fn large_block_radius(b: CsrRef<'_>, floor: f64, guard: &Guard) -> Result<(f64, f64, usize, SpectralMethod)> {
    match block_radius(b, floor, guard) {
        Ok((lo, hi, it)) => Ok((0.5 * (lo + hi), 0.5 * (hi - lo), it, SpectralMethod::ShiftedPower)),
        Err(Error::NotConverged { iterations, low, high }) => {
            // the bracket did not close: the rightmost eigenvalue by Arnoldi
            match arnoldi::real_end(b, true, 1e-10, lanczos::MAX_PRODUCTS, guard) {
                // accepted only when sharp and inside the bracket, which always holds rho
                Ok(r) if r.error <= 1e-8 * r.value && r.value >= low && r.value <= high => {
                    Ok((r.value, r.error.min(high - low), iterations + r.products, SpectralMethod::Arnoldi))
                }
                Err(Error::Interrupted) => Err(Error::Interrupted),
                _ => Err(Error::NotConverged { iterations, low, high }),
            }
        }
        Err(e) => Err(e),
    }
}

fn general(w: CsrRef<'_>, guard: &Guard) -> Result<SpectralRadius> {
    let (mut best, mut error, mut iterations) = (0.0f64, 0.0f64, 0);
    let mut methods = Vec::new();
    each_block(w, |block| {
        let (value, err, it, method) = match block {
            Block::Single(x) => (x, 0.0, 0, SpectralMethod::Dense),
            Block::Cycle { len, g } => (g, 4.0 * len as f64 * f64::EPSILON * g, 0, SpectralMethod::Cycle),
            Block::Matrix(b) => {
                let (b, e) = tame(b);
                let (rho, err, it, method) = if dense_suits(b.view()) {
                    let ev = dense_eigenvalues(b.view())?;
                    let rho = ev.iter().fold(0.0f64, |r, &(re, im)| r.max(re.hypot(im)));
                    (rho, dense_error(b.view()), 0, SpectralMethod::Dense)
                } else {
                    large_block_radius(b.view(), times_pow2(best, -e), guard)?
                };
                (times_pow2(rho, e), times_pow2(err, e), it, method)
            }
        };
        iterations += it;
        if value > best {
            (best, error) = (value, err);
            methods.push(method);
        }
        Ok(())
    })?;
    let method = match methods.last() {
        Some(&m) if methods.iter().all(|&x| x == m) => m,
        Some(_) => SpectralMethod::Blocks,
        None => SpectralMethod::Dense,
    };
    Ok(SpectralRadius { value: best, iterations, method, error })
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
        if symmetric_form(scaled.view()).is_none() && constant_sums(scaled.view()).is_none() {
            // block by block, each brought to moderate weights on its own (a
            // faint cycle beside strong links would underflow here)
            return general(w, guard);
        }
        let r = spectral_radius(scaled.view(), guard)?;
        return Ok(SpectralRadius { value: times_pow2(r.value, e), error: times_pow2(r.error, e), ..r });
    }
    for sums in [w.row_sums(), w.col_sums()] {
        if let Some(c) = constant(&sums) {
            return Ok(SpectralRadius { value: c, iterations: 0, method: SpectralMethod::ConstantSums, error: 0.0 });
        }
    }
    match symmetric_form(w) {
        Some(None) => lanczos(w, guard),
        Some(Some(m)) => lanczos(m.view(), guard),
        None => general(w, guard),
    }
}

/// The smallest and largest real eigenvalues of a weights matrix, with a
/// bound on the error of each and how each was found.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EigenvalueBounds {
    pub min: f64,
    pub min_error: f64,
    pub min_method: SpectralMethod,
    pub max: f64,
    pub max_error: f64,
    pub max_method: SpectralMethod,
    /// Products with the matrix (0 for dense and closed-form results).
    pub products: usize,
}

/// One end found so far: value, error, method.
#[derive(Clone, Copy)]
struct End(f64, f64, SpectralMethod);

impl End {
    fn keep(&mut self, other: End, smaller: bool) {
        if (smaller && other.0 < self.0) || (!smaller && other.0 > self.0) {
            *self = other;
        }
    }
}

/// The real eigenvalues of a small matrix (an imaginary part below 1e-8 of
/// the spectral radius counts as rounding).
fn dense_real_ends(b: CsrRef<'_>) -> Result<(End, End)> {
    let ev = dense_eigenvalues(b)?;
    let scale = ev.iter().fold(0.0f64, |r, &(re, im)| r.max(re.hypot(im)));
    let err = dense_error(b);
    let real = ev.iter().filter(|&&(_, im)| im.abs() <= 1e-8 * scale).map(|&(re, _)| re);
    let lo = real.clone().fold(f64::INFINITY, f64::min);
    let hi = real.fold(f64::NEG_INFINITY, f64::max);
    Ok((End(lo, err, SpectralMethod::Dense), End(hi, err, SpectralMethod::Dense)))
}

fn symmetric_bounds(m: CsrRef<'_>, constant: Option<f64>, tol: f64, guard: &Guard) -> Result<EigenvalueBounds> {
    let n = m.n();
    if n <= DENSE_MAX {
        // Householder keeps symmetry: the Hessenberg form is tridiagonal
        let mut a = dense_of(m);
        dense::hessenberg(&mut a, n);
        let d: Vec<f64> = (0..n).map(|i| a[i * n + i]).collect();
        let e: Vec<f64> = (0..n - 1).map(|i| 0.5 * (a[(i + 1) * n + i] + a[i * n + i + 1])).collect();
        let err = dense_error(m);
        let max = constant.unwrap_or_else(|| dense::tridiagonal_extreme(&d, &e, true));
        return Ok(EigenvalueBounds {
            min: dense::tridiagonal_extreme(&d, &e, false),
            min_error: err,
            min_method: SpectralMethod::Dense,
            max,
            max_error: if constant.is_some() { 0.0 } else { err },
            max_method: if constant.is_some() { SpectralMethod::ConstantSums } else { SpectralMethod::Dense },
            products: 0,
        });
    }
    let r = lanczos::extremes(m, constant.is_none(), tol, guard)?;
    let method = if r.restarted { SpectralMethod::ThickLanczos } else { SpectralMethod::Lanczos };
    let (max, max_error, max_method) = match constant {
        Some(c) => (c, 0.0, SpectralMethod::ConstantSums),
        None => (r.max, r.max_error, method),
    };
    Ok(EigenvalueBounds {
        min: r.min,
        min_error: r.min_error,
        min_method: method,
        max,
        max_error,
        max_method,
        products: r.products,
    })
}

/// The real ends of one irreducible block with links (n > DENSE_MAX): the
/// largest from the spectral radius, the smallest by Arnoldi; a block of at
/// most `DENSE_FALLBACK` units on which either does not settle is solved
/// densely instead. Returns the ends and the products spent.
fn large_real_ends(b: CsrRef<'_>, floor: f64, tol: f64, guard: &Guard) -> Result<(End, End, usize)> {
    let small = b.n() <= DENSE_FALLBACK && dense_suits_entries(b);
    let cap = if small { FALLBACK_PRODUCTS } else { lanczos::MAX_PRODUCTS };
    let attempt = || -> Result<(End, End, usize)> {
        let (rho, err, it, method) = large_block_radius(b, floor, guard)?;
        let r = arnoldi::real_end(b, false, tol, cap, guard)?;
        Ok((End(r.value, r.error, SpectralMethod::Arnoldi), End(rho, err, method), it + r.products))
    };
    match attempt() {
        Err(Error::Interrupted) => Err(Error::Interrupted),
        Err(e @ Error::TooLarge { .. }) => Err(e),
        Err(e) if small => {
            guard.check()?;
            let (l, h) = dense_real_ends(b)?;
            // the products the iterations spent before giving way
            let spent = match e {
                Error::NotConverged { iterations, .. } => iterations,
                Error::EigenNotConverged { products, .. } | Error::NoRealEigenvalue { products, .. } => products,
                _ => 0,
            };
            Ok((l, h, spent))
        }
        other => other,
    }
}

fn general_bounds(w: CsrRef<'_>, constant: Option<f64>, tol: f64, guard: &Guard) -> Result<EigenvalueBounds> {
    let mut lo = End(f64::INFINITY, 0.0, SpectralMethod::Dense);
    let mut hi = End(f64::NEG_INFINITY, 0.0, SpectralMethod::Dense);
    let mut products = 0;
    each_block(w, |block| {
        match block {
            Block::Single(x) => {
                lo.keep(End(x, 0.0, SpectralMethod::Dense), true);
                hi.keep(End(x, 0.0, SpectralMethod::Dense), false);
            }
            Block::Cycle { len, g } => {
                // the real ones among g exp(2 pi i k / len): g, and -g for an even length
                let err = 4.0 * len as f64 * f64::EPSILON * g;
                let low = if len % 2 == 0 { -g } else { g };
                lo.keep(End(low, err, SpectralMethod::Cycle), true);
                hi.keep(End(g, err, SpectralMethod::Cycle), false);
            }
            Block::Matrix(b) => {
                let (b, e) = tame(b);
                let back = |x: End| End(times_pow2(x.0, e), times_pow2(x.1, e), x.2);
                if dense_suits(b.view()) {
                    let (l, h) = dense_real_ends(b.view())?;
                    lo.keep(back(l), true);
                    hi.keep(back(h), false);
                } else {
                    let (l, h, spent) = large_real_ends(b.view(), times_pow2(hi.0, -e), tol, guard)?;
                    products += spent;
                    lo.keep(back(l), true);
                    hi.keep(back(h), false);
                }
            }
        }
        Ok(())
    })?;
    if let Some(c) = constant {
        hi = End(c, 0.0, SpectralMethod::ConstantSums);
    }
    Ok(EigenvalueBounds {
        min: lo.0,
        min_error: lo.1,
        min_method: lo.2,
        max: hi.0,
        max_error: hi.1,
        max_method: hi.2,
        products,
    })
}

/// Whether the links, in either direction, form a bipartite graph without
/// self-links (two-colouring by depth-first search, O(n + nnz)).
fn bipartite(w: CsrRef<'_>) -> bool {
    let t = w.transpose();
    let tv = t.view();
    let n = w.n();
    let mut side = vec![0i8; n];
    let mut stack = Vec::new();
    for root in 0..n {
        if side[root] != 0 {
            continue;
        }
        side[root] = 1;
        stack.push(root);
        while let Some(i) = stack.pop() {
            for &j in w.row(i).0.iter().chain(tv.row(i).0) {
                let j = j as usize;
                if side[j] == side[i] {
                    return false; // includes a self-link
                }
                if side[j] == 0 {
                    side[j] = -side[i];
                    stack.push(j);
                }
            }
        }
    }
    true
}

/// The smallest and largest real eigenvalues of a non-negative weights
/// matrix, each with a bound on its error: for a symmetric (or diagonally
/// symmetrizable) matrix some eigenvalue lies within the bound of the
/// value; otherwise the value is an exact eigenvalue of a matrix within the
/// bound of W (a backward error). `tol` is the residual wanted, relative to
/// the spectral radius.
///
/// ```
/// use vicino_core::{Csr, Guard, spectral::eigenvalue_bounds};
/// // path 0 - 1 - 2: eigenvalues of the adjacency matrix are 0 and +-sqrt(2)
/// let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0)]]);
/// let b = eigenvalue_bounds(w.view(), 1e-10, &Guard::unlimited()).unwrap();
/// assert!((b.min + 2f64.sqrt()).abs() < 1e-12 && (b.max - 2f64.sqrt()).abs() < 1e-12);
/// ```
pub fn eigenvalue_bounds(w: CsrRef<'_>, tol: f64, guard: &Guard) -> Result<EigenvalueBounds> {
    let top = w.data().iter().copied().fold(0.0f64, f64::max);
    if !(top > 0.0) {
        return Err(Error::NoWeight { what: "the eigenvalue bounds" });
    }
    if bipartite(w) {
        // S W S = -W for S = diag(+-1) by side: the real eigenvalues come in pairs -x, x
        let r = spectral_radius(w, guard)?;
        return Ok(EigenvalueBounds {
            min: -r.value,
            min_error: r.error,
            min_method: SpectralMethod::Bipartite,
            max: r.value,
            max_error: r.error,
            max_method: r.method,
            products: r.iterations,
        });
    }
    if let (Some(scaled), e) = moderate(w) {
        let sv = scaled.view();
        if symmetric_form(sv).is_none() && constant_sums(sv).is_none() {
            return general_bounds(w, None, tol.max(4.0 * f64::EPSILON), guard);
        }
        let b = eigenvalue_bounds(scaled.view(), tol, guard)?;
        let back = |x: f64| times_pow2(x, e);
        return Ok(EigenvalueBounds {
            min: back(b.min),
            min_error: back(b.min_error),
            max: back(b.max),
            max_error: back(b.max_error),
            ..b
        });
    }
    let tol = tol.max(4.0 * f64::EPSILON);
    // constant row (or column) sums: the largest eigenvalue is that sum (Perron-Frobenius)
    let constant = [w.row_sums(), w.col_sums()].iter().find_map(|s| constant(s));
    match symmetric_form(w) {
        Some(None) => symmetric_bounds(w, constant, tol, guard),
        Some(Some(m)) => symmetric_bounds(m.view(), constant, tol, guard),
        None => general_bounds(w, constant, tol, guard),
    }
}
