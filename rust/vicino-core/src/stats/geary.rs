//! Global Geary's C (Geary 1954) with the moments of Cliff and Ord (1981):
//!
//! C = (n - 1) sum_ij w_ij (x_i - x_j)^2 / (2 S0 sum_i z_i^2), z = x - mean(x);
//! E[C] = 1 under both assumptions.
//!
//! Normality: Var = ((2 S1 + S2)(n - 1) - 4 S0^2) / (2 (n + 1) S0^2).
//! Randomization, with b2 = n sum z^4 / (sum z^2)^2:
//! Var = [(n-1) S1 (n^2 - 3n + 3 - (n-1) b2)
//!        - (n-1) S2 (n^2 + 3n - 6 - (n^2 - n + 2) b2) / 4
//!        + S0^2 (n^2 - 3 - (n-1)^2 b2)] / (n (n-2) (n-3) S0^2).
//!
//! Positive autocorrelation (alike neighbours) makes C small: C < 1. The
//! `alternative` is read in terms of the statistic, as in scipy.stats:
//! `greater` counts draws with C_r >= C (negative autocorrelation), `less`
//! draws with C_r <= C (positive autocorrelation), `two-sided`
//! |C_r - 1| >= |C - 1|.
//!
//! The numerator is evaluated as sum_i d_i z_i^2 - 2 z'Wz with d_i the row
//! plus column sum of unit i, so that the permutations share moran's fast
//! quadratic form ([`QuadraticForm`]): O(n + nnz/2) per draw, draws in
//! parallel on their own seeded streams (see [`super::permutation`]); draw r
//! shuffles the centred values in the form's locality order with
//! `shuffle_into(stream(seed, r), ..)`, the same draws as moran's.

use super::global::{centred, permutation_summary, permuted, Analytic, Permutation};
use super::moments::{weight_sums, QuadraticForm, WeightSums};
use super::Alternative;
use crate::csr::{Csr, CsrRef};
use crate::error::{Error, Result, Units};
use crate::frame::{moderate, times_pow2};
use crate::guard::Guard;

/// Global Geary's C and its inference.
#[derive(Debug, Clone, PartialEq)]
pub struct Geary {
    pub statistic: f64,
    pub expected: f64,
    pub n: usize,
    pub sums: WeightSums,
    pub kurtosis: f64,
    pub normality: Analytic,
    pub randomization: Analytic,
    pub permutation: Option<Permutation>,
}

/// Weights checked and summarized for a global statistic: no self-links,
/// some weight, moderated by a power of two 2^e (the sums are those of the
/// moderated weights; scale back with `e`).
pub struct Prepared {
    pub n: usize,
    pub e: i32,
    pub sums: WeightSums,
    pub form: QuadraticForm,
    /// row plus column sum of each unit, in the form's order
    pub degrees: Vec<f64>,
}

impl Prepared {
    /// Check `w` for `what` (at least `need` units, no self-links, some weight).
    pub fn new(w: CsrRef<'_>, what: &'static str, need: usize) -> Result<Prepared> {
        let n = w.n();
        if n < need {
            return Err(Error::TooFewUnits { what, need, n });
        }
        let units = Units::find(n, |i| w.row(i).0.iter().any(|&j| j as usize == i));
        if !units.is_empty() {
            return Err(Error::SelfLinks { what, units });
        }
        let (moderated, e): (Option<Csr>, i32) = moderate(w);
        let w = moderated.as_ref().map_or(w, |m| m.view());
        let (sums, form) = weight_sums(w);
        if !(sums.s0 > 0.0) {
            return Err(Error::NoWeight { what });
        }
        let (rows, cols) = (w.row_sums(), w.col_sums());
        let degrees = form.order().iter().map(|&u| rows[u as usize] + cols[u as usize]).collect();
        Ok(Prepared { n, e, sums, form, degrees })
    }

    /// sum_i d_i y_i^2 for values in the form's order.
    #[inline]
    pub fn degree_square_sum(&self, y: &[f64]) -> f64 {
        self.degrees.iter().zip(y).map(|(d, v)| d * v * v).sum()
    }

    /// The weight sums of the weights as given (they may overflow; the statistics do not).
    pub fn real_sums(&self) -> WeightSums {
        let (s, e) = (self.sums, self.e);
        WeightSums { s0: times_pow2(s.s0, e), s1: times_pow2(s.s1, 2 * e), s2: times_pow2(s.s2, 2 * e) }
    }

    /// sum_i d_i y_i for values in the form's order.
    #[inline]
    pub fn degree_sum(&self, y: &[f64]) -> f64 {
        self.degrees.iter().zip(y).map(|(d, v)| d * v).sum()
    }
}

