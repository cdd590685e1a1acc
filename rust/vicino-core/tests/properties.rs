// Dense oracles index their matrices by (i, j), as the formulas do.
#![allow(clippy::needless_range_loop)]
//! Property tests: neighbour graphs, standardization, spatial lag, spectral
//! radius and Moran's I, each against a dense brute-force oracle, a published
//! formula or an exact identity.

mod common;

use common::dense;
use proptest::prelude::*;
use vicino_core::error::{Error, Units};
use vicino_core::lag::lag;
use vicino_core::neighbors::{k_nearest, within_distance, Metric};
use vicino_core::spectral::spectral_radius;
use vicino_core::standardize::{standardize, Islands, Method};
use vicino_core::stats::global::moran;
use vicino_core::stats::moments::weight_sums;
use vicino_core::stats::permutation::{shuffle, stream};
use vicino_core::stats::Alternative;
use vicino_core::Guard;
use vicino_core::{Csr, CsrRef};

// ---------------------------------------------------------------------------
// helpers

/// oracle: brute force dense product W x.
fn dense_mul(a: &[Vec<f64>], x: &[f64]) -> Vec<f64> {
    a.iter().map(|row| row.iter().zip(x).map(|(w, v)| w * v).sum()).collect()
}

fn flatten(p: Vec<(i32, i32)>) -> Vec<f64> {
    p.into_iter().flat_map(|(x, y)| [x as f64, y as f64]).collect()
}

/// Integer-valued point sets: small ranges so that ties and duplicates occur.
fn int_points(max_n: usize, span: i32) -> impl Strategy<Value = Vec<f64>> {
    prop::collection::vec((-span..=span, -span..=span), 2..max_n).prop_map(flatten)
}

/// A non-negative n x n matrix with about 40 % of entries stored, as rows.
fn matrix(max_n: usize, diagonal: bool) -> impl Strategy<Value = Csr> {
    (1..=max_n).prop_flat_map(move |n| {
        prop::collection::vec(prop::option::weighted(0.4, 0.01f64..10.0), n * n).prop_map(move |v| {
            let rows = (0..n)
                .map(|i| (0..n).filter(|&j| diagonal || j != i).filter_map(|j| v[i * n + j].map(|x| (j, x))).collect())
                .collect();
            Csr::from_rows(rows)
        })
    })
}

/// Make `w` symmetric: (W + W^T) / 2 entrywise, built densely.
fn symmetrized(w: &Csr) -> Csr {
    let a = dense(w.view());
    let n = a.len();
    Csr::from_rows(
        (0..n)
            .map(|i| (0..n).filter(|&j| a[i][j] + a[j][i] > 0.0).map(|j| (j, 0.5 * (a[i][j] + a[j][i]))).collect())
            .collect(),
    )
}

fn with_data(w: &Csr, data: Vec<f64>) -> Csr {
    w.view().with_data(data)
}

/// Cyclic Jacobi eigenvalue routine for a symmetric matrix (Jacobi 1846;
/// Golub and Van Loan, Matrix Computations, section 8.5). Returns the eigenvalues.
fn jacobi_eigenvalues(mut a: Vec<Vec<f64>>) -> Vec<f64> {
    let n = a.len();
    let total: f64 = a.iter().flatten().map(|x| x * x).sum();
    for _sweep in 0..100 {
        let off: f64 = (0..n)
            .flat_map(|i| (0..n).filter(move |&j| j != i).map(move |j| (i, j)))
            .map(|(i, j)| a[i][j] * a[i][j])
            .sum();
        if off <= 1e-32 * total {
            break;
        }
        for p in 0..n {
            for q in p + 1..n {
                if a[p][q] == 0.0 {
                    continue;
                }
                let theta = (a[q][q] - a[p][p]) / (2.0 * a[p][q]);
                let t = if theta.is_finite() {
                    let sign = if theta >= 0.0 { 1.0 } else { -1.0 };
                    sign / (theta.abs() + (theta * theta + 1.0).sqrt())
                } else {
                    0.0
                };
                let c = 1.0 / (t * t + 1.0).sqrt();
                let s = t * c;
                for row in a.iter_mut() {
                    let (akp, akq) = (row[p], row[q]);
                    row[p] = c * akp - s * akq;
                    row[q] = s * akp + c * akq;
                }
                for k in 0..n {
                    let (apk, aqk) = (a[p][k], a[q][k]);
                    a[p][k] = c * apk - s * aqk;
                    a[q][k] = s * apk + c * aqk;
                }
            }
        }
    }
    (0..n).map(|i| a[i][i]).collect()
}

/// Spectral radius of a non-negative matrix without any iteration on vectors:
/// lambda > rho(W) exactly when lambda I - W is a non-singular M-matrix, which
/// holds exactly when all its leading principal minors are positive, i.e. when
/// Gaussian elimination without pivoting has only positive pivots (Berman and
/// Plemmons 1979, theorem 6.2.3). Bisection on lambda.
fn rho_m_matrix(a: &[Vec<f64>]) -> f64 {
    let n = a.len();
    let above = |lambda: f64| {
        let mut m: Vec<Vec<f64>> =
            (0..n).map(|i| (0..n).map(|j| if i == j { lambda - a[i][j] } else { -a[i][j] }).collect()).collect();
        for k in 0..n {
            if !(m[k][k] > 0.0) {
                return false;
            }
            for i in k + 1..n {
                let f = m[i][k] / m[k][k];
                for j in k..n {
                    m[i][j] -= f * m[k][j];
                }
            }
        }
        true
    };
    let max_row: f64 = a.iter().map(|r| r.iter().sum::<f64>()).fold(0.0, f64::max);
    let (mut lo, mut hi) = (0.0, max_row * (1.0 + 1e-12) + 1e-300);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if above(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    hi
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()).max(1.0)
}

