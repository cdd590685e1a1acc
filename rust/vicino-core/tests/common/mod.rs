// Dense oracles index their matrices by (i, j), as the formulas do.
#![allow(clippy::needless_range_loop)]
//! Helpers shared by the integration tests.

use vicino_core::CsrRef;

/// The matrix as dense rows (duplicate entries, which canonical CSR never
/// holds, would be summed).
pub fn dense(w: CsrRef<'_>) -> Vec<Vec<f64>> {
    let n = w.n();
    let mut a = vec![vec![0.0; n]; n];
    for (i, row) in a.iter_mut().enumerate() {
        let (c, v) = w.row(i);
        for (&j, &x) in c.iter().zip(v) {
            row[j as usize] += x;
        }
    }
    a
}
