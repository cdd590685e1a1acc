//! Join counts of a binary variable x in {0, 1} (Cliff and Ord 1981, chapter 1):
//!
//! BB = 1/2 sum_ij w_ij x_i x_j (both 1), WW = 1/2 sum_ij w_ij (1-x_i)(1-x_j)
//! (both 0), BW = 1/2 sum_ij w_ij (x_i - x_j)^2 (unlike); BB + WW + BW = S0 / 2.
//!
//! With symmetric binary weights these count each join once. Any other
//! weights are used as given: the counts are weighted, and equal those of
//! the symmetric (W + W^T) / 2, whose S0, S1 and S2 are those of W, so the
//! moments below hold for any non-negative W with a zero diagonal.
//!
//! Moments, with p the share of ones (free sampling: each unit 1 with
//! probability p, independently) or p^(k) = n1^(k) / n^(k) in falling
//! factorials (non-free sampling: the n1 ones placed at random), and
//! q, q^(k) the same for the zeros:
//! E[BB] = S0 p^(2) / 2, E[BW] = S0 n1 n0 / n^(2) (free: S0 p q), and
//! E[BB^2] = (S1 p^(2) + (S2 - 2 S1) p^(3) + (S0^2 + S1 - S2) p^(4)) / 4,
//! E[BW^2] = (2 S1 P2 + (S2 - 2 S1) P3 + 4 (S0^2 + S1 - S2) P4) / 4 with
//! P2 = n1 n0 / n^(2), P3 = n1 n0 (n - 2) / n^(3), P4 = n1^(2) n0^(2) / n^(4)
//! (free: pq, pq, p^2 q^2). Under free sampling these give Cliff and Ord's
//! Var BB = (S1 p^2 + (S2 - 2 S1) p^3 + (S1 - S2) p^4) / 4 and
//! Var BW = (S2 p q + 4 (S1 - S2) p^2 q^2) / 4.
//!
//! Permutations (the conditional reference distribution of non-free
//! sampling): draw r shuffles the 0 / 1 values in the quadratic form's
//! order with `shuffle_into(stream(seed, r), ..)`; BB = x'Wx / 2, and with
//! d_i the row plus column sum, WW = (S0 - sum_i d_i x_i) / 2 + BB and
//! BW = sum_i d_i x_i / 2 - 2 BB. O(n + nnz/2) per draw, in parallel.

use super::geary::Prepared;
use super::global::{permutation_summary, permuted, Permutation};
use super::moments::WeightSums;
use super::Alternative;
use crate::csr::CsrRef;
use crate::error::{Error, Result, Units};
use crate::frame::times_pow2;
use crate::guard::Guard;

/// Expectation, variance and z-score of a count under one sampling scheme.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Moments {
    pub expected: f64,
    pub variance: f64,
    pub z: f64,
}

/// One join count and its inference.
#[derive(Debug, Clone, PartialEq)]
pub struct JoinCount {
    pub count: f64,
    pub free: Moments,
    pub nonfree: Moments,
    pub permutation: Option<Permutation>,
}

/// The three join counts of a binary variable.
#[derive(Debug, Clone, PartialEq)]
pub struct JoinCounts {
    pub n: usize,
    /// units coded 1
    pub ones: usize,
    pub sums: WeightSums,
    /// both 1
    pub ones_ones: JoinCount,
    /// both 0
    pub zeros_zeros: JoinCount,
    /// unlike
    pub unlike: JoinCount,
}

/// n1^(k) / n^(k), the probability that k given units are all ones
/// when n1 of n units are.
fn falling_ratio(n1: f64, n: f64, k: usize) -> f64 {
    (0..k).map(|i| (n1 - i as f64) / (n - i as f64)).product()
}

