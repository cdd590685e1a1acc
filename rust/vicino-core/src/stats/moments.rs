//! Weight sums of Cliff and Ord (1981), for any (also asymmetric) W:
//! S0 = sum_ij w_ij, S1 = 1/2 sum_ij (w_ij + w_ji)^2,
//! S2 = sum_i (w_i. + w_.i)^2, with w_i. the row sums and w_.i the column sums.
//!
//! The quadratic form z' W z equals z' S z / 2 with S = W + W^T, so it is
//! evaluated on the upper triangle of S only: about half the links of a
//! symmetric W. O(nnz).

use crate::csr::CsrRef;

/// Cliff-Ord weight sums.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WeightSums {
    pub s0: f64,
    pub s1: f64,
    pub s2: f64,
}

/// The upper triangle of S = W + W^T, with the diagonal halved, in compact
/// row form: z' W z = sum_i z_i sum_{j in row i} s_ij z_j.
#[derive(Debug, Clone)]
pub struct QuadraticForm {
    indptr: Vec<usize>,
    indices: Vec<u32>,
    data: Vec<f64>,
}

impl QuadraticForm {
    /// z' W z for a vector of length n.
    #[inline]
    pub fn eval(&self, z: &[f64]) -> f64 {
        let mut total = 0.0;
        for i in 0..self.indptr.len() - 1 {
            let (a, b) = (self.indptr[i], self.indptr[i + 1]);
            if a == b {
                continue;
            }
            let mut acc = 0.0;
            for (&j, &s) in self.indices[a..b].iter().zip(&self.data[a..b]) {
                acc += s * z[j as usize];
            }
            total += z[i] * acc;
        }
        total
    }
}

/// Weight sums and the quadratic form of W, from one pass over W + W^T.
pub fn weight_sums(w: CsrRef<'_>) -> (WeightSums, QuadraticForm) {
    let s = w.plus_transpose();
    let sv = s.view();
    let s0: f64 = w.data().iter().sum();
    let s1 = 0.5 * sv.data().iter().map(|v| v * v).sum::<f64>();
    let rows = w.row_sums();
    let cols = w.col_sums();
    let s2 = rows.iter().zip(&cols).map(|(r, c)| (r + c) * (r + c)).sum();
    let n = w.n();
    let mut indptr = Vec::with_capacity(n + 1);
    indptr.push(0);
    let mut indices = Vec::new();
    let mut data = Vec::new();
    for i in 0..n {
        let (c, v) = sv.row(i);
        for (&j, &x) in c.iter().zip(v) {
            let j = j as usize;
            if j > i {
                indices.push(j as u32);
                data.push(x);
            } else if j == i {
                indices.push(j as u32);
                data.push(0.5 * x);
            }
        }
        indptr.push(indices.len());
    }
    (WeightSums { s0, s1, s2 }, QuadraticForm { indptr, indices, data })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Csr;

    #[test]
    fn sums_by_hand() {
        // W = [[0,1,0],[0,0,2],[3,0,0]]: S0 = 6; W + W^T has off-diagonal
        // pairs (1,0),(2,0)->... entries 1,3,1,2,3,2 so S1 = (1+9+1+4+9+4)/2 = 14;
        // row sums 1,2,3 and column sums 3,1,2 give S2 = 16+9+25 = 50.
        let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(2, 2.0)], vec![(0, 3.0)]]);
        let (s, q) = weight_sums(w.view());
        assert_eq!((s.s0, s.s1, s.s2), (6.0, 14.0, 50.0));
        // z'Wz = z0 z1 + 2 z1 z2 + 3 z2 z0
        let z = [1.0, -2.0, 0.5];
        assert!((q.eval(&z) - (1.0 * -2.0 + 2.0 * -2.0 * 0.5 + 3.0 * 0.5 * 1.0)).abs() < 1e-15);
    }
}
