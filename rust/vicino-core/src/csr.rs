//! The sparse graph type: a square matrix in canonical compressed sparse row
//! form (row pointers `indptr`, column `indices` sorted within each row with no
//! repeats, `data`), with `i64` pointers and indices so that SciPy can wrap the
//! buffers without copying.
//!
//! [`Csr`] owns its buffers; [`CsrRef`] borrows them (from NumPy, without a
//! copy). Full structural validation is delegated to `sprs`.
//! Validation is O(nnz); every other constructor here is O(n) or cheaper.
//!
//! A link is a stored entry, and every stored weight is positive and finite;
//! a unit without a link to another unit is an island (a self-link alone
//! does not make a neighbour). Every matrix of the crate is built by
//! [`build_rows`] (or its fixed-width form, [`build_fixed_rows`]), and every
//! walk over two sorted rows at once is [`merge_rows`].

use crate::error::{Error, Link, Result};
use rayon::prelude::*;

/// Below this many stored entries, loops stay serial.
pub const PARALLEL_MIN_NNZ: usize = 1 << 15;

/// Hint the CPU to fetch `x[j]` soon. Gathers at random places (neighbour
/// values, the rows of neighbours) are bound by memory latency, not
/// arithmetic.
#[inline(always)]
pub(crate) fn prefetch<T>(x: &[T], j: usize) {
    #[cfg(target_arch = "x86_64")]
    // SAFETY: prefetching never faults, even for an address outside `x`;
    // `wrapping_add` keeps the pointer arithmetic defined.
    unsafe {
        use std::arch::x86_64::{_mm_prefetch, _MM_HINT_T0};
        _mm_prefetch::<_MM_HINT_T0>(x.as_ptr().wrapping_add(j) as *const i8);
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = (x, j);
}

/// Breadth-first order over the links `row(u)` of n units, component by
/// component, starting each from its lowest position: `order[new] = old`
/// (in the spirit of Cuthill and McKee 1969). Consecutive units in this
/// order have their neighbours close to each other. O(n + links).
pub fn locality_order<I: Iterator<Item = usize>>(n: usize, row: impl Fn(usize) -> I) -> Vec<u32> {
    let mut seen = vec![false; n];
    let mut order: Vec<u32> = Vec::with_capacity(n);
    for root in 0..n {
        if seen[root] {
            continue;
        }
        seen[root] = true;
        let mut head = order.len();
        order.push(root as u32);
        while head < order.len() {
            let u = order[head] as usize;
            head += 1;
            for v in row(u) {
                if !seen[v] {
                    seen[v] = true;
                    order.push(v as u32);
                }
            }
        }
    }
    order
}

/// Rows per block of [`build_rows`] (each block has its own buffers).
pub const BUILD_BLOCK: usize = 2048;

/// CSR buffers (indptr, indices, data).
pub type Parts<T> = (Vec<i64>, Vec<i64>, Vec<T>);

/// The one CSR builder: `row(state, i, cols, vals)` appends the entries of
/// row i, sorted by column. Rows are produced in blocks, in parallel when
/// `parallel`, each block into its own buffers with a `state` from `init`
/// per thread (scratch space); the blocks are stitched in row order, so the
/// result never depends on the thread count. With `visit`, a permutation of
/// the rows, rows are produced in that order (for locality) and then moved
/// to row order. The first error of a row stops the build.
pub fn build_rows<T, S, F>(
    n: usize,
    visit: Option<&[usize]>,
    parallel: bool,
    init: impl Fn() -> S + Sync,
    row: F,
) -> Result<Parts<T>>
where
    T: Copy + Default + Send + Sync,
    S: Send,
    F: Fn(&mut S, usize, &mut Vec<i64>, &mut Vec<T>) -> Result<()> + Sync,
{
    build_visited_rows(n, visit, parallel, init, |state, _, i, cols, vals| row(state, i, cols, vals))
}

/// [`build_rows`] whose `row(state, k, i, cols, vals)` also learns `k`, the
/// place of row i in the visiting order (`visit[k] == i`, or `k == i`
/// without `visit`), so that a caller whose data are laid out in that
/// order reads them at `k`.
pub fn build_visited_rows<T, S, F>(
    n: usize,
    visit: Option<&[usize]>,
    parallel: bool,
    init: impl Fn() -> S + Sync,
    row: F,
) -> Result<Parts<T>>
where
    T: Copy + Default + Send + Sync,
    S: Send,
    F: Fn(&mut S, usize, usize, &mut Vec<i64>, &mut Vec<T>) -> Result<()> + Sync,
{
    debug_assert!(visit.is_none_or(|v| v.len() == n));
    let unit = |k: usize| visit.map_or(k, |v| v[k]);
    let block = |state: &mut S, b: usize| -> Result<(Vec<i64>, Vec<T>, Vec<i64>)> {
        let (mut cols, mut vals, mut lens) = (Vec::new(), Vec::new(), Vec::with_capacity(BUILD_BLOCK));
        for k in b * BUILD_BLOCK..((b + 1) * BUILD_BLOCK).min(n) {
            let before = cols.len();
            row(state, k, unit(k), &mut cols, &mut vals)?;
            debug_assert!(cols[before..].windows(2).all(|p| p[0] < p[1]), "rows must be sorted");
            lens.push((cols.len() - before) as i64);
        }
        Ok((cols, vals, lens))
    };
    let blocks = n.div_ceil(BUILD_BLOCK);
    let parts: Vec<(Vec<i64>, Vec<T>, Vec<i64>)> = if parallel {
        (0..blocks).into_par_iter().map_init(&init, block).collect::<Result<_>>()?
    } else {
        let mut state = init();
        (0..blocks).map(|b| block(&mut state, b)).collect::<Result<_>>()?
    };
    if visit.is_none() {
        let mut indptr = Vec::with_capacity(n + 1);
        indptr.push(0i64);
        for (_, _, lens) in &parts {
            for &l in lens {
                indptr.push(indptr[indptr.len() - 1] + l);
            }
        }
        let total = indptr[n] as usize;
        let (mut indices, mut data) = (Vec::with_capacity(total), Vec::with_capacity(total));
        for (c, v, _) in parts {
            indices.extend_from_slice(&c);
            data.extend_from_slice(&v);
        }
        return Ok((indptr, indices, data));
    };
    // where each visited row sits in its block, then every row moved to its place
    let mut source = vec![(0u32, 0usize, 0usize); n]; // (block, start, len) by row
    for (b, (_, _, lens)) in parts.iter().enumerate() {
        let mut start = 0usize;
        for (o, &l) in lens.iter().enumerate() {
            source[unit(b * BUILD_BLOCK + o)] = (b as u32, start, l as usize);
            start += l as usize;
        }
    }
    let mut indptr = Vec::with_capacity(n + 1);
    indptr.push(0i64);
    for &(_, _, l) in &source {
        indptr.push(indptr[indptr.len() - 1] + l as i64);
    }
    let total = indptr[n] as usize;
    let (mut indices, mut data) = (vec![0i64; total], vec![T::default(); total]);
    // split the output at block boundaries of rows, then fill blocks in parallel
    let mut pieces = Vec::with_capacity(blocks);
    let (mut rest_c, mut rest_v) = (&mut indices[..], &mut data[..]);
    for b in 0..blocks {
        let (lo, hi) = (b * BUILD_BLOCK, ((b + 1) * BUILD_BLOCK).min(n));
        let len = (indptr[hi] - indptr[lo]) as usize;
        let (c, rc) = rest_c.split_at_mut(len);
        let (v, rv) = rest_v.split_at_mut(len);
        pieces.push((lo..hi, c, v));
        (rest_c, rest_v) = (rc, rv);
    }
    let fill = |(rows, c, v): (std::ops::Range<usize>, &mut [i64], &mut [T])| {
        let mut at = 0;
        for i in rows {
            let (b, start, len) = source[i];
            let (pc, pv, _) = &parts[b as usize];
            c[at..at + len].copy_from_slice(&pc[start..start + len]);
            v[at..at + len].copy_from_slice(&pv[start..start + len]);
            at += len;
        }
    };
    if parallel {
        pieces.into_par_iter().for_each(fill);
    } else {
        pieces.into_iter().for_each(fill);
    }
    Ok((indptr, indices, data))
}

/// The output buffers of [`build_fixed_rows`], written row by row from
/// several threads at once.
struct FixedOut<T> {
    cols: *mut i64,
    vals: *mut T,
}

// SAFETY: the threads write disjoint rows (the visiting order is checked to
// be a permutation before any write), and the buffers outlive the writes.
unsafe impl<T: Send> Sync for FixedOut<T> {}

impl<T: Copy> FixedOut<T> {
    /// Write row i (exactly `width` entries).
    ///
    /// # Safety
    /// Row i must lie inside the buffers, and no other thread may write it.
    unsafe fn write(&self, i: usize, width: usize, cols: &[i64], vals: &[T]) {
        debug_assert!(cols.len() == width && vals.len() == width);
        // SAFETY: by the caller, rows i * width .. (i + 1) * width are ours
        unsafe {
            std::ptr::copy_nonoverlapping(cols.as_ptr(), self.cols.add(i * width), width);
            std::ptr::copy_nonoverlapping(vals.as_ptr(), self.vals.add(i * width), width);
        }
    }
}

/// The fixed-width form of [`build_visited_rows`], for rows of exactly
/// `width` entries (the k nearest neighbours): each row is written straight
/// into its place in the output, so the output is never held twice, and no
/// memory is spent per row beyond the output. Rows are produced in the order
/// `visit` (a permutation of the rows), in blocks, in parallel when
/// `parallel`; `row(state, k, i, cols, vals)` must append exactly `width`
/// entries of row `i = visit[k]`, sorted by column.
pub fn build_fixed_rows<T, S, F>(
    n: usize,
    width: usize,
    visit: &[usize],
    parallel: bool,
    init: impl Fn() -> S + Sync,
    row: F,
) -> Result<Parts<T>>
where
    T: Copy + Default + Send + Sync,
    S: Send,
    F: Fn(&mut S, usize, usize, &mut Vec<i64>, &mut Vec<T>) -> Result<()> + Sync,
{
    let mut seen = vec![false; n];
    if visit.len() != n || visit.iter().any(|&i| i >= n || std::mem::replace(&mut seen[i], true)) {
        return Err(Error::InvalidMatrix { reason: "the visiting order is not a permutation of the rows".into() });
    }
    drop(seen);
    let mut indices = vec![0i64; n * width];
    let mut data = vec![T::default(); n * width];
    let out = FixedOut { cols: indices.as_mut_ptr(), vals: data.as_mut_ptr() };
    let fill = |state: &mut (S, Vec<i64>, Vec<T>), (b, chunk): (usize, &[usize])| -> Result<()> {
        let (st, cols, vals) = state;
        for (o, &i) in chunk.iter().enumerate() {
            cols.clear();
            vals.clear();
            row(st, b * BUILD_BLOCK + o, i, cols, vals)?;
            if cols.len() != width || vals.len() != width {
                return Err(Error::InvalidMatrix {
                    reason: format!("row {i} has {} entries, not {width}", cols.len()),
                });
            }
            // SAFETY: `visit` is a permutation of 0..n, so row i < n is
            // written once, by this thread only
            unsafe { out.write(i, width, cols, vals) };
        }
        Ok(())
    };
    let init = || (init(), Vec::with_capacity(width), Vec::with_capacity(width));
    if parallel {
        visit.par_chunks(BUILD_BLOCK).enumerate().map_init(init, fill).collect::<Result<()>>()?;
    } else {
        let mut state = init();
        visit.chunks(BUILD_BLOCK).enumerate().try_for_each(|c| fill(&mut state, c))?;
    }
    let indptr = (0..=n as i64).map(|i| i * width as i64).collect();
    Ok((indptr, indices, data))
}

/// Walk two sorted rows at once, calling `f(col, a, b)` for every column in
/// either: `a` is (position in the first row, its value) when the first row
/// has the column, `b` the second row's value when it has it.
#[inline]
pub fn merge_rows(
    ac: &[i64],
    av: &[f64],
    bc: &[i64],
    bv: &[f64],
    mut f: impl FnMut(i64, Option<(usize, f64)>, Option<f64>),
) {
    let (mut p, mut q) = (0, 0);
    while p < ac.len() || q < bc.len() {
        let take_a = q == bc.len() || (p < ac.len() && ac[p] <= bc[q]);
        let take_b = p == ac.len() || (q < bc.len() && bc[q] <= ac[p]);
        let col = if take_a { ac[p] } else { bc[q] };
        f(col, take_a.then(|| (p, av[p])), take_b.then(|| bv[q]));
        p += take_a as usize;
        q += take_b as usize;
    }
}

/// Row u of A + B: each column stored in either, in order, with a_uj + b_uj.
#[inline]
pub fn sum_row(a: CsrRef<'_>, b: CsrRef<'_>, u: usize, mut f: impl FnMut(i64, f64)) {
    let ((ac, av), (bc, bv)) = (a.row(u), b.row(u));
    merge_rows(ac, av, bc, bv, |c, x, y| f(c, x.map_or(0.0, |x| x.1) + y.unwrap_or(0.0)));
}

/// Rows per block of the reverse-link scan.
const REVERSE_BLOCK: usize = 4096;

/// Target rows per group of [`CsrRef::fold_reverse_by_target`]: with 8
/// links per row the group's rows take about 1 MB, within a core's L2.
pub const TARGET_GROUP: usize = 1024;

/// Source rows per block of the counting pass of
/// [`CsrRef::fold_reverse_by_target`].
const SOURCE_BLOCK: usize = 16384;

/// A block of rows' links as (target, source, weight), grouped by target
/// group, and where each group starts.
type TargetSorted = (Vec<u32>, Vec<(u32, u32, f64)>);

/// A borrowed canonical CSR matrix of shape (n, n).
#[derive(Debug, Clone, Copy)]
pub struct CsrRef<'a> {
    n: usize,
    indptr: &'a [i64],
    indices: &'a [i64],
    data: &'a [f64],
}