/// Moments of a like count (both ones, with n1 ones) under both schemes.
fn like_moments(s: WeightSums, n1: f64, n: f64) -> (f64, f64, f64, f64) {
    let WeightSums { s0, s1, s2 } = s;
    let second = |p2: f64, p3: f64, p4: f64| (s1 * p2 + (s2 - 2.0 * s1) * p3 + (s0 * s0 + s1 - s2) * p4) / 4.0;
    let p = n1 / n;
    let free_e = s0 * p * p / 2.0;
    let free_v = second(p * p, p.powi(3), p.powi(4)) - free_e * free_e;
    let (p2, p3, p4) = (falling_ratio(n1, n, 2), falling_ratio(n1, n, 3), falling_ratio(n1, n, 4));
    let e = s0 * p2 / 2.0;
    (free_e, free_v, e, second(p2, p3, p4) - e * e)
}

/// Moments of the unlike count under both schemes.
fn unlike_moments(s: WeightSums, n1: f64, n: f64) -> (f64, f64, f64, f64) {
    let WeightSums { s0, s1, s2 } = s;
    let n0 = n - n1;
    let second =
        |p2: f64, p3: f64, p4: f64| (2.0 * s1 * p2 + (s2 - 2.0 * s1) * p3 + 4.0 * (s0 * s0 + s1 - s2) * p4) / 4.0;
    let (p, q) = (n1 / n, n0 / n);
    let free_e = s0 * p * q;
    let free_v = second(p * q, p * q, p * p * q * q) - free_e * free_e;
    let p2 = n1 * n0 / (n * (n - 1.0));
    // n1 n0 (n - 2) / n^(3) is p2 again
    let p3 = p2;
    let p4 = n1 * (n1 - 1.0) * n0 * (n0 - 1.0) / (n * (n - 1.0) * (n - 2.0) * (n - 3.0));
    let e = s0 * p2;
    (free_e, free_v, e, second(p2, p3, p4) - e * e)
}

fn count_of(count: f64, (fe, fv, e, v): (f64, f64, f64, f64)) -> JoinCount {
    let m = |expected: f64, variance: f64| Moments { expected, variance, z: (count - expected) / variance.sqrt() };
    JoinCount { count, free: m(fe, fv), nonfree: m(e, v), permutation: None }
}

/// (BB, WW, BW) of 0 / 1 values in the form's order.
#[inline]
fn counts(p: &Prepared, y: &[f64], form: f64) -> (f64, f64, f64) {
    let bb = form / 2.0;
    let d = p.degree_sum(y);
    (bb, (p.sums.s0 - d) / 2.0 + bb, d / 2.0 - 2.0 * bb)
}

/// The counts on `draws` permutations: draw r shuffles `y` with stream (seed, r).
fn permuted_counts(p: &Prepared, y: &[f64], draws: usize, seed: u64, guard: &Guard) -> Result<Vec<(f64, f64, f64)>> {
    let q = &p.form;
    permuted(
        y,
        draws,
        seed,
        guard,
        |a| counts(p, a, q.eval_local(a)),
        |a, b| {
            let (u, v) = q.eval_local_pair(a, b);
            (counts(p, a, u), counts(p, b, v))
        },
    )
}

