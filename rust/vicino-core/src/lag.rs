//! Spatial lag: the product W x of a weights matrix with one or many columns.
//! Each output value is a weighted sum of neighbour values in stored order,
//! started from +0.0, so the result is the same bit for bit whatever the
//! number of threads, and a column lagged alone or among others gives the
//! same numbers. Complexity O(nnz * columns), parallel over blocks of rows
//! above a size threshold; the neighbours' values of rows a few rows ahead
//! are prefetched, since they sit at random places.

use crate::csr::{prefetch, CsrRef, PARALLEL_MIN_NNZ};
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
    let n = w.n();
    if m == 0 || x.len() != n * m {
        return Err(Error::LengthMismatch { what: "values", expected: n, got: x.len() / m.max(1) });
    }
    let finite = |x: &[f64]| x.par_iter().with_min_len(1 << 14).all(|v| v.is_finite());
    if !finite(x) {
        let units = Units::find(n, |i| x[i * m..(i + 1) * m].iter().any(|v| !v.is_finite()));
        return Err(Error::NonFiniteValues { units });
    }
    let (out, all_finite) = lag_checked(w, x, m);
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