fn row_sums(w: CsrRef<'_>) -> Vec<f64> {
    (0..w.n()).map(|i| w.row(i).1.iter().sum()).collect()
}

/// Moran's I by its definition, densely: n / S0 * z'Wz / z'z (Moran 1950).
fn moran_dense(a: &[Vec<f64>], x: &[f64]) -> f64 {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let z: Vec<f64> = x.iter().map(|v| v - mean).collect();
    let s0: f64 = a.iter().flatten().sum();
    let mut num = 0.0;
    for i in 0..x.len() {
        for j in 0..x.len() {
            num += a[i][j] * z[i] * z[j];
        }
    }
    n / s0 * num / z.iter().map(|v| v * v).sum::<f64>()
}

/// Every permutation of 0..n (Heap's algorithm), for exact permutation moments.
fn all_permutations(n: usize) -> Vec<Vec<usize>> {
    fn heap(k: usize, v: &mut Vec<usize>, out: &mut Vec<Vec<usize>>) {
        if k <= 1 {
            out.push(v.clone());
            return;
        }
        for i in 0..k {
            heap(k - 1, v, out);
            if k.is_multiple_of(2) {
                v.swap(i, k - 1);
            } else {
                v.swap(0, k - 1);
            }
        }
    }
    let mut out = Vec::new();
    heap(n, &mut (0..n).collect(), &mut out);
    out
}

fn pool(threads: usize) -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap()
}

fn values(n: usize) -> impl Strategy<Value = Vec<f64>> {
    prop::collection::vec(-100.0f64..100.0, n)
}

/// A zero-diagonal weights matrix with at least one link, with values for it.
fn moran_case(max_n: usize) -> impl Strategy<Value = (Csr, Vec<f64>)> {
    matrix(max_n, false).prop_filter("needs n >= 4 and a link", |w| w.n() >= 4 && w.view().nnz() > 0).prop_flat_map(
        |w| {
            let n = w.n();
            (Just(w), values(n).prop_filter("values must vary", |x| x.iter().any(|v| (v - x[0]).abs() > 1e-3)))
        },
    )
}

