//! Weight sums of Cliff and Ord (1981), for any (also asymmetric) W:
//! S0 = sum_ij w_ij, S1 = 1/2 sum_ij (w_ij + w_ji)^2,
//! S2 = sum_i (w_i. + w_.i)^2, with w_i. the row sums and w_.i the column sums.
//!
//! The quadratic form z' W z equals z' S z / 2 with S = W + W^T, so it is
//! evaluated on the upper triangle of S only: about half the links of a
//! symmetric W. Units are first renumbered in breadth-first order over S
//! (in the spirit of Cuthill and McKee 1969), so that a unit's neighbours
//! sit close to it in memory: permutation tests evaluate the form hundreds
//! of times, and gathering values from nearby addresses is several times
//! faster than from random ones. O(n + nnz).

use crate::csr::{locality_order, sum_row, CsrRef};

/// Cliff-Ord weight sums.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WeightSums {
    pub s0: f64,
    pub s1: f64,
    pub s2: f64,
}

/// The upper triangle of S = W + W^T, with the diagonal halved, as a flat
/// list of (row, column, weight) with units renumbered for locality:
/// z' W z = sum_e s_e y_row(e) y_col(e), where y = z in the form's own order
/// (see [`QuadraticForm::local`]). One flat loop with eight running sums
/// avoids the branch misses of short rows and the latency of one long sum.
#[derive(Debug, Clone)]
pub struct QuadraticForm {
    /// `order[new] = old` unit position
    order: Vec<u32>,
    rows: Vec<u32>,
    cols: Vec<u32>,
    data: Vec<f64>,
}

impl QuadraticForm {
    /// The units in the form's order: `order()[k]` is the original position
    /// of the unit numbered k here.
    pub fn order(&self) -> &[u32] {
        &self.order
    }

    /// Values given in the original unit order, rearranged into the form's order.
    pub fn local(&self, z: &[f64]) -> Vec<f64> {
        self.order.iter().map(|&u| z[u as usize]).collect()
    }

    /// z' W z for values already in the form's order.
    #[inline]
    pub fn eval_local(&self, y: &[f64]) -> f64 {
        const LANES: usize = 8;
        let mut acc = [0.0f64; LANES];
        let full = self.data.len() / LANES * LANES;
        let (rows, cols, data) = (&self.rows[..full], &self.cols[..full], &self.data[..full]);
        for ((r, c), s) in rows.chunks_exact(LANES).zip(cols.chunks_exact(LANES)).zip(data.chunks_exact(LANES)) {
            for k in 0..LANES {
                acc[k] += s[k] * y[r[k] as usize] * y[c[k] as usize];
            }
        }
        for e in full..self.data.len() {
            acc[e - full] += self.data[e] * y[self.rows[e] as usize] * y[self.cols[e] as usize];
        }
        ((acc[0] + acc[1]) + (acc[2] + acc[3])) + ((acc[4] + acc[5]) + (acc[6] + acc[7]))
    }

    /// [`eval_local`](Self::eval_local) of two vectors in one pass over the
    /// links, sharing the loads of indices and weights. Each result is the
    /// same bit for bit as `eval_local` of that vector alone.
    #[inline]
    pub fn eval_local_pair(&self, y: &[f64], x: &[f64]) -> (f64, f64) {
        const LANES: usize = 8;
        let mut acc = [0.0f64; LANES];
        let mut bcc = [0.0f64; LANES];
        let full = self.data.len() / LANES * LANES;
        let (rows, cols, data) = (&self.rows[..full], &self.cols[..full], &self.data[..full]);
        for ((r, c), s) in rows.chunks_exact(LANES).zip(cols.chunks_exact(LANES)).zip(data.chunks_exact(LANES)) {
            for k in 0..LANES {
                let (i, j) = (r[k] as usize, c[k] as usize);
                acc[k] += s[k] * y[i] * y[j];
                bcc[k] += s[k] * x[i] * x[j];
            }
        }
        for e in full..self.data.len() {
            let (i, j) = (self.rows[e] as usize, self.cols[e] as usize);
            acc[e - full] += self.data[e] * y[i] * y[j];
            bcc[e - full] += self.data[e] * x[i] * x[j];
        }
        let sum = |a: [f64; LANES]| ((a[0] + a[1]) + (a[2] + a[3])) + ((a[4] + a[5]) + (a[6] + a[7]));
        (sum(acc), sum(bcc))
    }

    /// z' W z for values in the original unit order.
    pub fn eval(&self, z: &[f64]) -> f64 {
        self.eval_local(&self.local(z))
    }
}

/// Weight sums of W without forming W + W^T: S1 = sum w_ij^2 + sum w_ij w_ji
/// and S2 = sum_j (w_j. + w_.j)^2, in one pass over the links grouped by
/// their target ([`CsrRef::fold_reverse_by_target`]): each group of target
/// rows finds the reverse weights and its column sums in its own rows, and
/// adds its part of S0 and S2 from them. O(nnz log(max row)).
pub fn sums(w: CsrRef<'_>) -> WeightSums {
    struct Group {
        lo: usize,
        squares: f64,
        cross: f64,
        cols: Vec<f64>,
    }
    let (s0, squares, cross, s2) = w.fold_reverse_by_target(
        |lo, hi| Group { lo, squares: 0.0, cross: 0.0, cols: vec![0.0; hi - lo] },
        |g, _, j, x, back| {
            g.squares += x * x;
            g.cross += back.map_or(0.0, |b| x * b);
            g.cols[j - g.lo] += x;
        },
        |g, lo, hi| {
            let (mut s0, mut s2) = (0.0, 0.0);
            for (j, c) in (lo..hi).zip(&g.cols) {
                let r: f64 = w.row(j).1.iter().sum();
                s0 += r;
                s2 += (r + c) * (r + c);
            }
            (s0, g.squares, g.cross, s2)
        },
        |a, b| (a.0 + b.0, a.1 + b.1, a.2 + b.2, a.3 + b.3),
    );
    WeightSums { s0, s1: squares + cross, s2 }
}

