//! The weights as a graph: connected components, the health facts of an
//! audit, k-step neighbours, set operations on links, symmetrizing, and
//! selecting units. Every function is O(n + nnz) or, for k-step
//! neighbours, O(size of the output); rows are processed in parallel above
//! a size threshold and the output never depends on the thread count.

use crate::csr::{build_rows, merge_rows, Csr, CsrRef, PARALLEL_MIN_NNZ};
use crate::error::{Error, Link, Result, Unit};
use crate::guard::Guard;
use std::sync::atomic::{AtomicUsize, Ordering};

/// Connected components, links taken in either direction (weak components
/// of a directed graph).
#[derive(Debug, Clone, PartialEq)]
pub struct Components {
    /// Component of each unit: 0 is the largest, ties broken by the lowest
    /// position in the component.
    pub labels: Vec<i64>,
    /// Size of each component, largest first.
    pub sizes: Vec<usize>,
}

impl Components {
    pub fn count(&self) -> usize {
        self.sizes.len()
    }
}

fn find(parent: &mut [u32], mut x: u32) -> u32 {
    while parent[x as usize] != x {
        let up = parent[parent[x as usize] as usize];
        parent[x as usize] = up; // path halving
        x = up;
    }
    x
}

/// Connected components by union-find over the links (either direction).
pub fn components(w: CsrRef<'_>) -> Components {
    let n = w.n();
    let mut parent: Vec<u32> = (0..n as u32).collect();
    for i in 0..n {
        for &j in w.row(i).0 {
            let (a, b) = (find(&mut parent, i as u32), find(&mut parent, j as u32));
            if a != b {
                // the lower root wins, so roots are the lowest position of each component
                let (lo, hi) = if a < b { (a, b) } else { (b, a) };
                parent[hi as usize] = lo;
            }
        }
    }
    let roots: Vec<u32> = (0..n as u32).map(|x| find(&mut parent, x)).collect();
    let mut size = vec![0usize; n];
    for &r in &roots {
        size[r as usize] += 1;
    }
    // components ordered by size (largest first), then by their lowest position
    let mut order: Vec<usize> = (0..n).filter(|&r| roots[r] as usize == r).collect();
    order.sort_by(|&a, &b| size[b].cmp(&size[a]).then(a.cmp(&b)));
    let mut label_of_root = vec![-1i64; n];
    for (label, &r) in order.iter().enumerate() {
        label_of_root[r] = label as i64;
    }
    Components {
        labels: roots.iter().map(|&r| label_of_root[r as usize]).collect(),
        sizes: order.iter().map(|&r| size[r]).collect(),
    }
}

/// The structural facts an audit reports.
#[derive(Debug, Clone, PartialEq)]
pub struct Health {
    pub components: Components,
    /// How many other units name each unit as a neighbour (column counts,
    /// self-links not counted).
    pub in_counts: Vec<usize>,
    /// Units linked to themselves.
    pub self_links: usize,
    /// Links i -> j without a link j -> i.
    pub one_way: usize,
    /// The largest |w_ij - w_ji| (a missing link weighs 0), and where
    /// (i < j); None when the matrix is symmetric.
    pub max_asymmetry: Option<(f64, usize, usize)>,
    /// Stored weights that are not positive and finite (never made by
    /// vicino; a broken matrix would show them).
    pub bad_weights: usize,
}