// ---------------------------------------------------------------------------
// neighbour graphs

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn knn_rows_have_k_sorted_entries_without_self(
        (xy, k) in int_points(80, 6).prop_flat_map(|xy| { let n = xy.len() / 2; (Just(xy), 1..n) })
    ) {
        let n = xy.len() / 2;
        for metric in [Metric::Euclidean, Metric::GreatCircle] {
            let g = k_nearest(&xy, k, metric, &Guard::unlimited()).unwrap().graph;
            let g = g.view();
            prop_assert_eq!(g.n(), n);
            for i in 0..n {
                let (c, d) = g.row(i);
                prop_assert_eq!(c.len(), k); // definition: exactly k neighbours
                prop_assert!(c.windows(2).all(|p| p[0] < p[1]), "row {} not strictly sorted: {:?}", i, c);
                prop_assert!(!c.contains(&(i as i64)), "self link in row {}", i);
                prop_assert!(d.iter().all(|&v| v >= 0.0 && v.is_finite()));
            }
        }
    }

    #[test]
    fn knn_is_the_first_k_by_distance_then_position(
        (xy, k) in int_points(60, 4).prop_flat_map(|xy| { let n = xy.len() / 2; (Just(xy), 1..n) })
    ) {
        // oracle: brute force on squared integer distances (exact)
        let n = xy.len() / 2;
        let g = k_nearest(&xy, k, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
        let g = g.view();
        for i in 0..n {
            let mut all: Vec<(f64, usize)> = (0..n).filter(|&j| j != i).map(|j| {
                let (dx, dy) = (xy[2 * i] - xy[2 * j], xy[2 * i + 1] - xy[2 * j + 1]);
                (dx * dx + dy * dy, j)
            }).collect();
            all.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            let mut want: Vec<i64> = all[..k].iter().map(|p| p.1 as i64).collect();
            want.sort();
            prop_assert_eq!(g.row(i).0, &want[..], "row {}", i);
            for (&j, &d) in g.row(i).0.iter().zip(g.row(i).1) {
                let j = j as usize;
                let d2 = all.iter().find(|p| p.1 == j).unwrap().0;
                prop_assert_eq!(d, d2.sqrt());
            }
        }
    }

    #[test]
    fn within_distance_is_symmetric_and_brute_force(
        xy in int_points(80, 8), r2 in 0i32..40, gc in any::<bool>()
    ) {
        let metric = if gc { Metric::GreatCircle } else { Metric::Euclidean };
        // for the sphere the radius is in km: about r2 * 20 km
        let radius = if gc { r2 as f64 * 20.0 } else { (r2 as f64).sqrt() };
        let nb = within_distance(&xy, radius, metric, &Guard::unlimited()).unwrap();
        let g = nb.graph.view();
        prop_assert!(g.is_symmetric()); // common practice: a distance band is symmetric
        let n = xy.len() / 2;
        for i in 0..n {
            let (c, _) = g.row(i);
            prop_assert!(c.windows(2).all(|p| p[0] < p[1]));
            if !gc {
                // oracle: brute force, exact on integer squared distances, boundary included
                let want: Vec<i64> = (0..n).filter(|&j| j != i).filter(|&j| {
                    let (dx, dy) = (xy[2 * i] - xy[2 * j], xy[2 * i + 1] - xy[2 * j + 1]);
                    dx * dx + dy * dy <= r2 as f64
                }).map(|j| j as i64).collect();
                prop_assert_eq!(c, &want[..], "row {}", i);
            }
        }
    }

    #[test]
    fn neighbours_are_translation_invariant(
        xy in int_points(70, 20), tx in -1000i32..1000, ty in -1000i32..1000,
        k in 1usize..6, r2 in 0i32..60
    ) {
        let n = xy.len() / 2;
        let k = k.min(n - 1);
        let moved: Vec<f64> = xy.chunks(2).flat_map(|p| [p[0] + tx as f64, p[1] + ty as f64]).collect();
        // exact identity: (x + t) - (y + t) = x - y for these integers
        prop_assert_eq!(
            k_nearest(&xy, k, Metric::Euclidean, &Guard::unlimited()).unwrap().graph,
            k_nearest(&moved, k, Metric::Euclidean, &Guard::unlimited()).unwrap().graph
        );
        let r = (r2 as f64).sqrt();
        prop_assert_eq!(
            within_distance(&xy, r, Metric::Euclidean, &Guard::unlimited()).unwrap().graph,
            within_distance(&moved, r, Metric::Euclidean, &Guard::unlimited()).unwrap().graph
        );
    }

    #[test]
    fn neighbours_are_scale_invariant(
        xy in int_points(70, 20), m in 1i32..16, e in -6i32..7, k in 1usize..6, r2 in 0i32..60
    ) {
        // s = m 2^e: s times a small integer is exact, so squared distances
        // scale by s^2 exactly and the order, ties included, is unchanged
        let s = m as f64 * 2f64.powi(e);
        let n = xy.len() / 2;
        let k = k.min(n - 1);
        let scaled: Vec<f64> = xy.iter().map(|v| v * s).collect();
        let a = k_nearest(&xy, k, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
        let b = k_nearest(&scaled, k, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
        prop_assert_eq!(a.view().indptr(), b.view().indptr());
        prop_assert_eq!(a.view().indices(), b.view().indices());
        for (da, db) in a.view().data().iter().zip(b.view().data()) {
            prop_assert!(close(da * s, *db, 4.0 * f64::EPSILON), "{} * {} vs {}", da, s, db);
        }
        let a = within_distance(&xy, (r2 as f64).sqrt(), Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
        let b = within_distance(&scaled, (s * s * r2 as f64).sqrt(), Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
        prop_assert_eq!(a.view().indices(), b.view().indices());
        prop_assert_eq!(a.view().indptr(), b.view().indptr());
    }
}

// ---------------------------------------------------------------------------
// standardization

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn standardize_matches_definitions(w in matrix(12, true)) {
        let v = w.view();
        let a = dense(v);
        let n = v.n();
        let islands: Vec<usize> = (0..n).filter(|&i| v.row(i).0.is_empty()).collect();
        if !islands.is_empty() {
            let raised = matches!(standardize(v, Method::Row, Islands::Raise, &Guard::unlimited()), Err(Error::Islands { .. }));
            prop_assert!(raised);
        }
        // row: rows sum to 1 and w*_ij = w_ij / w_i. (common practice)
        let row = with_data(&w, standardize(v, Method::Row, Islands::Keep, &Guard::unlimited()).unwrap());
        for (i, s) in row_sums(row.view()).into_iter().enumerate() {
            if islands.contains(&i) {
                prop_assert_eq!(s, 0.0);
            } else {
                prop_assert!((s - 1.0).abs() <= 1e-12, "row {} sums to {}", i, s);
            }
            let total: f64 = a[i].iter().sum();
            for (&j, &x) in row.view().row(i).0.iter().zip(row.view().row(i).1) {
                prop_assert!(close(x, a[i][j as usize] / total, 1e-15));
            }
        }
        // binary: a one for every stored link
        let b = standardize(v, Method::Binary, Islands::Keep, &Guard::unlimited()).unwrap();
        prop_assert_eq!(b, vec![1.0; v.nnz()]);
        prop_assert_eq!(standardize(v, Method::None, Islands::Keep, &Guard::unlimited()).unwrap(), v.data().to_vec());
        if v.data().iter().any(|&x| x > 0.0) {
            let max = v.data().iter().copied().fold(0.0, f64::max);
            let total: f64 = v.data().iter().sum();
            let me = standardize(v, Method::MaxEntry, Islands::Keep, &Guard::unlimited()).unwrap();
            let gl = standardize(v, Method::Global, Islands::Keep, &Guard::unlimited()).unwrap();
            let vs = standardize(v, Method::VarianceStabilizing, Islands::Keep, &Guard::unlimited()).unwrap();
            // Tiefelsdorf, Griffith and Boots (1999): n (w_ij / q_i) / sum(w / q)
            let q: Vec<f64> = (0..n).map(|i| a[i].iter().map(|x| x * x).sum::<f64>().sqrt()).collect();
            let sum_wq: f64 = (0..n).map(|i| if q[i] > 0.0 { a[i].iter().sum::<f64>() / q[i] } else { 0.0 }).sum();
            let mut k = 0;
            for i in 0..n {
                for &j in v.row(i).0 {
                    let x = a[i][j as usize];
                    prop_assert!(close(me[k], x / max, 1e-15)); // definition of max_entry
                    prop_assert!(close(gl[k], n as f64 * x / total, 1e-14)); // definition of global
                    prop_assert!(close(vs[k], n as f64 * (x / q[i]) / sum_wq, 1e-13));
                    k += 1;
                }
            }
            prop_assert!(close(gl.iter().sum::<f64>(), n as f64, 1e-12)); // global weights sum to n
            prop_assert!(close(vs.iter().sum::<f64>(), n as f64, 1e-12));
            // max_eigenvalue: w / rho(W), rho from the M-matrix oracle
            let rho = rho_m_matrix(&a);
            // rho = 0 (nilpotent W) has its own test below
            prop_assume!(rho > 1e-6);
            let mx = standardize(v, Method::MaxEigenvalue, Islands::Keep, &Guard::unlimited()).unwrap();
            for (x, y) in mx.iter().zip(v.data()) {
                prop_assert!(close(*x, y / rho, 1e-8), "{} vs {} / {}", x, y, rho);
            }
        } else {
            let refused = matches!(standardize(v, Method::Global, Islands::Keep, &Guard::unlimited()), Err(Error::NoWeight { .. }))
                && matches!(standardize(v, Method::MaxEntry, Islands::Keep, &Guard::unlimited()), Err(Error::NoWeight { .. }));
            prop_assert!(refused);
        }
    }

    #[test]
    fn standardized_knn_rows_sum_to_one(
        (xy, k) in int_points(60, 10).prop_flat_map(|xy| { let n = xy.len() / 2; (Just(xy), 1..n) })
    ) {
        let g = k_nearest(&xy, k, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
        // duplicates give zero distances; weight by inverse distance plus one
        let w = with_data(&g, g.view().data().iter().map(|d| 1.0 / (1.0 + d)).collect());
        let r = with_data(&w, standardize(w.view(), Method::Row, Islands::Raise, &Guard::unlimited()).unwrap());
        for s in row_sums(r.view()) {
            prop_assert!((s - 1.0).abs() <= 1e-12); // common practice: row-standardized rows sum to 1
        }
        prop_assert_eq!(standardize(w.view(), Method::Binary, Islands::Raise, &Guard::unlimited()).unwrap(), vec![1.0; g.view().nnz()]);
    }
}

// ---------------------------------------------------------------------------
// spatial lag

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn lag_is_linear_and_matches_dense_product(
        (w, x, y) in matrix(15, true).prop_flat_map(|w| { let n = w.n(); (Just(w), values(n), values(n)) }),
        a in -10.0f64..10.0, b in -10.0f64..10.0
    ) {
        let v = w.view();
        let d = dense(v);
        let lx = lag(v, &x, 1).unwrap();
        let ly = lag(v, &y, 1).unwrap();
        let combo: Vec<f64> = x.iter().zip(&y).map(|(p, q)| a * p + b * q).collect();
        let lc = lag(v, &combo, 1).unwrap();
        let scale: f64 = 1.0 + d.iter().flatten().sum::<f64>() * 100.0 * (1.0 + a.abs() + b.abs());
        for i in 0..v.n() {
            // linearity of a matrix product (exact identity, up to rounding)
            prop_assert!((lc[i] - (a * lx[i] + b * ly[i])).abs() <= 1e-12 * scale);
        }
        let want = dense_mul(&d, &x); // oracle: brute force
        for (g, e) in lx.iter().zip(&want) {
            prop_assert!((g - e).abs() <= 1e-12 * scale);
        }
        // many columns at once equal one at a time, bit for bit (same order of summation)
        let cols: Vec<f64> = x.iter().zip(&y).flat_map(|(&p, &q)| [p, q]).collect();
        let lcols = lag(v, &cols, 2).unwrap();
        for i in 0..v.n() {
            prop_assert_eq!(lcols[2 * i].to_bits(), lx[i].to_bits());
            prop_assert_eq!(lcols[2 * i + 1].to_bits(), ly[i].to_bits());
        }
    }
}

#[test]
fn lag_refuses_bad_values() {
    let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0)]]);
    assert_eq!(lag(w.view(), &[1.0], 1).unwrap_err(), Error::LengthMismatch { what: "values", expected: 2, got: 1 });
    assert_eq!(
        lag(w.view(), &[f64::INFINITY, f64::NAN], 1).unwrap_err(),
        Error::NonFiniteValues { units: Units { first: vec![0, 1], count: 2 } }
    );
}