/// An owned canonical CSR matrix of shape (n, n).
#[derive(Debug, Clone, PartialEq)]
pub struct Csr {
    n: usize,
    indptr: Vec<i64>,
    indices: Vec<i64>,
    data: Vec<f64>,
}

fn check_shape(n: usize, indptr: &[i64], indices: &[i64], data: &[f64]) -> Result<()> {
    if indptr.len() != n + 1 {
        return Err(Error::InvalidMatrix {
            reason: format!("indptr has length {} but n + 1 = {}", indptr.len(), n + 1),
        });
    }
    if indices.len() != data.len() {
        return Err(Error::InvalidMatrix {
            reason: format!("{} indices but {} data values", indices.len(), data.len()),
        });
    }
    if indptr[0] != 0 || indptr[n] != indices.len() as i64 {
        return Err(Error::InvalidMatrix {
            reason: "indptr must start at 0 and end at the number of stored entries".into(),
        });
    }
    Ok(())
}

impl<'a> CsrRef<'a> {
    /// Borrow buffers that are known to be canonical (built by this crate, or
    /// validated once with [`CsrRef::validated`]). Checks only the O(1) shape
    /// facts; indexing stays bounds-checked, so a broken buffer can give an
    /// error or a panic but never undefined behaviour.
    pub fn trusted(n: usize, indptr: &'a [i64], indices: &'a [i64], data: &'a [f64]) -> Result<Self> {
        check_shape(n, indptr, indices, data)?;
        Ok(Self { n, indptr, indices, data })
    }