/// Components, column counts, self-links and asymmetry in one go. Each
/// link is looked up in the other unit's row (a binary search), so no
/// transpose is built; rows are visited in parallel.
pub fn health(w: CsrRef<'_>, guard: &Guard) -> Result<Health> {
    let n = w.n();
    /// (self-links, one-way links, largest asymmetry as (value, i, j) with i < j)
    type Acc = (usize, usize, Option<(f64, usize, usize)>);
    // the largest value; among equals the lowest pair
    fn better(a: Option<(f64, usize, usize)>, b: Option<(f64, usize, usize)>) -> Option<(f64, usize, usize)> {
        match (a, b) {
            (Some(x), Some(y)) => Some(if y.0 > x.0 || (y.0 == x.0 && (y.1, y.2) < (x.1, x.2)) { y } else { x }),
            (x, None) => x,
            (None, y) => y,
        }
    }
    // counts, and a maximum with its own tie-break: the order of the visits does not matter
    let (self_links, one_way, max_asymmetry): Acc = w.fold_reverse_by_target(
        |_, _| (0, 0, None),
        |acc, i, j, x, back| {
            if i == j {
                acc.0 += 1;
                return;
            }
            acc.1 += back.is_none() as usize;
            let d = (x - back.unwrap_or(0.0)).abs();
            if d > 0.0 {
                acc.2 = better(acc.2, Some((d, i.min(j), i.max(j))));
            }
        },
        |acc, _, _| acc,
        |a, b| (a.0 + b.0, a.1 + b.1, better(a.2, b.2)),
    );
    guard.check()?;
    let mut in_counts = vec![0usize; n];
    for i in 0..n {
        for &j in w.row(i).0 {
            in_counts[j as usize] += (j as usize != i) as usize;
        }
    }
    let bad_weights = w.data().iter().filter(|v| !(**v > 0.0 && v.is_finite())).count();
    Ok(Health { components: components(w), in_counts, self_links, one_way, max_asymmetry, bad_weights })
}

/// Each linked pair once, as (lower, higher) position, whether the link
/// runs one way or both: the pairs to draw in a map of the links. Self-links
/// are left out. Rows in order, so the output never depends on the thread count.
pub fn undirected_pairs(w: CsrRef<'_>) -> Vec<(u32, u32)> {
    w.fold_reverse(
        Vec::new,
        |acc, i, j, _, back| {
            if i < j || (i > j && back.is_none()) {
                acc.push((i.min(j) as u32, i.max(j) as u32));
            }
        },
        |mut a, b| {
            a.extend(b);
            a
        },
    )
}

/// Bytes per stored entry of a result handed to Python (index and weight,
/// and Python's own copy of per-link facts).
const ENTRY_BYTES: f64 = 24.0;

/// Binary weights linking each unit to the units exactly `k` links away
/// along the links (shortest path length k), or, when `cumulative`, 1 to
/// `k` links away. A unit is never its own k-step neighbour.
pub fn order(w: CsrRef<'_>, k: usize, cumulative: bool, guard: &Guard) -> Result<Csr> {
    if k == 0 {
        return Err(Error::InvalidOrder { k });
    }
    let n = w.n();
    if n >= u32::MAX as usize {
        return Err(Error::TooLarge {
            what: "k-step neighbours",
            needed: f64::INFINITY,
            limit: guard.memory_limit(),
            advice: "order supports fewer than 2^32 - 1 units",
        });
    }
    let limit = guard.memory_limit() as f64 / ENTRY_BYTES;
    let found = AtomicUsize::new(0);
    // breadth-first by levels; `seen` is a per-thread stamp per unit
    // (seen[j] == i + 1: j already reached from row i), so it never needs clearing
    let parts = build_rows(
        n,
        None,
        w.nnz() >= PARALLEL_MIN_NNZ,
        || (Vec::<u32>::new(), Vec::new(), Vec::new()),
        |(seen, level, next): &mut (Vec<u32>, Vec<i64>, Vec<i64>), i, cols, ones: &mut Vec<f64>| {
            guard.check()?;
            if seen.len() != n {
                *seen = vec![0u32; n];
            }
            let start = cols.len();
            let stamp = i as u32 + 1;
            seen[i] = stamp;
            level.clear();
            for &j in w.row(i).0 {
                if seen[j as usize] != stamp {
                    seen[j as usize] = stamp;
                    level.push(j);
                }
            }
            // every unit is taken at its first (shortest) level
            for step in 1..=k {
                if cumulative || step == k {
                    cols.extend_from_slice(level);
                }
                if step == k || level.is_empty() {
                    break;
                }
                next.clear();
                for &u in level.iter() {
                    for &j in w.row(u as usize).0 {
                        if seen[j as usize] != stamp {
                            seen[j as usize] = stamp;
                            next.push(j);
                        }
                    }
                }
                std::mem::swap(level, next);
            }
            cols[start..].sort_unstable();
            ones.resize(cols.len(), 1.0);
            let total = found.fetch_add(cols.len() - start, Ordering::Relaxed) + cols.len() - start;
            if total as f64 > limit {
                return Err(Error::TooLarge {
                    what: "the k-step neighbours",
                    needed: total as f64 * ENTRY_BYTES * n as f64 / (i + 1) as f64,
                    limit: guard.memory_limit(),
                    advice: "use a smaller k, or sparser weights",
                });
            }
            Ok(())
        },
    )?;
    Ok(Csr::from_parts(n, parts))
}

