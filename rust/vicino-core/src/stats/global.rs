//! Global Moran's I (Moran 1950) with the moments of Cliff and Ord (1981):
//!
//! I = (n / S0) (z' W z) / (z' z), z = x - mean(x); E[I] = -1 / (n - 1).
//!
//! Normality: Var = (n^2 S1 - n S2 + 3 S0^2) / ((n^2 - 1) S0^2) - E[I]^2.
//! Randomization, with b2 = n sum z^4 / (sum z^2)^2:
//! Var = [n ((n^2 - 3n + 3) S1 - n S2 + 3 S0^2)
//!        - b2 ((n^2 - n) S1 - 2n S2 + 6 S0^2)] / ((n-1)(n-2)(n-3) S0^2) - E[I]^2.
//!
//! Permutation: R random relabellings of the values over the units; the
//! p-value is (M + 1) / (R + 1) (Hope 1968) where M counts draws at least as
//! extreme as the observed I: `greater` I_r >= I, `less` I_r <= I,
//! `two-sided` |I_r - E[I]| >= |I - E[I]| (E[I] is also the exact mean of the
//! permutation distribution). Each draw costs O(n + nnz/2); draws run in
//! parallel, each on its own seeded stream. Draw r shuffles the centred
//! values arranged in the quadratic form's locality order
//! ([`QuadraticForm::order`]) with `shuffle_into(stream(seed, r), ..)`.

use super::moments::{self, QuadraticForm, WeightSums};
use super::permutation::{shuffle_into, stream};
use super::Alternative;
use crate::csr::CsrRef;
use crate::error::{Error, Result, Units};
use crate::frame::{moderate, pow2_exponent, times_pow2};
use crate::guard::Guard;
use crate::lag::lag_unchecked;
use rayon::prelude::*;

/// Variance and z-score under one assumption.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Analytic {
    pub variance: f64,
    pub z: f64,
}

/// Summary of a permutation test.
#[derive(Debug, Clone, PartialEq)]
pub struct Permutation {
    pub draws: Vec<f64>,
    pub extreme: usize,
    pub p_value: f64,
    pub mean: f64,
    pub std: f64,
    pub z: f64,
}

/// Global Moran's I and its inference.
#[derive(Debug, Clone, PartialEq)]
pub struct Moran {
    pub statistic: f64,
    pub expected: f64,
    pub n: usize,
    pub sums: WeightSums,
    pub kurtosis: f64,
    pub normality: Analytic,
    pub randomization: Analytic,
    pub permutation: Option<Permutation>,
}

/// Centred values, checked: right length, finite, not constant.
///
/// The values are first divided by a power of two near the largest
/// magnitude (exact), so that no square or fourth power overflows, and
/// measured from the first value, which is exact for values close to each
/// other (Sterbenz's lemma): a large common offset (1e15 + small
/// variations) keeps every digit of the variation. The values are constant
/// only when all are equal. Statistics built from z are invariant to its scale.
pub fn centred(w: CsrRef<'_>, x: &[f64]) -> Result<Vec<f64>> {
    let n = w.n();
    if x.len() != n {
        return Err(Error::LengthMismatch { what: "values", expected: n, got: x.len() });
    }
    let units = Units::find(n, |i| !x[i].is_finite());
    if !units.is_empty() {
        return Err(Error::NonFiniteValues { units });
    }
    // min and max are exact in any order, and the sums run over fixed blocks,
    // so the result does not depend on the thread count
    let (lo, hi) = x
        .par_iter()
        .fold(|| (f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)))
        .reduce(|| (f64::INFINITY, f64::NEG_INFINITY), |(a, b), (c, d)| (a.min(c), b.max(d)));
    if lo == hi {
        return Err(Error::ConstantValues);
    }
    let e = pow2_exponent(lo.abs().max(hi.abs()));
    let x0 = times_pow2(x[0], -e);
    let mut z: Vec<f64> = x.par_iter().map(|&v| times_pow2(v, -e) - x0).collect();
    // two passes: the second removes the rounding error of the first mean
    for _ in 0..2 {
        let mean = block_sum(&z, |v| v) / n as f64;
        z.par_iter_mut().for_each(|v| *v -= mean);
    }
    // bring the largest |z| near 1 as well, so that z^4 neither overflows nor underflows
    let top = z.par_iter().fold(|| 0.0f64, |m, v| m.max(v.abs())).reduce(|| 0.0, f64::max);
    if !(top > 0.0) {
        return Err(Error::ConstantValues);
    }
    let f = -pow2_exponent(top);
    z.par_iter_mut().for_each(|v| *v = times_pow2(*v, f));
    Ok(z)
}