    /// Borrow buffers after a full check: canonical structure (via `sprs`),
    /// finite and non-negative weights. O(nnz).
    pub fn validated(n: usize, indptr: &'a [i64], indices: &'a [i64], data: &'a [f64]) -> Result<Self> {
        let this = Self::structured(n, indptr, indices, data)?;
        for row in 0..n {
            let (cols, vals) = this.row(row);
            for (&c, &v) in cols.iter().zip(vals) {
                let link = Link(row, c as usize);
                if !v.is_finite() {
                    return Err(Error::NonFiniteWeight { link, value: v });
                }
                if v < 0.0 {
                    return Err(Error::NegativeWeight { link, value: v });
                }
                if v == 0.0 {
                    return Err(Error::ZeroWeight { link });
                }
            }
        }
        Ok(this)
    }

    /// Borrow buffers after checking the canonical structure only (via
    /// `sprs`), whatever the values. O(nnz).
    pub fn structured(n: usize, indptr: &'a [i64], indices: &'a [i64], data: &'a [f64]) -> Result<Self> {
        check_shape(n, indptr, indices, data)?;
        sprs::CsMatViewI::<f64, i64, i64>::try_new((n, n), indptr, indices, data)
            .map_err(|e| Error::InvalidMatrix { reason: e.3.to_string() })?;
        Ok(Self { n, indptr, indices, data })
    }