/// How to combine the links of two matrices over the same units.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SetOp {
    /// links in either
    Union,
    /// links in both
    Intersection,
    /// links in the first and not in the second
    Difference,
}

impl SetOp {
    pub fn parse(name: &str) -> Result<Self> {
        match name {
            "union" => Ok(Self::Union),
            "intersection" => Ok(Self::Intersection),
            "difference" => Ok(Self::Difference),
            _ => Err(Error::UnknownOption {
                what: "set operation",
                name: name.into(),
                options: "\"union\", \"intersection\", \"difference\"",
            }),
        }
    }
}

/// Binary weights from the links of `a` and `b` combined by `op`.
pub fn combine(a: CsrRef<'_>, b: CsrRef<'_>, op: SetOp) -> Result<Csr> {
    if a.n() != b.n() {
        return Err(Error::LengthMismatch { what: "the second matrix", expected: a.n(), got: b.n() });
    }
    let parallel = a.nnz() + b.nnz() >= PARALLEL_MIN_NNZ;
    let parts = build_rows(
        a.n(),
        None,
        parallel,
        || (),
        |_, i, cols, ones: &mut Vec<f64>| {
            let ((ac, av), (bc, bv)) = (a.row(i), b.row(i));
            merge_rows(ac, av, bc, bv, |c, x, y| {
                let keep = match op {
                    SetOp::Union => true,
                    SetOp::Intersection => x.is_some() && y.is_some(),
                    SetOp::Difference => x.is_some() && y.is_none(),
                };
                if keep {
                    cols.push(c);
                    ones.push(1.0);
                }
            });
            Ok(())
        },
    )?;
    Ok(Csr::from_parts(a.n(), parts))
}

/// How to make a matrix symmetric from w_ij and w_ji (a missing link weighs 0).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Symmetrize {
    /// max(w_ij, w_ji): a link in either direction
    Union,
    /// min(w_ij, w_ji): only links in both directions
    Intersection,
    /// (w_ij + w_ji) / 2
    Mean,
}

impl Symmetrize {
    pub fn parse(name: &str) -> Result<Self> {
        match name {
            "union" => Ok(Self::Union),
            "intersection" => Ok(Self::Intersection),
            "mean" => Ok(Self::Mean),
            _ => Err(Error::UnknownOption {
                what: "symmetrize rule",
                name: name.into(),
                options: "\"union\", \"intersection\", \"mean\"",
            }),
        }
    }
}

/// A symmetric matrix from `w` and its transpose.
pub fn symmetrize(w: CsrRef<'_>, how: Symmetrize) -> Result<Csr> {
    let t = w.transpose();
    let tv = t.view();
    let parts = build_rows(
        w.n(),
        None,
        w.nnz() >= PARALLEL_MIN_NNZ,
        || (),
        |_, i, cols, vals| {
            let ((ac, av), (bc, bv)) = (w.row(i), tv.row(i));
            let mut faint = None;
            merge_rows(ac, av, bc, bv, |c, x, y| {
                let v = match (x.map(|x| x.1), y) {
                    (Some(x), Some(y)) => match how {
                        Symmetrize::Union => x.max(y),
                        Symmetrize::Intersection => x.min(y),
                        // the sum halved is exact for subnormals; halves first only if the sum overflows
                        Symmetrize::Mean => {
                            let sum = x + y;
                            if sum.is_finite() {
                                0.5 * sum
                            } else {
                                0.5 * x + 0.5 * y
                            }
                        }
                    },
                    (Some(v), None) | (None, Some(v)) => match how {
                        Symmetrize::Union => v,
                        Symmetrize::Intersection => 0.0,
                        Symmetrize::Mean => 0.5 * v,
                    },
                    (None, None) => 0.0,
                };
                if v > 0.0 {
                    cols.push(c);
                    vals.push(v);
                } else if how == Symmetrize::Mean {
                    // half of the smallest subnormal weight rounds to 0
                    faint = Some(c);
                }
            });
            match faint {
                Some(c) => Err(Error::WeightOutOfRange {
                    what: "mean weight",
                    link: Link(i, c as usize),
                    value: 0.0,
                    advice: "the one-way weight is too small to halve; rescale the weights first",
                }),
                None => Ok(()),
            }
        },
    )?;
    Ok(Csr::from_parts(w.n(), parts))
}

