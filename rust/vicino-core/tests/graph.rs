// Dense oracles index their matrices by (i, j), as the formulas do.
#![allow(clippy::needless_range_loop)]
//! Property tests of the graph operations and repairs, each against a dense
//! brute-force oracle (Floyd-Warshall path lengths, dense set operations,
//! pairwise distances) written here from the definitions.

mod common;

use common::dense;
use proptest::prelude::*;
use vicino_core::graph::{add_links, combine, components, health, order, select, symmetrize, SetOp, Symmetrize};
use vicino_core::neighbors::Metric;
use vicino_core::repair::{component_links, island_links};
use vicino_core::Guard;
use vicino_core::{Csr, CsrRef};

/// A non-negative n x n matrix with about `share` of entries stored.
fn matrix(max_n: usize, share: f64, diagonal: bool) -> impl Strategy<Value = Csr> {
    (1..=max_n).prop_flat_map(move |n| {
        prop::collection::vec(prop::option::weighted(share, 1u8..4), n * n).prop_map(move |v| {
            Csr::from_rows(
                (0..n)
                    .map(|i| {
                        (0..n)
                            .filter(|&j| diagonal || j != i)
                            .filter_map(|j| v[i * n + j].map(|x| (j, x as f64)))
                            .collect()
                    })
                    .collect(),
            )
        })
    })
}