    /// Number of units (rows and columns).
    pub fn n(&self) -> usize {
        self.n
    }
    /// Number of stored entries.
    pub fn nnz(&self) -> usize {
        self.data.len()
    }
    pub fn indptr(&self) -> &'a [i64] {
        self.indptr
    }
    pub fn indices(&self) -> &'a [i64] {
        self.indices
    }
    pub fn data(&self) -> &'a [f64] {
        self.data
    }

    /// Column indices and weights of row `i`.
    #[inline]
    pub fn row(&self, i: usize) -> (&'a [i64], &'a [f64]) {
        let (a, b) = (self.indptr[i] as usize, self.indptr[i + 1] as usize);
        (&self.indices[a..b], &self.data[a..b])
    }

    /// Stored entries per row.
    pub fn counts(&self) -> Vec<usize> {
        self.indptr.windows(2).map(|w| (w[1] - w[0]) as usize).collect()
    }

    /// Links of each unit to other units (a self-link is not a neighbour).
    pub fn neighbour_counts(&self) -> Vec<usize> {
        (0..self.n).map(|i| self.row(i).0.iter().filter(|&&j| j as usize != i).count()).collect()
    }

    /// Units without a link to another unit: islands.
    pub fn islands(&self) -> Vec<usize> {
        (0..self.n).filter(|&i| self.row(i).0.iter().all(|&j| j as usize == i)).collect()
    }

    /// Sum of each row.
    pub fn row_sums(&self) -> Vec<f64> {
        self.map_rows(|_, _, vals| vals.iter().fold(0.0, |a, b| a + b))
    }

    /// Sum of each column.
    pub fn col_sums(&self) -> Vec<f64> {
        let mut out = vec![0.0; self.n];
        for (&c, &v) in self.indices.iter().zip(self.data) {
            out[c as usize] += v;
        }
        out
    }

    /// Apply `f(row, cols, vals)` to every row, in parallel above a size
    /// threshold. The output order is the row order whatever the thread count.
    pub fn map_rows<T, F>(&self, f: F) -> Vec<T>
    where
        T: Send,
        F: Fn(usize, &[i64], &[f64]) -> T + Sync,
    {
        let one = |i: usize| {
            let (c, v) = self.row(i);
            f(i, c, v)
        };
        if self.nnz() >= PARALLEL_MIN_NNZ {
            (0..self.n).into_par_iter().map(one).collect()
        } else {
            (0..self.n).map(one).collect()
        }
    }

    /// The same structure with new data.
    pub fn with_data(&self, data: Vec<f64>) -> Csr {
        debug_assert_eq!(data.len(), self.nnz());
        Csr { n: self.n, indptr: self.indptr.to_vec(), indices: self.indices.to_vec(), data }
    }

    /// The transpose, as canonical CSR, by a counting sort on columns:
    /// O(n + nnz), and rows come out sorted because rows are visited in order.
    pub fn transpose(&self) -> Csr {
        let n = self.n;
        let mut indptr = vec![0i64; n + 1];
        for &c in self.indices {
            indptr[c as usize + 1] += 1;
        }
        for i in 0..n {
            indptr[i + 1] += indptr[i];
        }
        let mut next: Vec<usize> = indptr[..n].iter().map(|&p| p as usize).collect();
        let mut indices = vec![0i64; self.nnz()];
        let mut data = vec![0.0; self.nnz()];
        for i in 0..n {
            let (c, v) = self.row(i);
            for (&j, &x) in c.iter().zip(v) {
                let slot = &mut next[j as usize];
                indices[*slot] = i as i64;
                data[*slot] = x;
                *slot += 1;
            }
        }
        Csr { n, indptr, indices, data }
    }

    /// W + W^T as canonical CSR (entries present in either), merging each
    /// row of W with the same row of W^T. O(n + nnz).
    pub fn plus_transpose(&self) -> Csr {
        let t = self.transpose();
        let tv = t.view();
        let parallel = self.nnz() >= PARALLEL_MIN_NNZ;
        let (indptr, indices, data) = build_rows(
            self.n,
            None,
            parallel,
            || (),
            |_, i, cols, vals| {
                sum_row(*self, tv, i, |c, x| {
                    cols.push(c);
                    vals.push(x);
                });
                Ok(())
            },
        )
        .expect("rows of a merge never fail");
        Csr { n: self.n, indptr, indices, data }
    }

    /// Whether w_ij == w_ji for every pair.
    pub fn is_symmetric(&self) -> bool {
        // each stored w_ij looked up as w_ji; stops at the first that differs
        let row_ok = |i: usize| {
            let (c, v) = self.row(i);
            c.iter().zip(v).all(|(&j, &w)| self.get(j as usize, i) == Some(w))
        };
        if self.nnz() >= PARALLEL_MIN_NNZ {
            (0..self.n()).into_par_iter().with_min_len(1 << 12).all(row_ok)
        } else {
            (0..self.n()).all(row_ok)
        }
    }

    /// The weight w_ij, if the link i -> j is stored: a binary search in row i.
    #[inline]
    pub fn get(&self, i: usize, j: usize) -> Option<f64> {
        let (c, v) = self.row(i);
        c.binary_search(&(j as i64)).ok().map(|p| v[p])
    }

    /// Visit every link (i, j, w_ij) with the reverse weight w_ji (None when
    /// j does not link i), looked up by binary search in row j. Blocks of
    /// rows run in parallel; each block folds into its own `T` from `init`,
    /// and the blocks are combined in row order with `merge`, so the result
    /// does not depend on the thread count. The rows of the neighbours are
    /// prefetched a few rows ahead (two stages: the row pointer, then the
    /// row), since they sit at random places.
    pub fn fold_reverse<T: Send>(
        &self,
        init: impl Fn() -> T + Sync,
        visit: impl Fn(&mut T, usize, usize, f64, Option<f64>) + Sync,
        merge: impl Fn(T, T) -> T + Sync,
    ) -> T {
        const FAR: usize = 8; // rows ahead whose neighbours' row pointers are fetched
        const NEAR: usize = 3; // rows ahead whose neighbours' rows are fetched
        let block = |b: usize| {
            let mut acc = init();
            let (lo, hi) = (b * REVERSE_BLOCK, ((b + 1) * REVERSE_BLOCK).min(self.n));
            for i in lo..hi {
                if i + FAR < hi {
                    for &j in self.row(i + FAR).0 {
                        prefetch(self.indptr, j as usize);
                    }
                }
                if i + NEAR < hi {
                    for &j in self.row(i + NEAR).0 {
                        prefetch(self.indices, self.indptr[j as usize] as usize);
                    }
                }
                let (c, v) = self.row(i);
                for (&j, &x) in c.iter().zip(v) {
                    let back = self.get(j as usize, i);
                    visit(&mut acc, i, j as usize, x, back);
                }
            }
            acc
        };
        let blocks = self.n.div_ceil(REVERSE_BLOCK);
        if self.nnz() >= PARALLEL_MIN_NNZ {
            (0..blocks).into_par_iter().map(block).reduce_with(&merge).unwrap_or_else(&init)
        } else {
            (0..blocks).map(block).reduce(&merge).unwrap_or_else(&init)
        }
    }

    /// Visit every link (i, j, w_ij) with its reverse weight w_ji, as
    /// [`fold_reverse`](Self::fold_reverse) does, but grouped by target:
    /// the links are first sorted by their column j into groups of
    /// [`TARGET_GROUP`] consecutive rows (a stable counting pass over blocks
    /// of rows, 16 bytes per link), and each group then looks the reverse
    /// weights up in its own rows, which stay in cache. For rows in random
    /// order this replaces a few cache misses per link with sequential
    /// traffic. `open(lo, hi)` starts the fold of the group of targets
    /// lo..hi, `close` ends it; the groups are combined in target order with
    /// `merge`, and within a group the links come in row order, so the
    /// result does not depend on the thread count. Small matrices (or more
    /// than 2^32 units) take one group.
    pub fn fold_reverse_by_target<T, U: Send>(
        &self,
        open: impl Fn(usize, usize) -> T + Sync,
        visit: impl Fn(&mut T, usize, usize, f64, Option<f64>) + Sync,
        close: impl Fn(T, usize, usize) -> U + Sync,
        merge: impl Fn(U, U) -> U,
    ) -> U {
        let n = self.n;
        if self.nnz() < PARALLEL_MIN_NNZ || n >= u32::MAX as usize {
            let mut acc = open(0, n);
            for i in 0..n {
                let (c, v) = self.row(i);
                for (&j, &x) in c.iter().zip(v) {
                    visit(&mut acc, i, j as usize, x, self.get(j as usize, i));
                }
            }
            return close(acc, 0, n);
        }
        let groups = n.div_ceil(TARGET_GROUP);
        // each block of rows: its links as (target, source, weight), grouped
        // by target group in row order, and where each group starts
        let blocks: Vec<TargetSorted> = (0..n.div_ceil(SOURCE_BLOCK))
            .into_par_iter()
            .map(|b| {
                let (lo, hi) = (b * SOURCE_BLOCK, ((b + 1) * SOURCE_BLOCK).min(n));
                let (p0, p1) = (self.indptr[lo] as usize, self.indptr[hi] as usize);
                let mut start = vec![0u32; groups + 1];
                for &j in &self.indices[p0..p1] {
                    start[j as usize / TARGET_GROUP + 1] += 1;
                }
                for g in 0..groups {
                    start[g + 1] += start[g];
                }
                let mut next = start.clone();
                let mut links = vec![(0u32, 0u32, 0.0f64); p1 - p0];
                for i in lo..hi {
                    let (c, v) = self.row(i);
                    for (&j, &x) in c.iter().zip(v) {
                        let slot = &mut next[j as usize / TARGET_GROUP];
                        links[*slot as usize] = (j as u32, i as u32, x);
                        *slot += 1;
                    }
                }
                (start, links)
            })
            .collect();
        let folded: Vec<U> = (0..groups)
            .into_par_iter()
            .map(|g| {
                let (lo, hi) = (g * TARGET_GROUP, ((g + 1) * TARGET_GROUP).min(n));
                let mut acc = open(lo, hi);
                for (start, links) in &blocks {
                    for &(j, i, x) in &links[start[g] as usize..start[g + 1] as usize] {
                        let (i, j) = (i as usize, j as usize);
                        visit(&mut acc, i, j, x, self.get(j, i));
                    }
                }
                close(acc, lo, hi)
            })
            .collect();
        folded.into_iter().reduce(merge).expect("a matrix this size has groups")
    }

    /// Whether j is a neighbour of i exactly when i is a neighbour of j
    /// (the weights themselves may differ). O(nnz log(max row)); large
    /// matrices take 16 bytes per link while the links are grouped by target.
    pub fn is_structurally_symmetric(&self) -> bool {
        self.fold_reverse_by_target(
            |_, _| true,
            |ok, _, _, _, back| *ok &= back.is_some(),
            |ok, _, _| ok,
            |a, b| a && b,
        )
    }

    /// Copy into an owned matrix.
    pub fn to_owned(&self) -> Csr {
        self.with_data(self.data.to_vec())
    }
}