/// The weights among the units `keep` (positions, in the new order; no
/// repeats): rows and columns of other units are dropped. Also returns,
/// for each entry of the result, the index of the entry of `w` it came from.
pub fn select(w: CsrRef<'_>, keep: &[usize]) -> Result<(Csr, Vec<i64>)> {
    let n = w.n();
    let mut new_pos = vec![-1i64; n];
    for (r, &u) in keep.iter().enumerate() {
        if u >= n {
            return Err(Error::PositionOutOfRange { position: u, n });
        }
        if new_pos[u] >= 0 {
            return Err(Error::RepeatedPosition { unit: Unit(u) });
        }
        new_pos[u] = r as i64;
    }
    let base = w.indptr();
    let all = w.data();
    let m = keep.len();
    let (indptr, indices, source) = build_rows(
        m,
        None,
        w.nnz() >= PARALLEL_MIN_NNZ,
        Vec::new,
        |pairs: &mut Vec<(i64, i64)>, r, cols, src: &mut Vec<i64>| {
            let u = keep[r];
            pairs.clear();
            for (e, &j) in w.row(u).0.iter().enumerate() {
                let to = new_pos[j as usize];
                if to >= 0 {
                    pairs.push((to, base[u] + e as i64));
                }
            }
            // the new order of the columns need not be the old one
            pairs.sort_unstable();
            for &(c, e) in pairs.iter() {
                cols.push(c);
                src.push(e);
            }
            Ok(())
        },
    )?;
    let data = source.iter().map(|&e| all[e as usize]).collect();
    Ok((Csr::from_canonical(m, indptr, indices, data), source))
}