/// oracle: all-pairs shortest path lengths by Floyd-Warshall (usize::MAX = unreachable).
fn path_lengths(w: CsrRef<'_>) -> Vec<Vec<usize>> {
    let n = w.n();
    let inf = usize::MAX / 4;
    let mut d = vec![vec![inf; n]; n];
    for i in 0..n {
        d[i][i] = 0;
        for &j in w.row(i).0 {
            if j as usize != i {
                d[i][j as usize] = 1;
            }
        }
    }
    for m in 0..n {
        for i in 0..n {
            for j in 0..n {
                if d[i][m] + d[m][j] < d[i][j] {
                    d[i][j] = d[i][m] + d[m][j];
                }
            }
        }
    }
    d
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 150, ..ProptestConfig::default() })]

    #[test]
    fn order_matches_shortest_paths(w in matrix(14, 0.15, true), k in 1usize..5) {
        let d = path_lengths(w.view());
        for cumulative in [false, true] {
            let o = order(w.view(), k, cumulative, &Guard::unlimited()).unwrap();
            let got = dense(o.view());
            for i in 0..w.n() {
                for j in 0..w.n() {
                    let want = i != j && if cumulative { d[i][j] >= 1 && d[i][j] <= k } else { d[i][j] == k };
                    prop_assert_eq!(got[i][j] == 1.0, want, "i {} j {} k {} cumulative {}", i, j, k, cumulative);
                }
            }
        }
    }

    #[test]
    fn components_match_reachability(w in matrix(14, 0.08, false)) {
        // oracle: i and j share a component iff connected in W + W^T (Floyd-Warshall)
        let n = w.n();
        let both = symmetrize(w.view(), Symmetrize::Union).unwrap();
        let d = path_lengths(both.view());
        let c = components(w.view());
        prop_assert_eq!(c.sizes.iter().sum::<usize>(), n);
        prop_assert!(c.sizes.windows(2).all(|p| p[0] >= p[1]));
        for i in 0..n {
            for j in 0..n {
                prop_assert_eq!(c.labels[i] == c.labels[j], d[i][j] < usize::MAX / 4);
            }
        }
        // sizes agree with labels
        for (l, &s) in c.sizes.iter().enumerate() {
            prop_assert_eq!(c.labels.iter().filter(|&&x| x == l as i64).count(), s);
        }
    }

    #[test]
    fn symmetrize_and_set_operations_match_dense(a in matrix(10, 0.3, true), seed in any::<u64>()) {
        let n = a.n();
        // b: a second matrix on the same units from the seed
        let b = Csr::from_rows((0..n).map(|i| (0..n).filter(|&j| (seed.rotate_left((i * n + j) as u32 % 64) & 3) == 0).map(|j| (j, 2.0)).collect()).collect());
        let (da, db) = (dense(a.view()), dense(b.view()));
        for (how, f) in [
            (Symmetrize::Union, (|x: f64, y: f64| x.max(y)) as fn(f64, f64) -> f64),
            (Symmetrize::Intersection, |x: f64, y: f64| x.min(y)),
            (Symmetrize::Mean, |x: f64, y: f64| (x + y) / 2.0),
        ] {
            let s = dense(symmetrize(a.view(), how).unwrap().view());
            for i in 0..n { for j in 0..n { prop_assert_eq!(s[i][j], f(da[i][j], da[j][i])); } }
        }
        for (op, f) in [
            (SetOp::Union, (|x: bool, y: bool| x || y) as fn(bool, bool) -> bool),
            (SetOp::Intersection, |x: bool, y: bool| x && y),
            (SetOp::Difference, |x: bool, y: bool| x && !y),
        ] {
            let c = dense(combine(a.view(), b.view(), op).unwrap().view());
            for i in 0..n { for j in 0..n {
                prop_assert_eq!(c[i][j], if f(da[i][j] > 0.0, db[i][j] > 0.0) { 1.0 } else { 0.0 });
            } }
        }
        let h = health(a.view(), &Guard::unlimited()).unwrap();
        let worst = (0..n).flat_map(|i| (0..n).map(move |j| (i, j))).map(|(i, j)| (da[i][j] - da[j][i]).abs()).fold(0.0, f64::max);
        prop_assert_eq!(h.max_asymmetry.map_or(0.0, |m| m.0), worst);
        prop_assert_eq!(h.self_links, (0..n).filter(|&i| da[i][i] > 0.0).count());
        let one_way = (0..n).flat_map(|i| (0..n).map(move |j| (i, j))).filter(|&(i, j)| i != j && da[i][j] > 0.0 && da[j][i] == 0.0).count();
        prop_assert_eq!(h.one_way, one_way);
    }

    #[test]
    fn select_is_dense_indexing(a in matrix(10, 0.3, true), pick in prop::collection::vec(any::<bool>(), 10), rev in any::<bool>()) {
        let n = a.n();
        let mut keep: Vec<usize> = (0..n).filter(|&i| pick[i]).collect();
        if rev { keep.reverse(); }
        let (s, src) = select(a.view(), &keep).unwrap();
        let (da, ds) = (dense(a.view()), dense(s.view()));
        for (r, &u) in keep.iter().enumerate() { for (c, &v) in keep.iter().enumerate() { prop_assert_eq!(ds[r][c], da[u][v]); } }
        for (e, &x) in s.view().data().iter().enumerate() { prop_assert_eq!(a.view().data()[src[e] as usize], x); }
    }

    #[test]
    fn repairs_leave_no_islands_and_one_piece(
        pts in prop::collection::vec((-20i32..20, -20i32..20), 3..30),
        w in matrix(30, 0.05, false),
    ) {
        let n = pts.len().min(w.n());
        prop_assume!(n >= 3);
        let xy: Vec<f64> = pts[..n].iter().flat_map(|&(x, y)| [x as f64, y as f64]).collect();
        let keep: Vec<usize> = (0..n).collect();
        let (w, _) = select(w.view(), &keep).unwrap();
        let s = symmetrize(w.view(), Symmetrize::Union).unwrap();
        let links = island_links(s.view(), &xy, Metric::Euclidean, 1, &Guard::unlimited()).unwrap();
        // oracle: each island's link goes to a brute-force nearest other unit (lowest position on ties)
        let dist = |i: usize, j: usize| ((xy[2 * i] - xy[2 * j]).powi(2) + (xy[2 * i + 1] - xy[2 * j + 1]).powi(2)).sqrt();
        for i in s.view().islands() {
            let best = (0..n).filter(|&j| j != i).min_by(|&a, &b| dist(i, a).total_cmp(&dist(i, b)).then(a.cmp(&b))).unwrap();
            prop_assert!(links.iter().any(|&(p, q, _)| p == i && q == best));
        }
        let (fixed, _) = add_links(s.view(), links.iter().map(|&(i, j, _)| (i, j, 1.0)).collect()).unwrap();
        prop_assert!(fixed.view().islands().is_empty());
        prop_assert!(fixed.view().is_symmetric());
        let more = component_links(fixed.view(), &xy, Metric::Euclidean, &Guard::unlimited()).unwrap();
        let (joined, _) = add_links(fixed.view(), more.iter().map(|&(i, j, _)| (i, j, 1.0)).collect()).unwrap();
        prop_assert_eq!(components(joined.view()).count(), 1);
        prop_assert!(joined.view().is_symmetric());
        prop_assert_eq!(more.len(), 2 * (components(fixed.view()).count() - 1));
    }
}

#[test]
fn results_do_not_depend_on_thread_count() {
    // a ring of 50_000 units with chords: large enough for the parallel paths
    let n = 50_000;
    let w =
        Csr::from_rows((0..n).map(|i| vec![((i + 1) % n, 1.0), ((i + 7) % n, 2.0), ((i + n - 1) % n, 1.0)]).collect());
    let run = |t: usize| {
        rayon::ThreadPoolBuilder::new().num_threads(t).build().unwrap().install(|| {
            (
                order(w.view(), 2, true, &Guard::unlimited()).unwrap(),
                symmetrize(w.view(), Symmetrize::Mean),
                health(w.view(), &Guard::unlimited()),
            )
        })
    };
    assert_eq!(run(1), run(2)); // common practice: parallel loops must not change results
}