/// Sum of `f(v)` over `z`, in fixed blocks (in parallel), combined in order.
pub fn block_sum(z: &[f64], f: impl Fn(f64) -> f64 + Sync) -> f64 {
    const BLOCK: usize = 1 << 14;
    let parts: Vec<f64> = z.par_chunks(BLOCK).map(|c| c.iter().map(|&v| f(v)).sum()).collect();
    parts.iter().sum()
}

/// Counts of draws at least as extreme as `observed`, and the permutation p.
pub fn permutation_summary(draws: Vec<f64>, observed: f64, centre: f64, alt: Alternative) -> Permutation {
    let extreme = draws
        .iter()
        .filter(|&&d| match alt {
            Alternative::Greater => d >= observed,
            Alternative::Less => d <= observed,
            Alternative::TwoSided => (d - centre).abs() >= (observed - centre).abs(),
        })
        .count();
    let r = draws.len() as f64;
    let mean = draws.iter().sum::<f64>() / r;
    let var =
        if draws.len() > 1 { draws.iter().map(|d| (d - mean) * (d - mean)).sum::<f64>() / (r - 1.0) } else { f64::NAN };
    let std = var.sqrt();
    Permutation { extreme, p_value: (extreme as f64 + 1.0) / (r + 1.0), mean, std, z: (observed - mean) / std, draws }
}

/// Values of a statistic on `draws` permutations of `z`; draw r is
/// `shuffle_into(stream(seed, r), z, ..)`. Draws are taken two at a time so that
/// `pair` can share one pass over the weights between them; `one` serves a
/// last odd draw. Both must give the same value for the same vector. The
/// guard is asked for the memory of the draws first and checked between
/// pairs of draws.
pub fn permuted<T, F1, F2>(z: &[f64], draws: usize, seed: u64, guard: &Guard, one: F1, pair: F2) -> Result<Vec<T>>
where
    T: Send,
    F1: Fn(&[f64]) -> T + Sync,
    F2: Fn(&[f64], &[f64]) -> (T, T) + Sync,
{
    guard.reserve(
        draws as f64 * 2.0 * std::mem::size_of::<T>() as f64,
        "keeping the permutation draws",
        "use fewer permutations (999 or 9,999 are the usual choices)",
    )?;
    let shuffled = |buf: &mut Vec<f64>, r: usize| shuffle_into(&mut stream(seed, r as u64), z, buf);
    let pairs: Vec<(T, Option<T>)> = (0..draws.div_ceil(2))
        .into_par_iter()
        .map_init(
            || (z.to_vec(), z.to_vec()),
            |(a, b), p| {
                guard.check()?;
                shuffled(a, 2 * p);
                Ok(if 2 * p + 1 < draws {
                    shuffled(b, 2 * p + 1);
                    let (u, v) = pair(a, b);
                    (u, Some(v))
                } else {
                    (one(a), None)
                })
            },
        )
        .collect::<Result<_>>()?;
    Ok(pairs.into_iter().flat_map(|(u, v)| std::iter::once(u).chain(v)).collect())
}