impl Csr {
    /// Own buffers after the full check of [`CsrRef::validated`].
    pub fn new(n: usize, indptr: Vec<i64>, indices: Vec<i64>, data: Vec<f64>) -> Result<Self> {
        CsrRef::validated(n, &indptr, &indices, &data)?;
        Ok(Self { n, indptr, indices, data })
    }

    /// Own buffers that this crate built in canonical form (the structure is
    /// checked in debug builds; values are the builder's business: link
    /// weights are positive, other per-link facts may be 0).
    pub(crate) fn from_canonical(n: usize, indptr: Vec<i64>, indices: Vec<i64>, data: Vec<f64>) -> Self {
        debug_assert!(CsrRef::structured(n, &indptr, &indices, &data).is_ok());
        Self { n, indptr, indices, data }
    }

    /// Build from per-row lists of `(column, value)`, sorting each row by
    /// column. Rows must not repeat a column.
    pub fn from_rows(mut rows: Vec<Vec<(usize, f64)>>) -> Self {
        let n = rows.len();
        rows.iter_mut().for_each(|r| r.sort_unstable_by_key(|&(c, _)| c));
        let nnz: usize = rows.iter().map(Vec::len).sum();
        let (indptr, indices, data) = build_rows(
            n,
            None,
            nnz >= PARALLEL_MIN_NNZ,
            || (),
            |_, i, cols, vals| {
                for &(c, v) in &rows[i] {
                    cols.push(c as i64);
                    vals.push(v);
                }
                Ok(())
            },
        )
        .expect("copying rows never fails");
        Self::from_canonical(n, indptr, indices, data)
    }