// ---------------------------------------------------------------------------
// spectral radius

proptest! {
    #![proptest_config(ProptestConfig { cases: 300, ..ProptestConfig::default() })]

    #[test]
    fn spectral_radius_of_constant_row_sums_is_the_row_sum(
        (xy, k) in int_points(60, 10).prop_flat_map(|xy| { let n = xy.len() / 2; (Just(xy), 1..n) })
    ) {
        // W 1 = c 1 with 1 > 0, so rho = c (Perron-Frobenius)
        let g = k_nearest(&xy, k, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
        let bin = with_data(&g, vec![1.0; g.view().nnz()]);
        prop_assert_eq!(spectral_radius(bin.view(), &Guard::unlimited()).unwrap().value, k as f64);
        let w = with_data(&g, g.view().data().iter().map(|d| 1.0 / (1.0 + d)).collect());
        let row = with_data(&w, standardize(w.view(), Method::Row, Islands::Raise, &Guard::unlimited()).unwrap());
        prop_assert!((spectral_radius(row.view(), &Guard::unlimited()).unwrap().value - 1.0).abs() <= 1e-12);
    }

    #[test]
    fn spectral_radius_of_symmetric_matrices_is_the_largest_eigenvalue(w in matrix(8, true)) {
        let s = symmetrized(&w);
        prop_assume!(s.view().nnz() > 0);
        let ev = jacobi_eigenvalues(dense(s.view()));
        // for a symmetric non-negative matrix rho = lambda_max (Perron-Frobenius)
        let want = ev.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let got = spectral_radius(s.view(), &Guard::unlimited()).unwrap().value;
        prop_assert!(close(got, want, 1e-10), "got {} want {} (eigenvalues {:?})", got, want, ev);
    }

    #[test]
    fn spectral_radius_of_general_matrices_matches_m_matrix_bisection(w in matrix(8, true)) {
        prop_assume!(w.view().nnz() > 0);
        let want = rho_m_matrix(&dense(w.view()));
        prop_assume!(want > 1e-6); // nilpotent patterns are checked on their own
        let got = spectral_radius(w.view(), &Guard::unlimited()).unwrap().value;
        prop_assert!(close(got, want, 1e-8), "got {} want {}", got, want);
    }
}

#[test]
fn jacobi_oracle_on_a_path() {
    // eigenvalues of the path P_n are 2 cos(pi j / (n + 1)) (common practice, spectral graph theory)
    for n in 2usize..=8 {
        let a: Vec<Vec<f64>> =
            (0..n).map(|i| (0..n).map(|j| if i.abs_diff(j) == 1 { 1.0 } else { 0.0 }).collect()).collect();
        let mut ev = jacobi_eigenvalues(a.clone());
        ev.sort_by(f64::total_cmp);
        for (j, e) in ev.iter().rev().enumerate() {
            let want = 2.0 * (std::f64::consts::PI * (j + 1) as f64 / (n + 1) as f64).cos();
            assert!((e - want).abs() < 1e-12, "n={n}: {e} vs {want}");
        }
        assert!((rho_m_matrix(&a) - 2.0 * (std::f64::consts::PI / (n + 1) as f64).cos()).abs() < 1e-9);
    }
}

#[test]
fn spectral_radius_of_large_grid_graph() {
    // rook contiguity on an a x b lattice is the Cartesian product of two paths:
    // rho = 2 cos(pi / (a + 1)) + 2 cos(pi / (b + 1)) (common practice, spectral graph theory)
    let (a, b) = (70usize, 45usize);
    let xy: Vec<f64> = (0..b).flat_map(|y| (0..a).flat_map(move |x| [x as f64, y as f64])).collect();
    let g = within_distance(&xy, 1.0, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
    assert!(g.view().data().iter().all(|&d| d == 1.0));
    let got = spectral_radius(g.view(), &Guard::unlimited()).unwrap().value;
    let pi = std::f64::consts::PI;
    let want = 2.0 * (pi / (a + 1) as f64).cos() + 2.0 * (pi / (b + 1) as f64).cos();
    assert!(close(got, want, 1e-10), "got {got} want {want}");
    // a long path: 2 cos(pi / (n + 1))
    let n = 2000usize;
    let path = Csr::from_rows(
        (0..n).map(|i| [i.wrapping_sub(1), i + 1].into_iter().filter(|&j| j < n).map(|j| (j, 1.0)).collect()).collect(),
    );
    let got = spectral_radius(path.view(), &Guard::unlimited()).unwrap().value;
    assert!(close(got, 2.0 * (pi / (n + 1) as f64).cos(), 1e-10), "path: {got}");
}

#[test]
fn spectral_radius_of_distance_weighted_knn() {
    // k-nearest with inverse-distance weights: neither symmetric nor constant sums
    let mut s = 0x1234_5678_u64;
    let mut next = || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17; // xorshift64 (Marsaglia 2003)
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let xy: Vec<f64> = (0..120).map(|_| next() * 10.0).collect();
    for k in [1usize, 2, 4, 7] {
        let g = k_nearest(&xy, k, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
        let w = with_data(&g, g.view().data().iter().map(|d| 1.0 / d).collect());
        let want = rho_m_matrix(&dense(w.view()));
        let got = spectral_radius(w.view(), &Guard::unlimited()).unwrap().value;
        assert!(close(got, want, 1e-8), "k={k}: got {got} want {want}");
    }
}

#[test]
fn spectral_radius_block_triangular_with_close_eigenvalues() {
    // W = [[A, 0], [C, B]]: the eigenvalues are those of A and B (exact
    // identity), so rho = max(rho(A), rho(B)) = 2 for A = 2 P (P a 3-cycle)
    // and B = 1.99 Q (Q a 4-cycle), coupled by C.
    let mut rows: Vec<Vec<(usize, f64)>> = vec![Vec::new(); 7];
    for i in 0..3 {
        rows[i].push(((i + 1) % 3, 2.0));
    }
    for i in 0..4 {
        rows[3 + i].push((3 + (i + 1) % 4, 1.99));
    }
    rows[3].push((0, 0.5));
    rows[5].push((1, 0.25));
    let w = Csr::from_rows(rows);
    assert!(close(rho_m_matrix(&dense(w.view())), 2.0, 1e-9));
    let got = spectral_radius(w.view(), &Guard::unlimited()).unwrap().value;
    assert!(close(got, 2.0, 1e-8), "got {got} want 2");
}

#[test]
fn spectral_radius_block_triangular_is_accurate_for_small_gaps() {
    // as above with rho(B) = 2 - gap; the exact answer is 2 (block triangular identity)
    for gap in [1e-3, 1e-4, 1e-5] {
        let mut rows: Vec<Vec<(usize, f64)>> = vec![Vec::new(); 7];
        for i in 0..3 {
            rows[i].push(((i + 1) % 3, 2.0));
        }
        for i in 0..4 {
            rows[3 + i].push((3 + (i + 1) % 4, 2.0 - gap));
        }
        rows[3].push((0, 0.5));
        rows[5].push((1, 0.25));
        let w = Csr::from_rows(rows);
        match spectral_radius(w.view(), &Guard::unlimited()) {
            Ok(r) => assert!(close(r.value, 2.0, 1e-10), "gap {gap}: got {r:?} want 2"),
            Err(e) => panic!("gap {gap}: got error {e:?}, want 2"),
        }
    }
}

#[test]
fn spectral_radius_with_defective_perron_root() {
    // W = [[P, 0], [E, P]], P the 2-cycle, E = e_1 e_1': eigenvalues are those
    // of P twice, +-1 (block triangular identity), so rho = 1
    let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0)], vec![(0, 1.0), (3, 1.0)], vec![(2, 1.0)]]);
    assert!(close(rho_m_matrix(&dense(w.view())), 1.0, 1e-9));
    match spectral_radius(w.view(), &Guard::unlimited()) {
        Ok(r) => assert!(close(r.value, 1.0, 1e-9), "got {r:?} want 1"),
        Err(e) => panic!("got error {e:?}, want 1"),
    }
}

