//! Spatial lag: the product W x of a weights matrix with one or many columns.
//! Each output value is a weighted sum of neighbour values in stored order,
//! started from +0.0, so the result is the same bit for bit whatever the
//! number of threads, and a column lagged alone or among others gives the
//! same numbers. Complexity O(nnz * columns), parallel over blocks of rows
//! above a size threshold; the neighbours' values of rows a few rows ahead
//! are prefetched, since they sit at random places.

use crate::csr::{locality_order, prefetch, CsrRef, PARALLEL_MIN_NNZ};
use crate::error::{Error, Result, Units};
use rayon::prelude::*;

/// How many rows ahead to prefetch neighbour values.
const AHEAD: usize = 4;
/// Rows per parallel block.
const CHUNK: usize = 2048;

/// W X for `x` holding n rows of `m` values each (row-major, `m >= 1`).
///
/// ```
/// use vicino_core::{Csr, lag::lag};
/// let w = Csr::from_rows(vec![vec![(1, 0.5), (2, 0.5)], vec![(0, 1.0)], vec![]]);
/// assert_eq!(lag(w.view(), &[1.0, 2.0, 4.0], 1).unwrap(), vec![3.0, 1.0, 0.0]);
/// // two columns: (1, 10), (2, 20), (4, 40)
/// let y = lag(w.view(), &[1.0, 10.0, 2.0, 20.0, 4.0, 40.0], 2).unwrap();
/// assert_eq!(y, vec![3.0, 30.0, 1.0, 10.0, 0.0, 0.0]);
/// ```
pub fn lag(w: CsrRef<'_>, x: &[f64], m: usize) -> Result<Vec<f64>> {
    checked(w.n(), x, m, || lag_checked(w, x, m))
}

/// The checks of a product with n units: `x` holds n rows of m finite
/// values, and `product` (W X and whether all of it is finite) did not overflow.
fn checked(n: usize, x: &[f64], m: usize, product: impl FnOnce() -> (Vec<f64>, bool)) -> Result<Vec<f64>> {
    if m == 0 || x.len() != n * m {
        return Err(Error::LengthMismatch { what: "values", expected: n, got: x.len() / m.max(1) });
    }
    let finite = |x: &[f64]| x.par_iter().with_min_len(1 << 14).all(|v| v.is_finite());
    if !finite(x) {
        let units = Units::find(n, |i| x[i * m..(i + 1) * m].iter().any(|v| !v.is_finite()));
        return Err(Error::NonFiniteValues { units });
    }
    let (out, all_finite) = product();
    if !all_finite {
        let units = Units::find(n, |i| out[i * m..(i + 1) * m].iter().any(|v| !v.is_finite()));
        return Err(Error::Overflow {
            what: "the spatial lag",
            units,
            advice: "rescale the values (or the weights) before taking the lag",
        });
    }
    Ok(out)
}

/// Rows `first..` of W X into `out` (whole rows of m values); whether all
/// of them are finite (a lag of finite values can still overflow).
fn lag_rows(w: CsrRef<'_>, x: &[f64], m: usize, first: usize, out: &mut [f64]) -> bool {
    let (indptr, indices, data) = (w.indptr(), w.indices(), w.data());
    let n = w.n();
    let mut finite = true;
    for (o, slot) in out.chunks_exact_mut(m).enumerate() {
        let i = first + o;
        if i + AHEAD < n {
            let (c, d) = (indptr[i + AHEAD] as usize, indptr[i + AHEAD + 1] as usize);
            for &j in &indices[c..d] {
                prefetch(x, j as usize * m);
            }
        }
        let (a, b) = (indptr[i] as usize, indptr[i + 1] as usize);
        if m == 1 {
            // fold from +0.0: `sum` of an empty row would give -0.0
            slot[0] = indices[a..b].iter().zip(&data[a..b]).fold(0.0, |acc, (&j, &v)| acc + v * x[j as usize]);
            finite &= slot[0].is_finite();
        } else {
            slot.fill(0.0);
            for (&j, &v) in indices[a..b].iter().zip(&data[a..b]) {
                let xj = &x[j as usize * m..(j as usize + 1) * m];
                for (s, &xv) in slot.iter_mut().zip(xj) {
                    *s += v * xv;
                }
            }
            finite &= slot.iter().all(|v| v.is_finite());
        }
    }
    finite
}

