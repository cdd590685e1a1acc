//! Spatial lag: the product W x of a weights matrix with one or many columns.
//! Each output row is a weighted sum of neighbour values in stored order, so
//! the result is the same bit for bit whatever the number of threads.
//! Complexity O(nnz * columns), parallel over rows above a size threshold.

use crate::csr::{prefetch, CsrRef, PARALLEL_MIN_NNZ};
use crate::error::{first_positions, Error, Result};
use ndarray::{Array2, ArrayView2, Axis};
use rayon::prelude::*;

/// Rows holding a NaN or infinite value are an error naming the first few.
fn check_finite(x: ArrayView2<'_, f64>) -> Result<()> {
    let (count, first) = first_positions(x.nrows(), |i| x.row(i).iter().any(|v| !v.is_finite()));
    if count > 0 {
        return Err(Error::NonFiniteValues { count, first });
    }
    Ok(())
}

/// W x for one vector.
///
/// ```
/// use vicino_core::{Csr, lag::lag};
/// let w = Csr::from_rows(vec![vec![(1, 0.5), (2, 0.5)], vec![(0, 1.0)], vec![]]);
/// assert_eq!(lag(w.view(), &[1.0, 2.0, 4.0]).unwrap(), vec![3.0, 1.0, 0.0]);
/// ```
pub fn lag(w: CsrRef<'_>, x: &[f64]) -> Result<Vec<f64>> {
    if x.len() != w.n() {
        return Err(Error::LengthMismatch { what: "values", expected: w.n(), got: x.len() });
    }
    if !x.par_iter().with_min_len(1 << 14).all(|v| v.is_finite()) {
        let (count, first) = first_positions(x.len(), |i| !x[i].is_finite());
        return Err(Error::NonFiniteValues { count, first });
    }
    Ok(lag_unchecked(w, x))
}

/// How many rows ahead to prefetch neighbour values.
const AHEAD: usize = 4;

/// Rows `first..first + out.len()` of W x into `out`, in stored order within each row.
fn lag_rows(w: CsrRef<'_>, x: &[f64], first: usize, out: &mut [f64]) {
    let (indptr, indices, data) = (w.indptr(), w.indices(), w.data());
    let n = w.n();
    for (o, slot) in out.iter_mut().enumerate() {
        let i = first + o;
        if i + AHEAD < n {
            let (c, d) = (indptr[i + AHEAD] as usize, indptr[i + AHEAD + 1] as usize);
            for &j in &indices[c..d] {
                prefetch(x, j as usize);
            }
        }
        let (a, b) = (indptr[i] as usize, indptr[i + 1] as usize);
        // fold from +0.0: `sum` of an empty row would give -0.0
        *slot = indices[a..b].iter().zip(&data[a..b]).fold(0.0, |acc, (&j, &v)| acc + v * x[j as usize]);
    }
}

/// W x without checks (x has length n and is finite).
pub fn lag_unchecked(w: CsrRef<'_>, x: &[f64]) -> Vec<f64> {
    const CHUNK: usize = 2048;
    let mut out = vec![0.0; w.n()];
    if w.nnz() >= PARALLEL_MIN_NNZ {
        out.par_chunks_mut(CHUNK).enumerate().for_each(|(b, chunk)| lag_rows(w, x, b * CHUNK, chunk));
    } else {
        lag_rows(w, x, 0, &mut out);
    }
    out
}

/// W X for an (n, m) array of m columns.
pub fn lag_columns(w: CsrRef<'_>, x: ArrayView2<'_, f64>) -> Result<Array2<f64>> {
    let (rows, cols) = x.dim();
    if rows != w.n() {
        return Err(Error::LengthMismatch { what: "values", expected: w.n(), got: rows });
    }
    check_finite(x)?;
    let mut out = Array2::<f64>::zeros((rows, cols));
    let fill = |i: usize, mut o: ndarray::ArrayViewMut1<'_, f64>| {
        let (c, v) = w.row(i);
        for (&j, &wij) in c.iter().zip(v) {
            o.scaled_add(wij, &x.row(j as usize));
        }
    };
    if w.nnz() * cols.max(1) >= PARALLEL_MIN_NNZ {
        out.axis_iter_mut(Axis(0)).into_par_iter().enumerate().for_each(|(i, o)| fill(i, o));
    } else {
        for (i, o) in out.axis_iter_mut(Axis(0)).enumerate() {
            fill(i, o);
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Csr;

    #[test]
    fn columns_match_single() {
        let w = Csr::from_rows(vec![vec![(1, 0.5), (2, 0.5)], vec![(0, 1.0)], vec![(0, 2.0)]]);
        let x = ndarray::array![[1.0, 10.0], [2.0, 20.0], [4.0, 40.0]];
        let y = lag_columns(w.view(), x.view()).unwrap();
        // by hand: rows 0.5*2+0.5*4 = 3, 1*1 = 1, 2*1 = 2
        assert_eq!(y, ndarray::array![[3.0, 30.0], [1.0, 10.0], [2.0, 20.0]]);
        assert!(lag(w.view(), &[1.0, f64::NAN, 0.0]).is_err());
        assert!(lag(w.view(), &[1.0]).is_err());
    }
}
