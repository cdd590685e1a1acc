//! Global Getis-Ord G (Getis and Ord 1992) for non-negative values:
//!
//! G = sum_{i != j} w_ij x_i x_j / sum_{i != j} x_i x_j; E[G] = S0 / (n (n - 1)).
//!
//! Randomization (Getis and Ord 1992), with m_k = sum_i x_i^k and
//! n^(4) = n (n-1) (n-2) (n-3):
//! E[G^2] = (B0 m2^2 + B1 m4 + B2 m1^2 m2 + B3 m1 m3 + B4 m1^4) / ((m1^2 - m2)^2 n^(4)),
//! B0 = (n^2 - 3n + 3) S1 - n S2 + 3 S0^2, B1 = -((n^2 - n) S1 - 2n S2 + 6 S0^2),
//! B2 = -(2n S1 - (n + 3) S2 + 6 S0^2), B3 = 4 (n - 1) S1 - 2 (n + 1) S2 + 8 S0^2,
//! B4 = S1 - S2 + S0^2; Var = E[G^2] - E[G]^2. No moments under normality:
//! the values are amounts, not draws from a normal population.
//!
//! The denominator m1^2 - m2 is summed as 2 sum_i x_i (x_0 + ... + x_{i-1}),
//! without the cancellation of the difference when one value dominates.
//! The values are divided by a power of two near the largest (exact; G is
//! invariant to the scale of x). G scales with the weights. Permutations:
//! O(n + nnz/2) per draw, each on its own seeded stream; draw r shuffles
//! the values in the quadratic form's order with `shuffle_into(stream(seed, r), ..)`.

use super::geary::Prepared;
use super::global::{permutation_summary, permuted, Analytic, Permutation};
use super::moments::WeightSums;
use super::Alternative;
use crate::csr::CsrRef;
use crate::error::{Error, Result, Units};
use crate::frame::{pow2_exponent, times_pow2};
use crate::guard::Guard;

/// Global Getis-Ord G and its inference.
#[derive(Debug, Clone, PartialEq)]
pub struct GetisOrd {
    pub statistic: f64,
    pub expected: f64,
    pub n: usize,
    pub sums: WeightSums,
    pub randomization: Analytic,
    pub permutation: Option<Permutation>,
}

/// Values checked for G (right length, finite, non-negative, two positive,
/// not constant) and divided by a power of two near the largest.
fn scaled_values(n: usize, x: &[f64]) -> Result<Vec<f64>> {
    const WHAT: &str = "Getis-Ord G";
    if x.len() != n {
        return Err(Error::LengthMismatch { what: "values", expected: n, got: x.len() });
    }
    let units = Units::find(n, |i| !x[i].is_finite());
    if !units.is_empty() {
        return Err(Error::NonFiniteValues { units });
    }
    let units = Units::find(n, |i| x[i] < 0.0);
    if !units.is_empty() {
        return Err(Error::NegativeValues { what: WHAT, units });
    }
    let positive = x.iter().filter(|&&v| v > 0.0).count();
    if positive < 2 {
        return Err(Error::TooFewPositive { what: WHAT, count: positive });
    }
    if x.iter().all(|&v| v == x[0]) {
        return Err(Error::ConstantValues);
    }
    let e = pow2_exponent(x.iter().fold(0.0f64, |m, &v| m.max(v)));
    Ok(x.iter().map(|&v| times_pow2(v, -e)).collect())
}

/// sum_{i != j} x_i x_j as 2 sum_i x_i (sum_{j < i} x_j): every term >= 0.
fn distinct_pair_sum(x: &[f64]) -> f64 {
    let mut prefix = 0.0;
    let mut total = 0.0;
    for &v in x {
        total += v * prefix;
        prefix += v;
    }
    2.0 * total
}