/// `w` with new links (i, j, weight) added. A new link that already
/// exists, or is repeated, is an error. Also returns, for each entry of the
/// result, the index of the entry of `w` it came from, or -1 for a new link.
pub fn add_links(w: CsrRef<'_>, mut links: Vec<(usize, usize, f64)>) -> Result<(Csr, Vec<i64>)> {
    let n = w.n();
    for &(i, j, v) in &links {
        if i >= n || j >= n {
            return Err(Error::PositionOutOfRange { position: i.max(j), n });
        }
        if !(v.is_finite() && v > 0.0) {
            return Err(Error::NonFiniteWeight { link: Link(i, j), value: v });
        }
    }
    links.sort_unstable_by_key(|&(i, j, _)| (i, j));
    if let Some(p) = links.windows(2).find(|p| (p[0].0, p[0].1) == (p[1].0, p[1].1)) {
        return Err(Error::LinkExists { link: Link(p[0].0, p[0].1) });
    }
    // the new links of each row, as a CSR of their own
    let mut starts = vec![0usize; n + 1];
    for &(i, _, _) in &links {
        starts[i + 1] += 1;
    }
    for i in 0..n {
        starts[i + 1] += starts[i];
    }
    let new_cols: Vec<i64> = links.iter().map(|l| l.1 as i64).collect();
    let new_vals: Vec<f64> = links.iter().map(|l| l.2).collect();
    // entries carry (value, source) until the end
    let (indptr, indices, entries) = build_rows(
        n,
        None,
        w.nnz() + links.len() >= PARALLEL_MIN_NNZ,
        || (),
        |_, i, cols, out: &mut Vec<(f64, i64)>| {
            let (ac, av) = w.row(i);
            let (bc, bv) = (&new_cols[starts[i]..starts[i + 1]], &new_vals[starts[i]..starts[i + 1]]);
            let mut clash = None;
            merge_rows(ac, av, bc, bv, |c, x, y| {
                match (x, y) {
                    (Some(_), Some(_)) => clash = Some(c as usize),
                    (Some((p, v)), None) => out.push((v, w.indptr()[i] + p as i64)),
                    (None, Some(v)) => out.push((v, -1)),
                    (None, None) => {}
                }
                cols.push(c);
            });
            match clash {
                Some(j) => Err(Error::LinkExists { link: Link(i, j) }),
                None => Ok(()),
            }
        },
    )?;
    let (data, source) = entries.into_iter().unzip();
    Ok((Csr::from_canonical(n, indptr, indices, data), source))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn path(n: usize) -> Csr {
        // the path 0 - 1 - ... - (n-1), both directions
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
    fn components_of_two_paths_and_an_island() {
        // units 0-1-2, 3 alone, 4-5: by hand, sizes 3, 2, 1
        let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(2, 1.0)], vec![], vec![], vec![(5, 1.0)], vec![]]);
        let c = components(w.view());
        assert_eq!(c.sizes, vec![3, 2, 1]);
        assert_eq!(c.labels, vec![0, 0, 0, 2, 1, 1]);
    }

    #[test]
    fn order_on_a_path() {
        // on a path, unit i is exactly k steps from i - k and i + k (by hand)
        let w = path(6);
        let o2 = order(w.view(), 2, false, &Guard::unlimited()).unwrap();
        assert_eq!(o2.view().row(0).0, &[2]);
        assert_eq!(o2.view().row(3).0, &[1, 5]);
        let c2 = order(w.view(), 2, true, &Guard::unlimited()).unwrap();
        assert_eq!(c2.view().row(3).0, &[1, 2, 4, 5]);
        assert_eq!(order(w.view(), 1, false, &Guard::unlimited()).unwrap().view().indices(), w.view().indices());
        assert!(order(w.view(), 0, false, &Guard::unlimited()).is_err());
    }

    #[test]
    fn set_operations_and_symmetrize() {
        let a = Csr::from_rows(vec![vec![(1, 2.0)], vec![], vec![(0, 1.0), (1, 3.0)]]);
        let b = Csr::from_rows(vec![vec![(1, 1.0), (2, 1.0)], vec![], vec![(1, 1.0)]]);
        let u = combine(a.view(), b.view(), SetOp::Union).unwrap();
        assert_eq!(u.view().indices(), &[1, 2, 0, 1]);
        let x = combine(a.view(), b.view(), SetOp::Intersection).unwrap();
        assert_eq!(x.view().indices(), &[1, 1]);
        let d = combine(a.view(), b.view(), SetOp::Difference).unwrap();
        assert_eq!(d.view().indices(), &[0]);
        // W = [[0,2,0],[0,0,0],[1,3,0]]: by hand, mean gives [[0,1,.5],[1,0,1.5],[.5,1.5,0]]
        let m = symmetrize(a.view(), Symmetrize::Mean).unwrap();
        assert_eq!(m.view().data(), &[1.0, 0.5, 1.0, 1.5, 0.5, 1.5]);
        assert!(m.view().is_symmetric());
        assert_eq!(symmetrize(a.view(), Symmetrize::Intersection).unwrap().view().nnz(), 0);
        let h = health(a.view(), &Guard::unlimited()).unwrap();
        assert_eq!(h.one_way, 3);
        assert_eq!(h.max_asymmetry, Some((3.0, 1, 2)));
        assert_eq!(h.in_counts, vec![1, 2, 0]);
    }

    #[test]
    fn select_and_add() {
        let w = path(4);
        let (s, src) = select(w.view(), &[3, 2, 0]).unwrap();
        // new order 3, 2, 0: 3 - 2 linked, 0 has lost its only neighbour
        assert_eq!(s.view().indptr(), &[0, 1, 2, 2]);
        assert_eq!(s.view().indices(), &[1, 0]);
        assert_eq!(src, vec![5, 4]);
        assert!(select(w.view(), &[1, 1]).is_err());
        let (a, src) = add_links(s.view(), vec![(2, 0, 1.0), (0, 2, 1.0)]).unwrap();
        assert_eq!(a.view().indices(), &[1, 2, 0, 0]);
        assert_eq!(src, vec![0, -1, 1, -1]);
        assert!(add_links(s.view(), vec![(0, 1, 1.0)]).is_err());
    }
}