/// Global Geary's C of `x` under weights `w`.
///
/// ```
/// use vicino_core::{Csr, Guard, stats::{geary::geary, Alternative}};
/// // a path 0-1-2-3 with a trend: alike neighbours, C well below 1
/// let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0), (3, 1.0)], vec![(2, 1.0)]]);
/// let c = geary(w.view(), &[1.0, 2.0, 3.0, 4.0], 0, 1, Alternative::Less, &Guard::unlimited()).unwrap();
/// // (n - 1) sum_ij w_ij (x_i - x_j)^2 / (2 S0 sum z^2) = 3 * 6 / (2 * 6 * 5)
/// assert!((c.statistic - 0.3).abs() < 1e-12);
/// ```
pub fn geary(
    w: CsrRef<'_>,
    x: &[f64],
    permutations: usize,
    seed: u64,
    alt: Alternative,
    guard: &Guard,
) -> Result<Geary> {
    let p = Prepared::new(w, "Geary's C", 4)?;
    let z = centred(w, x)?;
    let n = p.n as f64;
    let m2: f64 = z.iter().map(|v| v * v).sum();
    let m4: f64 = z.iter().map(|v| v.powi(4)).sum();
    let WeightSums { s0, s1, s2 } = p.sums;
    let scale = (n - 1.0) / (2.0 * s0 * m2);
    let q = &p.form;
    let y = q.local(&z);
    let stat = |y: &[f64], form: f64| scale * (p.degree_square_sum(y) - 2.0 * form);
    let statistic = stat(&y, q.eval_local(&y));
    let var_norm = ((2.0 * s1 + s2) * (n - 1.0) - 4.0 * s0 * s0) / (2.0 * (n + 1.0) * s0 * s0);
    let b2 = n * m4 / (m2 * m2);
    let var_rand = ((n - 1.0) * s1 * (n * n - 3.0 * n + 3.0 - (n - 1.0) * b2)
        - 0.25 * (n - 1.0) * s2 * (n * n + 3.0 * n - 6.0 - (n * n - n + 2.0) * b2)
        + s0 * s0 * (n * n - 3.0 - (n - 1.0) * (n - 1.0) * b2))
        / (n * (n - 2.0) * (n - 3.0) * s0 * s0);
    let analytic = |v: f64| Analytic { variance: v, z: (statistic - 1.0) / v.sqrt() };
    let permutation = (permutations > 0)
        .then(|| {
            let draws = permuted(
                &y,
                permutations,
                seed,
                guard,
                |a| stat(a, q.eval_local(a)),
                |a, b| {
                    let (u, v) = q.eval_local_pair(a, b);
                    (stat(a, u), stat(b, v))
                },
            )?;
            Ok(permutation_summary(draws, statistic, 1.0, alt))
        })
        .transpose()?;
    Ok(Geary {
        statistic,
        expected: 1.0,
        n: p.n,
        sums: p.real_sums(),
        kurtosis: b2,
        normality: analytic(var_norm),
        randomization: analytic(var_rand),
        permutation,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn path(n: usize) -> Csr {
        Csr::from_rows(
            (0..n)
                .map(|i| {
                    let mut r = Vec::new();
                    if i > 0 {
                        r.push((i - 1, 1.0));
                    }
                    if i + 1 < n {
                        r.push((i + 1, 1.0));
                    }
                    r
                })
                .collect(),
        )
    }

    #[test]
    fn alternating_path_is_far_above_one() {
        // every link joins unlike values: sum_ij w_ij (x_i - x_j)^2 = S0 (all differences 1)
        let w = path(6);
        let x = [0.0, 1.0, 0.0, 1.0, 0.0, 1.0];
        let c = geary(w.view(), &x, 0, 0, Alternative::TwoSided, &Guard::unlimited()).unwrap();
        // (n - 1) S0 / (2 S0 * 1.5) with sum z^2 = 6 * 0.25
        assert!((c.statistic - 5.0 / 3.0).abs() < 1e-12, "{}", c.statistic);
    }

    #[test]
    fn self_links_and_too_few_units_are_refused() {
        let w = Csr::from_rows(vec![vec![(0, 1.0), (1, 1.0)], vec![(0, 1.0)], vec![(3, 1.0)], vec![(2, 1.0)]]);
        let e = geary(w.view(), &[1.0, 2.0, 3.0, 5.0], 0, 0, Alternative::TwoSided, &Guard::unlimited());
        assert!(matches!(e, Err(Error::SelfLinks { .. })));
        let e = geary(path(3).view(), &[1.0, 2.0, 3.0], 0, 0, Alternative::TwoSided, &Guard::unlimited());
        assert!(matches!(e, Err(Error::TooFewUnits { need: 4, .. })));
    }
}