/// W X (x holds n rows of m finite values), and whether every output value is finite.
fn lag_checked(w: CsrRef<'_>, x: &[f64], m: usize) -> (Vec<f64>, bool) {
    let mut out = vec![0.0; w.n() * m];
    let finite = if w.nnz() * m >= PARALLEL_MIN_NNZ {
        out.par_chunks_mut(CHUNK * m)
            .enumerate()
            .map(|(b, chunk)| lag_rows(w, x, m, b * CHUNK, chunk))
            .reduce(|| true, |a, b| a && b)
    } else {
        lag_rows(w, x, m, 0, &mut out)
    };
    (out, finite)
}

/// W X without checks (x holds n rows of m finite values).
pub fn lag_unchecked(w: CsrRef<'_>, x: &[f64], m: usize) -> Vec<f64> {
    lag_checked(w, x, m).0
}

/// Weights of a packed matrix: one per row when every link of each row
/// has the same weight (binary and row-standardized binary weights), else
/// one per link.
#[derive(Debug, Clone)]
enum Spread {
    Row(Vec<f64>),
    Link(Vec<f64>),
}

/// W packed for repeated products: the rows in a breadth-first order of
/// the links (so that the neighbour values gathered by consecutive rows
/// are mostly still in cache), 32-bit row pointers and column positions,
/// and one weight per row where the rows allow it. The products are the
/// same bit for bit as [`lag`]'s: each row keeps its stored order and its
/// sum starts from +0.0. For 8 links per row it reads about 40 % of the
/// bytes of the general form (4 + 8/8 bytes per link instead of 16).
#[derive(Debug, Clone)]
pub struct Packed {
    /// `order[k]` = the original row computed k-th
    order: Vec<u32>,
    /// row pointers of the rows in `order`
    indptr: Vec<u32>,
    /// original column positions, each row in its stored order
    indices: Vec<u32>,
    weights: Spread,
}

impl Packed {
    /// Pack `w`; None when its units or links do not fit 32-bit positions.
    ///
    /// ```
    /// use vicino_core::{Csr, lag::{lag, Packed}};
    /// let w = Csr::from_rows(vec![vec![(1, 0.5), (2, 0.5)], vec![(0, 1.0)], vec![]]);
    /// let p = Packed::new(w.view()).unwrap();
    /// assert_eq!(p.lag(&[1.0, 2.0, 4.0], 1).unwrap(), lag(w.view(), &[1.0, 2.0, 4.0], 1).unwrap());
    /// ```
    pub fn new(w: CsrRef<'_>) -> Option<Self> {
        let (n, nnz) = (w.n(), w.nnz());
        if n >= u32::MAX as usize || nnz >= u32::MAX as usize {
            return None;
        }
        let order = locality_order(n, |u| w.row(u).0.iter().map(|&j| j as usize));
        let mut indptr = Vec::with_capacity(n + 1);
        indptr.push(0u32);
        let mut indices = Vec::with_capacity(nnz);
        for &u in &order {
            indices.extend(w.row(u as usize).0.iter().map(|&j| j as u32));
            indptr.push(indices.len() as u32);
        }
        let uniform = (0..n).all(|i| {
            let v = w.row(i).1;
            v.iter().all(|&x| x.to_bits() == v[0].to_bits())
        });
        let weights = if uniform {
            Spread::Row(order.iter().map(|&u| w.row(u as usize).1.first().copied().unwrap_or(0.0)).collect())
        } else {
            Spread::Link(order.iter().flat_map(|&u| w.row(u as usize).1.iter().copied()).collect())
        };
        Some(Self { order, indptr, indices, weights })
    }

    /// Number of units.
    pub fn n(&self) -> usize {
        self.order.len()
    }

    /// Bytes held (what one product reads of the matrix).
    pub fn bytes(&self) -> usize {
        let w = match &self.weights {
            Spread::Row(v) | Spread::Link(v) => v.len(),
        };
        4 * (self.order.len() + self.indptr.len() + self.indices.len()) + 8 * w
    }