/// Global Moran's I of `x` under weights `w`.
///
/// ```
/// use vicino_core::{Csr, Guard, stats::{global::moran, Alternative}};
/// // a path 0-1-2-3 with alternating values: every link joins unlike values
/// let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0), (3, 1.0)], vec![(2, 1.0)]]);
/// let m = moran(w.view(), &[1.0, 0.0, 1.0, 0.0], 0, 1, Alternative::TwoSided, &Guard::unlimited()).unwrap();
/// assert!((m.statistic + 1.0).abs() < 1e-12);
/// ```
pub fn moran(
    w: CsrRef<'_>,
    x: &[f64],
    permutations: usize,
    seed: u64,
    alt: Alternative,
    guard: &Guard,
) -> Result<Moran> {
    let n = w.n();
    if n < 4 {
        return Err(Error::TooFewUnits { what: "Moran's I with its variance", need: 4, n });
    }
    let units = Units::find(n, |i| w.row(i).0.iter().any(|&j| j as usize == i));
    if !units.is_empty() {
        return Err(Error::SelfLinks { what: "Moran's I", units });
    }
    let z = centred(w, x)?;
    let (moderated, e) = moderate(w);
    let w = moderated.as_ref().map_or(w, |m| m.view());
    let sums = moments::sums(w);
    if !(sums.s0 > 0.0) {
        return Err(Error::NoWeight { what: "Moran's I" });
    }
    let m2 = block_sum(&z, |v| v * v);
    let m4 = block_sum(&z, |v| v.powi(4));
    let nf = n as f64;
    let scale = nf / (sums.s0 * m2);
    // with draws, observed and permuted values alike are evaluated by the
    // form, in its order (a draw that restores the observed order must give
    // the observed value); without, z'Wz = z . Wz, which needs no W + W^T
    let form = (permutations > 0).then(|| QuadraticForm::new(w));
    let y = form.as_ref().map(|q| q.local(&z));
    let stat = |q: &QuadraticForm, y: &[f64]| scale * q.eval_local(y);
    let statistic = match (&form, &y) {
        (Some(q), Some(y)) => stat(q, y),
        _ => scale * lag_unchecked(w, &z, 1).iter().zip(&z).map(|(a, b)| a * b).sum::<f64>(),
    };
    let expected = -1.0 / (nf - 1.0);
    let WeightSums { s0, s1, s2 } = sums;
    let var_norm = (nf * nf * s1 - nf * s2 + 3.0 * s0 * s0) / ((nf * nf - 1.0) * s0 * s0) - expected * expected;
    let b2 = nf * m4 / (m2 * m2);
    let var_rand = (nf * ((nf * nf - 3.0 * nf + 3.0) * s1 - nf * s2 + 3.0 * s0 * s0)
        - b2 * ((nf * nf - nf) * s1 - 2.0 * nf * s2 + 6.0 * s0 * s0))
        / ((nf - 1.0) * (nf - 2.0) * (nf - 3.0) * s0 * s0)
        - expected * expected;
    let analytic = |v: f64| Analytic { variance: v, z: (statistic - expected) / v.sqrt() };
    let permutation = form.as_ref().zip(y.as_ref()).map(|(q, y)| {
        let draws = permuted(
            y,
            permutations,
            seed,
            guard,
            |yp| stat(q, yp),
            |a, b| {
                let (u, v) = q.eval_local_pair(a, b);
                (scale * u, scale * v)
            },
        )?;
        Ok(permutation_summary(draws, statistic, expected, alt))
    });
    let permutation = permutation.transpose()?;
    // the sums as the given weights have them (they may overflow; I does not)
    let sums = WeightSums { s0: times_pow2(s0, e), s1: times_pow2(s1, 2 * e), s2: times_pow2(s2, 2 * e) };
    Ok(Moran {
        statistic,
        expected,
        n,
        sums,
        kurtosis: b2,
        normality: analytic(var_norm),
        randomization: analytic(var_rand),
        permutation,
    })
}