/// Global Getis-Ord G of non-negative `x` under weights `w`.
///
/// ```
/// use vicino_core::{Csr, Guard, stats::{getis::getis_ord, Alternative}};
/// // a path 0-1-2-3: G = 2 (x0 x1 + x1 x2 + x2 x3) / sum_{i != j} x_i x_j
/// let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0), (3, 1.0)], vec![(2, 1.0)]]);
/// let g = getis_ord(w.view(), &[1.0, 2.0, 3.0, 4.0], 0, 1, Alternative::Greater, &Guard::unlimited()).unwrap();
/// assert!((g.statistic - 2.0 * 20.0 / 70.0).abs() < 1e-12);
/// ```
pub fn getis_ord(
    w: CsrRef<'_>,
    x: &[f64],
    permutations: usize,
    seed: u64,
    alt: Alternative,
    guard: &Guard,
) -> Result<GetisOrd> {
    let p = Prepared::new(w, "Getis-Ord G with its variance", 4)?;
    let x = scaled_values(p.n, x)?;
    let n = p.n as f64;
    let power = |k: i32| x.iter().map(|v| v.powi(k)).sum::<f64>();
    let (m1, m2, m3, m4) = (power(1), power(2), power(3), power(4));
    let denominator = distinct_pair_sum(&x);
    let q = &p.form;
    let y = q.local(&x);
    let statistic = q.eval_local(&y) / denominator;
    let WeightSums { s0, s1, s2 } = p.sums;
    let expected = s0 / (n * (n - 1.0));
    let b0 = (n * n - 3.0 * n + 3.0) * s1 - n * s2 + 3.0 * s0 * s0;
    let b1 = -((n * n - n) * s1 - 2.0 * n * s2 + 6.0 * s0 * s0);
    let b2 = -(2.0 * n * s1 - (n + 3.0) * s2 + 6.0 * s0 * s0);
    let b3 = 4.0 * (n - 1.0) * s1 - 2.0 * (n + 1.0) * s2 + 8.0 * s0 * s0;
    let b4 = s1 - s2 + s0 * s0;
    let falling = n * (n - 1.0) * (n - 2.0) * (n - 3.0);
    let second = (b0 * m2 * m2 + b1 * m4 + b2 * m1 * m1 * m2 + b3 * m1 * m3 + b4 * m1.powi(4))
        / (denominator * denominator * falling);
    let variance = second - expected * expected;
    let permutation = (permutations > 0)
        .then(|| {
            let draws = permuted(
                &y,
                permutations,
                seed,
                guard,
                |a| q.eval_local(a) / denominator,
                |a, b| {
                    let (u, v) = q.eval_local_pair(a, b);
                    (u / denominator, v / denominator)
                },
            )?;
            Ok(permutation_summary(draws, statistic, expected, alt))
        })
        .transpose()?;
    // back to the scale of the given weights (a power of two: exact)
    let e = p.e;
    let permutation = permutation.map(|mut s| {
        s.draws.iter_mut().for_each(|d| *d = times_pow2(*d, e));
        s.mean = times_pow2(s.mean, e);
        s.std = times_pow2(s.std, e);
        s
    });
    // z in the moderated scale, where the variance cannot overflow
    let z = (statistic - expected) / variance.sqrt();
    Ok(GetisOrd {
        statistic: times_pow2(statistic, e),
        expected: times_pow2(expected, e),
        n: p.n,
        sums: p.real_sums(),
        randomization: Analytic { variance: times_pow2(variance, 2 * e), z },
        permutation,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Csr;

    #[test]
    fn pair_sum_is_the_difference() {
        let x = [1.0, 2.0, 3.0, 4.0];
        assert_eq!(distinct_pair_sum(&x), 100.0 - 30.0);
    }

    #[test]
    fn bad_values_are_refused() {
        let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0)], vec![(3, 1.0)], vec![(2, 1.0)]]);
        let g = |x: &[f64]| getis_ord(w.view(), x, 0, 0, Alternative::TwoSided, &Guard::unlimited());
        assert!(matches!(g(&[1.0, -2.0, 3.0, 4.0]), Err(Error::NegativeValues { .. })));
        assert!(matches!(g(&[0.0, 0.0, 0.0, 0.0]), Err(Error::TooFewPositive { count: 0, .. })));
        assert!(matches!(g(&[0.0, 5.0, 0.0, 0.0]), Err(Error::TooFewPositive { count: 1, .. })));
        assert!(matches!(g(&[2.0, 2.0, 2.0, 2.0]), Err(Error::ConstantValues)));
    }
}