#[test]
fn spectral_radius_of_nilpotent_matrix_is_zero() {
    // a directed path 0 -> 1 -> 2 -> 3 is strictly upper triangular: every
    // eigenvalue is 0 (exact identity)
    let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(2, 1.0)], vec![(3, 1.0)], vec![]]);
    match spectral_radius(w.view(), &Guard::unlimited()) {
        Ok(r) => assert!(r.value.abs() <= 1e-6, "got {r:?} want 0"),
        Err(e) => panic!("got error {e:?}, want 0"),
    }
}

#[test]
fn spectral_radius_refuses_no_weight() {
    let w = Csr::from_rows(vec![vec![], vec![]]);
    assert!(matches!(spectral_radius(w.view(), &Guard::unlimited()), Err(Error::NoWeight { .. })));
    let w = Csr::from_rows(vec![vec![(1, 0.0)], vec![]]);
    assert!(matches!(spectral_radius(w.view(), &Guard::unlimited()), Err(Error::NoWeight { .. })));
}

// ---------------------------------------------------------------------------
// Moran's I

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn moran_statistic_and_moments((w, x) in moran_case(10)) {
        let v = w.view();
        let a = dense(v);
        let n = v.n();
        let m = match moran(v, &x, 0, 1, Alternative::TwoSided, &Guard::unlimited()) {
            Ok(m) => m,
            Err(e) => { prop_assert!(false, "unexpected error {:?}", e); unreachable!() }
        };
        let want = moran_dense(&a, &x); // Moran (1950), by definition
        prop_assert!(close(m.statistic, want, 1e-10), "I = {} want {}", m.statistic, want);
        prop_assert_eq!(m.expected, -1.0 / (n as f64 - 1.0)); // Cliff and Ord (1981)
        prop_assert!(m.permutation.is_none());
        // S0, S1, S2 by their definitions (Cliff and Ord 1981), brute force
        let s0: f64 = a.iter().flatten().sum();
        let s1: f64 = 0.5 * (0..n).flat_map(|i| (0..n).map(move |j| (i, j))).map(|(i, j)| (a[i][j] + a[j][i]).powi(2)).sum::<f64>();
        let s2: f64 = (0..n).map(|i| (a[i].iter().sum::<f64>() + (0..n).map(|j| a[j][i]).sum::<f64>()).powi(2)).sum();
        prop_assert!(close(m.sums.s0, s0, 1e-13) && close(m.sums.s1, s1, 1e-13) && close(m.sums.s2, s2, 1e-13));
        let (ws, _) = weight_sums(v);
        prop_assert_eq!(ws, m.sums);
        // normality: exact moments of a ratio of quadratic forms in normal
        // variables, ratio independent of its denominator (Cliff and Ord 1981):
        // Var = (n / S0)^2 [ (tr A)^2 + 2 tr(A^2) ] / ((n - 1)(n + 1)) - E^2,
        // A the symmetric part of M W M, M = I - 11'/n
        let nf = n as f64;
        let mw: Vec<Vec<f64>> = (0..n).map(|i| (0..n).map(|j| {
            let mut t = 0.0;
            for k in 0..n { for l in 0..n {
                let mik = if i == k { 1.0 } else { 0.0 } - 1.0 / nf;
                let mlj = if l == j { 1.0 } else { 0.0 } - 1.0 / nf;
                t += mik * a[k][l] * mlj;
            } }
            t
        }).collect()).collect();
        let sym: Vec<Vec<f64>> = (0..n).map(|i| (0..n).map(|j| 0.5 * (mw[i][j] + mw[j][i])).collect()).collect();
        let tr: f64 = (0..n).map(|i| sym[i][i]).sum();
        let tr2: f64 = (0..n).flat_map(|i| (0..n).map(move |j| (i, j))).map(|(i, j)| sym[i][j] * sym[j][i]).sum();
        let e = nf / s0 * tr / (nf - 1.0);
        prop_assert!(close(e, m.expected, 1e-12)); // zero diagonal: tr(MW) = -S0 / n
        let var_n = (nf / s0).powi(2) * (tr * tr + 2.0 * tr2) / ((nf - 1.0) * (nf + 1.0)) - e * e;
        prop_assert!(close(m.normality.variance, var_n, 1e-9), "normality var {} want {}", m.normality.variance, var_n);
        prop_assert!(close(m.normality.z, (m.statistic - m.expected) / var_n.sqrt(), 1e-6));
        // kurtosis b2 = n sum z^4 / (sum z^2)^2
        let mean = x.iter().sum::<f64>() / nf;
        let z: Vec<f64> = x.iter().map(|v| v - mean).collect();
        let b2 = nf * z.iter().map(|v| v.powi(4)).sum::<f64>() / z.iter().map(|v| v * v).sum::<f64>().powi(2);
        prop_assert!(close(m.kurtosis, b2, 1e-12));
    }

    #[test]
    fn moran_randomization_moments_are_exact_permutation_moments((w, x) in moran_case(6)) {
        // Cliff and Ord (1981): under randomization E[I] and Var[I] are the
        // mean and variance of I over all n! relabellings; enumerate them
        let v = w.view();
        let a = dense(v);
        let n = v.n();
        let m = moran(v, &x, 0, 1, Alternative::TwoSided, &Guard::unlimited()).unwrap();
        let draws: Vec<f64> = all_permutations(n).iter().map(|p| {
            let xp: Vec<f64> = p.iter().map(|&i| x[i]).collect();
            moran_dense(&a, &xp)
        }).collect();
        let r = draws.len() as f64;
        let mean = draws.iter().sum::<f64>() / r;
        let var = draws.iter().map(|d| (d - mean).powi(2)).sum::<f64>() / r;
        prop_assert!(close(mean, m.expected, 1e-10), "mean {} vs {}", mean, m.expected);
        prop_assert!(close(m.randomization.variance, var, 1e-9), "randomization var {} want {}", m.randomization.variance, var);
    }

    #[test]
    fn moran_permutation_draws_are_reproducible_and_exact(
        (w, x) in moran_case(12), seed in any::<u64>(), r in 1usize..60, alt in 0u8..3
    ) {
        let alt = [Alternative::TwoSided, Alternative::Greater, Alternative::Less][alt as usize];
        let v = w.view();
        let a = dense(v);
        let m1 = moran(v, &x, r, seed, alt, &Guard::unlimited()).unwrap();
        let m2 = moran(v, &x, r, seed, alt, &Guard::unlimited()).unwrap();
        // same seed, same result bit for bit (Debug of f64 round-trips; NaN std when R = 1)
        prop_assert_eq!(format!("{:?}", m1), format!("{:?}", m2));
        let p = m1.permutation.clone().unwrap();
        prop_assert_eq!(p.draws.len(), r);
        // draw i is Moran's I of z, arranged in the form's locality order,
        // shuffled by stream (seed, i): recompute densely in the original order
        let mean = x.iter().sum::<f64>() / x.len() as f64;
        let z: Vec<f64> = x.iter().map(|v| v - mean).collect();
        let order = vicino_core::stats::moments::weight_sums(v).1.order().to_vec();
        for (i, &d) in p.draws.iter().enumerate() {
            let mut yp: Vec<f64> = order.iter().map(|&u| z[u as usize]).collect();
            shuffle(&mut stream(seed, i as u64), &mut yp);
            let mut zp = vec![0.0; z.len()];
            for (k, &u) in order.iter().enumerate() {
                zp[u as usize] = yp[k];
            }
            prop_assert!(close(d, moran_dense(&a, &zp), 1e-10), "draw {}: {} vs {}", i, d, moran_dense(&a, &zp));
        }
        // p-value (M + 1) / (R + 1) (Hope 1968), M counted by brute force
        let e = m1.expected;
        let extreme = p.draws.iter().filter(|&&d| match alt {
            Alternative::Greater => d >= m1.statistic,
            Alternative::Less => d <= m1.statistic,
            Alternative::TwoSided => (d - e).abs() >= (m1.statistic - e).abs(),
        }).count();
        prop_assert_eq!(p.extreme, extreme);
        prop_assert_eq!(p.p_value, (extreme as f64 + 1.0) / (r as f64 + 1.0));
        let pm = p.draws.iter().sum::<f64>() / r as f64;
        prop_assert!(close(p.mean, pm, 1e-12));
        if r > 1 {
            let sd = (p.draws.iter().map(|d| (d - pm).powi(2)).sum::<f64>() / (r as f64 - 1.0)).sqrt();
            prop_assert!(close(p.std, sd, 1e-9));
        }
    }
}