/// Join counts of the 0 / 1 values `x` under weights `w`.
///
/// ```
/// use vicino_core::{Csr, Guard, stats::{joins::join_counts, Alternative}};
/// // a path 0-1-2-3 coded 1 1 0 0: one join of ones, one of zeros, one unlike
/// let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0), (3, 1.0)], vec![(2, 1.0)]]);
/// let j = join_counts(w.view(), &[1.0, 1.0, 0.0, 0.0], 0, 1, Alternative::Greater, &Guard::unlimited()).unwrap();
/// assert_eq!((j.ones_ones.count, j.zeros_zeros.count, j.unlike.count), (1.0, 1.0, 1.0));
/// ```
pub fn join_counts(
    w: CsrRef<'_>,
    x: &[f64],
    permutations: usize,
    seed: u64,
    alt: Alternative,
    guard: &Guard,
) -> Result<JoinCounts> {
    let p = Prepared::new(w, "join counts with their variance", 4)?;
    let n = p.n;
    if x.len() != n {
        return Err(Error::LengthMismatch { what: "values", expected: n, got: x.len() });
    }
    let units = Units::find(n, |i| !x[i].is_finite());
    if !units.is_empty() {
        return Err(Error::NonFiniteValues { units });
    }
    let units = Units::find(n, |i| x[i] != 0.0 && x[i] != 1.0);
    if !units.is_empty() {
        return Err(Error::NotBinary { units });
    }
    let ones = x.iter().filter(|&&v| v == 1.0).count();
    if ones == 0 || ones == n {
        return Err(Error::ConstantValues);
    }
    let q = &p.form;
    let y = q.local(x);
    let (bb, ww, bw) = counts(&p, &y, q.eval_local(&y));
    let (nf, n1) = (n as f64, ones as f64);
    let mut result = [
        count_of(bb, like_moments(p.sums, n1, nf)),
        count_of(ww, like_moments(p.sums, nf - n1, nf)),
        count_of(bw, unlike_moments(p.sums, n1, nf)),
    ];
    if permutations > 0 {
        let draws = permuted_counts(&p, &y, permutations, seed, guard)?;
        for (k, jc) in result.iter_mut().enumerate() {
            let d = draws.iter().map(|t| [t.0, t.1, t.2][k]).collect();
            jc.permutation = Some(permutation_summary(d, jc.count, jc.nonfree.expected, alt));
        }
    }
    // back to the scale of the given weights (a power of two: exact)
    let e = p.e;
    for jc in result.iter_mut() {
        jc.count = times_pow2(jc.count, e);
        for m in [&mut jc.free, &mut jc.nonfree] {
            m.expected = times_pow2(m.expected, e);
            m.variance = times_pow2(m.variance, 2 * e);
        }
        if let Some(s) = jc.permutation.as_mut() {
            s.draws.iter_mut().for_each(|d| *d = times_pow2(*d, e));
            s.mean = times_pow2(s.mean, e);
            s.std = times_pow2(s.std, e);
        }
    }
    let [ones_ones, zeros_zeros, unlike] = result;
    Ok(JoinCounts { n, ones, sums: p.real_sums(), ones_ones, zeros_zeros, unlike })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Csr;

    #[test]
    fn counts_add_up_and_bad_values_are_refused() {
        let w = Csr::from_rows(vec![
            vec![(1, 1.0), (2, 1.0)],
            vec![(0, 1.0), (3, 1.0)],
            vec![(0, 1.0), (3, 1.0)],
            vec![(1, 1.0), (2, 1.0)],
        ]);
        let j =
            join_counts(w.view(), &[1.0, 0.0, 0.0, 1.0], 10, 3, Alternative::TwoSided, &Guard::unlimited()).unwrap();
        // a 4-cycle 0-1-3-2-0 coded 1 0 1 0 around the cycle: all 4 joins unlike
        assert_eq!((j.ones_ones.count, j.zeros_zeros.count, j.unlike.count), (0.0, 0.0, 4.0));
        for d in 0..10 {
            let p = |c: &JoinCount| c.permutation.as_ref().unwrap().draws[d];
            assert_eq!(p(&j.ones_ones) + p(&j.zeros_zeros) + p(&j.unlike), 4.0);
        }
        let e = join_counts(w.view(), &[1.0, 2.0, 0.0, 1.0], 0, 3, Alternative::TwoSided, &Guard::unlimited());
        assert!(matches!(e, Err(Error::NotBinary { .. })));
        let e = join_counts(w.view(), &[1.0, 1.0, 1.0, 1.0], 0, 3, Alternative::TwoSided, &Guard::unlimited());
        assert!(matches!(e, Err(Error::ConstantValues)));
    }
}