    /// W X for `x` holding n rows of `m` values each, with the checks of [`lag`].
    pub fn lag(&self, x: &[f64], m: usize) -> Result<Vec<f64>> {
        checked(self.n(), x, m, || self.product(x, m))
    }

    /// W X (x holds n rows of m finite values), and whether every output value is finite.
    fn product(&self, x: &[f64], m: usize) -> (Vec<f64>, bool) {
        let n = self.n();
        let mut out = vec![0.0; n * m];
        let dst = Scatter(out.as_mut_ptr());
        let block = |b: usize| {
            let (lo, hi) = (b * CHUNK, ((b + 1) * CHUNK).min(n));
            let mut finite = true;
            let mut slot = vec![0.0; m];
            for k in lo..hi {
                if k + AHEAD < hi {
                    let (c, d) = (self.indptr[k + AHEAD] as usize, self.indptr[k + AHEAD + 1] as usize);
                    for &j in &self.indices[c..d] {
                        prefetch(x, j as usize * m);
                    }
                }
                let (a, b) = (self.indptr[k] as usize, self.indptr[k + 1] as usize);
                let cols = &self.indices[a..b];
                match &self.weights {
                    Spread::Row(v) => row_sum(cols, std::iter::repeat(v[k]), x, m, &mut slot),
                    Spread::Link(v) => row_sum(cols, v[a..b].iter().copied(), x, m, &mut slot),
                }
                finite &= slot.iter().all(|v| v.is_finite());
                let row = self.order[k] as usize;
                // SAFETY: `order` is a permutation of 0..n, so each row's m
                // slots of `out` (n * m values) are written by one block only.
                unsafe { std::ptr::copy_nonoverlapping(slot.as_ptr(), dst.row(row, m), m) };
            }
            finite
        };
        let blocks = n.div_ceil(CHUNK);
        let finite = if self.indices.len() * m >= PARALLEL_MIN_NNZ {
            (0..blocks).into_par_iter().map(block).reduce(|| true, |a, b| a && b)
        } else {
            (0..blocks).map(block).filter(|&finite| !finite).count() == 0 // every block runs
        };
        (out, finite)
    }
}

/// The output buffer of [`Packed::product`], written at disjoint rows by many threads.
#[derive(Clone, Copy)]
struct Scatter(*mut f64);
// SAFETY: the threads write disjoint rows (see `Packed::product`).
unsafe impl Send for Scatter {}
unsafe impl Sync for Scatter {}

impl Scatter {
    /// The first of the m slots of row `row` (a method, so that closures
    /// capture the whole `Scatter`, not its raw pointer).
    #[inline(always)]
    fn row(self, row: usize, m: usize) -> *mut f64 {
        self.0.wrapping_add(row * m)
    }
}

/// One row of W X into `slot`: sum over the links in stored order, from +0.0.
#[inline(always)]
fn row_sum(cols: &[u32], weights: impl Iterator<Item = f64>, x: &[f64], m: usize, slot: &mut [f64]) {
    if m == 1 {
        slot[0] = cols.iter().zip(weights).fold(0.0, |acc, (&j, v)| acc + v * x[j as usize]);
    } else {
        slot.fill(0.0);
        for (&j, v) in cols.iter().zip(weights) {
            let xj = &x[j as usize * m..(j as usize + 1) * m];
            for (s, &xv) in slot.iter_mut().zip(xj) {
                *s += v * xv;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Csr;

    #[test]
    fn columns_match_single() {
        let w = Csr::from_rows(vec![vec![(1, 0.5), (2, 0.5)], vec![(0, 1.0)], vec![(0, 2.0)]]);
        let x = [1.0, 10.0, 2.0, 20.0, 4.0, 40.0];
        let y = lag(w.view(), &x, 2).unwrap();
        // by hand: rows 0.5*2+0.5*4 = 3, 1*1 = 1, 2*1 = 2
        assert_eq!(y, vec![3.0, 30.0, 1.0, 10.0, 2.0, 20.0]);
        assert!(lag(w.view(), &[1.0, f64::NAN, 0.0], 1).is_err());
        assert!(lag(w.view(), &[1.0], 1).is_err());
        // 2 * 1e308 overflows
        assert!(matches!(lag(w.view(), &[1e308, 0.0, 0.0], 1), Err(Error::Overflow { .. })));
    }
}