#[test]
fn moran_refuses_self_weights_whose_moments_differ() {
    // exact permutation mean of z'Wz is m2 [tr W - (S0 - tr W) / (n - 1)] / n,
    // so E[I] = [tr W - (S0 - tr W) / (n - 1)] / S0 (Cliff and Ord 1981 with w_ii kept)
    let w = Csr::from_rows(vec![
        vec![(0, 1.0), (1, 1.0)],
        vec![(0, 1.0), (2, 1.0)],
        vec![(1, 1.0), (3, 1.0)],
        vec![(2, 1.0), (3, 2.0)],
        vec![(0, 1.0)],
    ]);
    let x = [1.0, 4.0, 2.0, 8.0, 3.0];
    let a = dense(w.view());
    let all: Vec<f64> =
        all_permutations(5).iter().map(|p| moran_dense(&a, &p.iter().map(|&i| x[i]).collect::<Vec<_>>())).collect();
    let exact_mean = all.iter().sum::<f64>() / all.len() as f64; // oracle: enumeration of all 5! orders
    let s0: f64 = a.iter().flatten().sum();
    let tr: f64 = (0..5).map(|i| a[i][i]).sum();
    assert_eq!((s0, tr), (10.0, 3.0)); // oracle: by hand
    assert!(close(exact_mean, (tr - (s0 - tr) / 4.0) / s0, 1e-12));
    // -1/(n-1) is not that mean, so the Cliff-Ord moments (which assume
    // w_ii = 0) do not apply: the core must refuse rather than report them
    assert!(!close(-1.0 / 4.0, exact_mean, 1e-6));
    assert!(matches!(
        moran(w.view(), &x, 0, 1, Alternative::TwoSided, &Guard::unlimited()),
        Err(Error::SelfLinks { units: Units { count: 2, .. }, .. })
    ));
}