impl QuadraticForm {
    /// The form of W: the upper triangle of W + W^T, units renumbered for
    /// locality. The rows of W + W^T are merged from W and W^T as they are
    /// needed, never stored: the extra memory is W^T and the form itself.
    pub fn new(w: CsrRef<'_>) -> Self {
        let t = w.transpose();
        let tv = t.view();
        let n = w.n();
        let order = locality_order(n, |u| {
            let mut cols = Vec::new();
            sum_row(w, tv, u, |c, _| cols.push(c as usize));
            cols.into_iter()
        });
        let mut rank = vec![0u32; n];
        for (k, &u) in order.iter().enumerate() {
            rank[u as usize] = k as u32;
        }
        let cap = w.nnz() + n;
        let (mut qr, mut qc, mut qd) = (Vec::with_capacity(cap), Vec::with_capacity(cap), Vec::with_capacity(cap));
        for (i, &u) in order.iter().enumerate() {
            sum_row(w, tv, u as usize, |c, x| {
                let j = rank[c as usize] as usize;
                if j >= i {
                    qr.push(i as u32);
                    qc.push(j as u32);
                    qd.push(if j == i { 0.5 * x } else { x });
                }
            });
        }
        qr.shrink_to_fit();
        qc.shrink_to_fit();
        qd.shrink_to_fit();
        QuadraticForm { order, rows: qr, cols: qc, data: qd }
    }
}

/// Weight sums and the quadratic form of W.
pub fn weight_sums(w: CsrRef<'_>) -> (WeightSums, QuadraticForm) {
    (sums(w), QuadraticForm::new(w))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Csr;

    #[test]
    fn pair_equals_single_bit_for_bit() {
        let rows: Vec<Vec<(usize, f64)>> =
            (0..40).map(|i| vec![((i * 7 + 3) % 40, 0.3), ((i * 11 + 1) % 40, 1.7)]).collect();
        let w = Csr::from_rows(
            rows.into_iter()
                .map(|r| {
                    let mut r = r;
                    r.dedup_by_key(|e| e.0);
                    r
                })
                .collect(),
        );
        let (_, q) = weight_sums(w.view());
        let y: Vec<f64> = (0..40).map(|i| (i as f64 * 0.37).sin()).collect();
        let x: Vec<f64> = (0..40).map(|i| (i as f64 * 1.3).cos()).collect();
        let (a, b) = q.eval_local_pair(&y, &x);
        assert_eq!(a.to_bits(), q.eval_local(&y).to_bits());
        assert_eq!(b.to_bits(), q.eval_local(&x).to_bits());
    }

    #[test]
    fn grouped_sums_equal_their_definitions_on_a_large_matrix() {
        // 40,000 units of 3 scattered links each: above the parallel threshold,
        // so the sums run over many target groups
        let n = 40_000;
        let w = Csr::from_rows(
            (0..n)
                .map(|i| {
                    let mut r: Vec<(usize, f64)> =
                        [1usize, 3, 8191].iter().map(|&a| ((i * a + 5) % n, 0.25 + (i % 5) as f64)).collect();
                    r.retain(|e| e.0 != i);
                    r.sort_unstable_by_key(|e| e.0);
                    r.dedup_by_key(|e| e.0);
                    r
                })
                .collect(),
        );
        let v = w.view();
        // Cliff and Ord (1981): S1 = 1/2 sum_ij (w_ij + w_ji)^2 over W + W^T,
        // S2 = sum_i (w_i. + w_.i)^2
        let s = v.plus_transpose();
        let s1: f64 = s.view().data().iter().map(|x| x * x).sum::<f64>() / 2.0;
        let (rows, cols) = (v.row_sums(), v.col_sums());
        let s2: f64 = rows.iter().zip(&cols).map(|(r, c)| (r + c) * (r + c)).sum();
        let s0: f64 = v.data().iter().sum();
        let got = sums(v);
        for (a, b) in [(got.s0, s0), (got.s1, s1), (got.s2, s2)] {
            assert!((a - b).abs() <= 1e-12 * b, "{a} vs {b}");
        }
    }

    #[test]
    fn sums_by_hand() {
        // W = [[0,1,0],[0,0,2],[3,0,0]]: S0 = 6; W + W^T has off-diagonal
        // pairs (1,0),(2,0)->... entries 1,3,1,2,3,2 so S1 = (1+9+1+4+9+4)/2 = 14;
        // row sums 1,2,3 and column sums 3,1,2 give S2 = 16+9+25 = 50.
        let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(2, 2.0)], vec![(0, 3.0)]]);
        let (s, q) = weight_sums(w.view());
        assert_eq!((s.s0, s.s1, s.s2), (6.0, 14.0, 50.0));
        // both directions stored: W = [[0,1],[3,0]] gives S1 = (1+3)^2 = 16 (Cliff and Ord 1981)
        let both = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 3.0)]]);
        assert_eq!(sums(both.view()).s1, 16.0);
        // z'Wz = z0 z1 + 2 z1 z2 + 3 z2 z0
        let z = [1.0, -2.0, 0.5];
        assert!((q.eval(&z) - (1.0 * -2.0 + 2.0 * -2.0 * 0.5 + 3.0 * 0.5 * 1.0)).abs() < 1e-15);
    }
}