    /// Own the buffers of [`build_rows`] (canonical by construction).
    pub(crate) fn from_parts(n: usize, parts: Parts<f64>) -> Self {
        let (indptr, indices, data) = parts;
        Self::from_canonical(n, indptr, indices, data)
    }

    /// Borrow.
    pub fn view(&self) -> CsrRef<'_> {
        CsrRef { n: self.n, indptr: &self.indptr, indices: &self.indices, data: &self.data }
    }

    /// Give the buffers away: (indptr, indices, data).
    pub fn into_parts(self) -> (Vec<i64>, Vec<i64>, Vec<f64>) {
        (self.indptr, self.indices, self.data)
    }

    pub fn n(&self) -> usize {
        self.n
    }
    pub fn data(&self) -> &[f64] {
        &self.data
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A scattered matrix large enough for the grouped scan (about 80,000
    /// links over 20 target groups), some links both ways, some one way.
    fn scattered(n: usize) -> Csr {
        Csr::from_rows(
            (0..n)
                .map(|i| {
                    let mut r: Vec<(usize, f64)> = [1usize, 7, 7919, 104729]
                        .iter()
                        .map(|&a| ((i * a + a / 2) % n, 1.0 + ((i * 31 + a) % 17) as f64 / 8.0))
                        .chain([((i + 1) % n, 2.0), ((i + n - 1) % n, 2.0)])
                        .filter(|&(j, _)| j != i)
                        .collect();
                    r.sort_unstable_by_key(|e| e.0);
                    r.dedup_by_key(|e| e.0);
                    r
                })
                .collect(),
        )
    }

    #[test]
    fn grouped_reverse_scan_visits_what_the_row_scan_visits() {
        let w = scattered(20_000);
        let v = w.view();
        assert!(v.nnz() >= PARALLEL_MIN_NNZ && v.n() > 4 * TARGET_GROUP);
        let key = |x: f64| x.to_bits();
        let by_rows = v.fold_reverse(
            Vec::new,
            |acc, i, j, x, b| acc.push((i, j, key(x), b.map(key))),
            |mut a, b| {
                a.extend(b);
                a
            },
        );
        let mut by_target = v.fold_reverse_by_target(
            |_, _| Vec::new(),
            |acc, i, j, x, b| acc.push((i, j, key(x), b.map(key))),
            |acc, _, _| acc,
            |mut a, b| {
                a.extend(b);
                a
            },
        );
        // the same links, each with the same reverse weight, in target-group order
        assert!(by_target.windows(2).all(|p| p[0].1 / TARGET_GROUP <= p[1].1 / TARGET_GROUP));
        by_target.sort_unstable();
        assert_eq!(by_target, by_rows);
        assert!(by_rows.iter().any(|e| e.3.is_some()) && by_rows.iter().any(|e| e.3.is_none()));
        // and one check by hand: the reverse of each link is the stored weight of the
        // transpose (common practice: w_ji of W is entry ij of W^T)
        let t = v.transpose();
        for &(i, j, _, b) in by_rows.iter().step_by(97) {
            assert_eq!(b, t.view().get(i, j).map(key));
        }
    }

    #[test]
    fn validation_rejects_unsorted_and_negative() {
        assert!(Csr::new(2, vec![0, 2, 2], vec![1, 0], vec![1.0, 1.0]).is_err());
        assert!(matches!(
            Csr::new(2, vec![0, 1, 1], vec![1], vec![-1.0]),
            Err(Error::NegativeWeight { link: Link(0, 1), .. })
        ));
        assert!(matches!(Csr::new(2, vec![0, 1, 1], vec![1], vec![f64::NAN]), Err(Error::NonFiniteWeight { .. })));
        assert!(Csr::new(2, vec![0, 1, 2], vec![1, 0], vec![1.0, 2.0]).is_ok());
    }

    #[test]
    fn rows_built_in_any_order_land_in_row_order() {
        // rows of a fixed pattern, visited in a scrambled order and in row order
        let n = 5000;
        let row = |_: &mut (), i: usize, cols: &mut Vec<i64>, vals: &mut Vec<f64>| {
            let mut mine: Vec<i64> = [1, 7, 13].iter().map(|d| ((i + d) % n) as i64).collect();
            mine.sort_unstable();
            vals.extend(mine.iter().map(|&c| (c + i as i64) as f64));
            cols.extend(mine);
            Ok(())
        };
        let visit: Vec<usize> = (0..n).map(|k| (k * 7919) % n).collect();
        let plain = build_rows(n, None, false, || (), row).unwrap();
        let scrambled = build_rows(n, Some(&visit), true, || (), row).unwrap();
        let fixed = build_fixed_rows(n, 3, &visit, true, || (), |s, _, i, c, v| row(s, i, c, v)).unwrap();
        assert_eq!(plain, scrambled);
        assert_eq!(plain, fixed);
        // by hand: row 0 links 1, 7 and 13
        assert_eq!(&plain.1[..3], &[1, 7, 13]);
        let short = build_fixed_rows(n, 4, &visit, false, || (), |s, _, i, c, v| row(s, i, c, v));
        assert!(matches!(short, Err(Error::InvalidMatrix { .. })));
        // the place in the visiting order comes along with the row
        let at = build_visited_rows(
            n,
            Some(&visit),
            true,
            || (),
            |_, k, i, c, v: &mut Vec<f64>| {
                assert_eq!(visit[k], i);
                c.push(k as i64);
                v.push(i as f64);
                Ok(())
            },
        )
        .unwrap();
        assert!(at.1.iter().zip(&at.2).all(|(&k, &i)| visit[k as usize] == i as usize));
        let twice: Vec<usize> = (0..n).map(|k| k / 2).collect();
        let bad = build_fixed_rows(n, 3, &twice, true, || (), |s, _, i, c, v| row(s, i, c, v));
        assert!(matches!(bad, Err(Error::InvalidMatrix { .. })));
    }

    #[test]
    fn transpose_and_symmetry() {
        let m = Csr::from_rows(vec![vec![(1, 2.0)], vec![], vec![(0, 1.0), (1, 3.0)]]);
        let t = m.view().transpose();
        // Dense check by hand: W = [[0,2,0],[0,0,0],[1,3,0]] so W^T rows are
        // [[0,0,1],[2,0,3],[0,0,0]].
        assert_eq!(t.indptr, vec![0, 1, 3, 3]);
        assert_eq!(t.indices, vec![2, 0, 2]);
        assert_eq!(t.data, vec![1.0, 2.0, 3.0]);
        assert!(!m.view().is_symmetric());
        let s = m.view().plus_transpose();
        assert!(s.view().is_symmetric());
        assert_eq!(s.view().islands(), Vec::<usize>::new());
        assert_eq!(m.view().islands(), vec![1]);
    }
}