#[test]
fn moran_permutations_do_not_depend_on_threads() {
    // one seeded stream per draw: the same draws in pools of 1, 2 and 4 threads
    let n = 3000;
    let xy: Vec<f64> = (0..n).flat_map(|i| [(i % 60) as f64, (i / 60) as f64 + 0.001 * (i % 7) as f64]).collect();
    let x: Vec<f64> = (0..n).map(|i| ((i * 37) % 101) as f64 + (i % 60) as f64).collect();
    let g = k_nearest(&xy, 12, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
    assert!(g.view().nnz() >= vicino_core::csr::PARALLEL_MIN_NNZ); // the parallel paths are taken
    let w = with_data(&g, standardize(g.view(), Method::Row, Islands::Raise, &Guard::unlimited()).unwrap());
    let run = |t: usize| {
        pool(t).install(|| {
            let nb = k_nearest(&xy, 12, Metric::Euclidean, &Guard::unlimited()).unwrap();
            let l = lag(w.view(), &x, 1).unwrap();
            let m = moran(w.view(), &x, 199, 42, Alternative::TwoSided, &Guard::unlimited()).unwrap();
            (nb.graph, l, m)
        })
    };
    let one = run(1);
    for t in [2, 4] {
        let other = run(t);
        assert_eq!(one.0, other.0, "neighbours with {t} threads");
        assert_eq!(one.1, other.1, "lag with {t} threads");
        assert_eq!(format!("{:?}", one.2), format!("{:?}", other.2), "Moran with {t} threads");
    }
    // and the lag is the dense product (oracle: brute force over the rows)
    let v = w.view();
    for i in 0..n {
        let (c, d) = v.row(i);
        let want: f64 = c.iter().zip(d).map(|(&j, &wij)| wij * x[j as usize]).sum();
        assert!((one.1[i] - want).abs() <= 1e-12 * want.abs().max(1.0));
    }
    assert!(close(
        one.2.statistic,
        {
            let mean = x.iter().sum::<f64>() / n as f64;
            let z: Vec<f64> = x.iter().map(|v| v - mean).collect();
            let num: f64 = (0..n)
                .map(|i| z[i] * v.row(i).0.iter().zip(v.row(i).1).map(|(&j, &wij)| wij * z[j as usize]).sum::<f64>())
                .sum();
            n as f64 / v.data().iter().sum::<f64>() * num / z.iter().map(|q| q * q).sum::<f64>()
        },
        1e-10
    )); // Moran (1950), sparse brute force
}

#[test]
fn moran_seeds_give_different_draws() {
    let w = Csr::from_rows((0..8).map(|i: usize| vec![((i + 1) % 8, 1.0), ((i + 7) % 8, 1.0)]).collect());
    let x = [1.0, 5.0, 2.0, 8.0, 3.0, 3.5, 9.0, 0.5];
    let a = moran(w.view(), &x, 50, 1, Alternative::Greater, &Guard::unlimited()).unwrap().permutation.unwrap();
    let b = moran(w.view(), &x, 50, 2, Alternative::Greater, &Guard::unlimited()).unwrap().permutation.unwrap();
    assert_ne!(a.draws, b.draws); // 50 draws from 8! orders agree by chance with probability ~ 0
}

#[test]
fn moran_errors() {
    let ring = |n: usize| Csr::from_rows((0..n).map(|i| vec![((i + 1) % n, 1.0), ((i + n - 1) % n, 1.0)]).collect());
    assert!(matches!(
        moran(ring(3).view(), &[1.0, 2.0, 3.0], 0, 1, Alternative::TwoSided, &Guard::unlimited()),
        Err(Error::TooFewUnits { need: 4, n: 3, .. })
    ));
    let w = ring(5);
    assert_eq!(
        moran(w.view(), &[1.0; 5], 0, 1, Alternative::TwoSided, &Guard::unlimited()).unwrap_err(),
        Error::ConstantValues
    );
    assert!(matches!(
        moran(w.view(), &[1.0; 4], 0, 1, Alternative::TwoSided, &Guard::unlimited()),
        Err(Error::LengthMismatch { .. })
    ));
    assert!(matches!(
        moran(w.view(), &[1.0, 2.0, f64::NAN, 0.0, 1.0], 0, 1, Alternative::TwoSided, &Guard::unlimited()),
        Err(Error::NonFiniteValues { units: Units { count: 1, .. } })
    ));
    let empty = Csr::from_rows(vec![vec![]; 5]);
    assert!(matches!(
        moran(empty.view(), &[1.0, 2.0, 3.0, 4.0, 5.0], 0, 1, Alternative::TwoSided, &Guard::unlimited()),
        Err(Error::NoWeight { .. })
    ));
    // alternating values on an even ring: every link joins unlike values, I = -1
    let m = moran(ring(6).view(), &[1.0, 0.0, 1.0, 0.0, 1.0, 0.0], 0, 1, Alternative::TwoSided, &Guard::unlimited())
        .unwrap();
    assert!((m.statistic + 1.0).abs() < 1e-12); // oracle: by hand, z'Wz = -z'z S0 / n
}
