//! Neighbour search on points: the exact k nearest neighbours and all
//! neighbours within a distance, with the distances kept, so that distance-
//! based weights need no second search.
//!
//! Method: a static k-d tree (the `kiddo` crate; chosen over an R-tree from
//! `rstar` by measurement, see DEVELOPERS.md) answers the queries, in parallel
//! over query points with `rayon`. The tree's own distances only choose
//! candidates: every kept distance is recomputed here in the public metric,
//! and the final order is (distance, position), so ties go to the unit at the
//! lower position whatever the tree did. Near-ties at the k-th place trigger
//! an inclusive radius query that settles them exactly.
//! Complexity: O(n log n) to build, about O(log n + k) per query.
//!
//! Duplicate locations are handled: copies are at distance 0 of each other,
//! so they are each other's nearest neighbours, ordered by position.

pub mod metric;

use crate::csr::Csr;
use crate::error::{Error, Result};
use kiddo::{ImmutableKdTree, SquaredEuclidean};
pub use metric::{Metric, EARTH_RADIUS_KM};
use rayon::prelude::*;
use std::num::NonZeroUsize;

/// Neighbour lists: a CSR graph whose data are distances in the metric, plus
/// how many units share their location with another unit.
#[derive(Debug, Clone)]
pub struct Neighbors {
    pub graph: Csr,
    pub duplicate_units: usize,
}

/// Relative slack for candidate radii so that the tree's rounding never drops
/// a point that the exact metric keeps.
const SLACK: f64 = 1e-9;

/// The search space: the tree, the points in tree coordinates, and the
/// original coordinates for exact distances.
struct Space<'a, const D: usize> {
    tree: ImmutableKdTree<f64, D>,
    pts: Vec<[f64; D]>,
    xy: &'a [[f64; 2]],
    metric: Metric,
}

impl<'a, const D: usize> Space<'a, D> {
    fn new(xy: &'a [[f64; 2]], metric: Metric, to_tree: impl Fn([f64; 2]) -> [f64; D] + Sync) -> Self {
        let pts: Vec<[f64; D]> = xy.par_iter().map(|&p| to_tree(p)).collect();
        let tree = ImmutableKdTree::<f64, D>::new_from_slice_parallel(&pts)
            .expect("finite coordinates always build a tree");
        Self { tree, pts, xy, metric }
    }

    #[inline]
    fn dist(&self, i: usize, j: usize) -> f64 {
        self.metric.distance(self.xy[i], self.xy[j])
    }

    /// Squared tree radius that surely holds every point within `d` (public metric).
    fn tree_radius_sq(&self, d: f64) -> f64 {
        let r = match self.metric {
            Metric::Euclidean => d,
            Metric::GreatCircle => metric::chord_for_km(d) + 1e-12,
        };
        let r = r * (1.0 + SLACK) + f64::MIN_POSITIVE;
        r * r
    }

    /// All points within `d` of point i in the public metric, self excluded,
    /// as (distance, position), unsorted.
    fn within(&self, i: usize, d: f64, out: &mut Vec<(f64, usize)>) {
        out.clear();
        let found = self
            .tree
            .query(&self.pts[i])
            .within::<SquaredEuclidean<f64>>(self.tree_radius_sq(d))
            .unsorted()
            .execute();
        for r in found {
            let j = r.item as usize;
            if j != i {
                let dj = self.dist(i, j);
                if dj <= d {
                    out.push((dj, j));
                }
            }
        }
    }

    /// Whether two sorted distances are far enough apart that the tree's
    /// rounding cannot have swapped them.
    fn clearly_less(&self, a: f64, b: f64) -> bool {
        match self.metric {
            Metric::Euclidean => b > a * (1.0 + 4.0 * SLACK),
            Metric::GreatCircle => {
                metric::chord_for_km(b) > (metric::chord_for_km(a) + 2e-12) * (1.0 + 4.0 * SLACK)
            }
        }
    }

    /// The k nearest of point i, self excluded, sorted by (distance, position).
    fn k_nearest(&self, i: usize, k: usize, buf: &mut Vec<(f64, usize)>) {
        let n = self.xy.len();
        let m = (k + 2).min(n);
        let found = self
            .tree
            .query(&self.pts[i])
            .nearest_n::<SquaredEuclidean<f64>>(NonZeroUsize::new(m).expect("m >= 2"))
            .execute();
        buf.clear();
        buf.extend(found.iter().filter(|r| r.item as usize != i).map(|r| {
            let j = r.item as usize;
            (self.dist(i, j), j)
        }));
        sort_pairs(buf);
        let settled = buf.len() == n - 1 || (buf.len() > k && self.clearly_less(buf[k - 1].0, buf[k].0));
        if !settled {
            let dk = buf[k - 1].0;
            self.within(i, dk, buf);
            sort_pairs(buf);
        }
        buf.truncate(k);
    }
}

fn sort_pairs(v: &mut [(f64, usize)]) {
    v.sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
}

fn as_pairs(xy: &[f64]) -> &[[f64; 2]] {
    // chunks of two, viewed as arrays without a copy
    let (pairs, rest) = xy.as_chunks::<2>();
    debug_assert!(rest.is_empty());
    pairs
}

/// Groups of units at identical locations: for each unit, the positions of
/// all units at its location (sorted), or an empty slice when it is alone.
struct Duplicates {
    order: Vec<usize>,
    /// start and end in `order` of the group of each unit
    group: Vec<(usize, usize)>,
    duplicate_units: usize,
}

impl Duplicates {
    fn find(xy: &[[f64; 2]]) -> Self {
        let n = xy.len();
        // -0.0 and 0.0 are the same place
        let key = |i: usize| {
            let p = xy[i];
            ((p[0] + 0.0).to_bits(), (p[1] + 0.0).to_bits())
        };
        let mut order: Vec<usize> = (0..n).collect();
        order.par_sort_unstable_by_key(|&i| (key(i), i));
        let mut group = vec![(0, 0); n];
        let mut duplicate_units = 0;
        let mut a = 0;
        while a < n {
            let mut b = a + 1;
            while b < n && key(order[b]) == key(order[a]) {
                b += 1;
            }
            if b - a > 1 {
                duplicate_units += b - a;
                for &u in &order[a..b] {
                    group[u] = (a, b);
                }
            }
            a = b;
        }
        Self { order, group, duplicate_units }
    }

    /// Positions sharing unit i's location (i included, sorted by position).
    fn of(&self, i: usize) -> &[usize] {
        let (a, b) = self.group[i];
        &self.order[a..b]
    }
}

fn build<R: Send>(
    xy: &[f64],
    metric: Metric,
    per_point: impl Fn(&dyn SpaceQuery, usize, &mut Vec<(f64, usize)>) -> R + Sync,
) -> Result<Vec<R>> {
    metric.check(xy)?;
    let pairs = as_pairs(xy);
    let run = |space: &dyn SpaceQuery| -> Vec<R> {
        (0..pairs.len())
            .into_par_iter()
            .with_min_len(256)
            .map_init(Vec::new, |buf, i| per_point(space, i, buf))
            .collect()
    };
    Ok(match metric {
        Metric::Euclidean => run(&Space::<2>::new(pairs, metric, |p| p)),
        Metric::GreatCircle => run(&Space::<3>::new(pairs, metric, metric::unit_vector)),
    })
}

/// Object-safe face of [`Space`] for either dimension.
trait SpaceQuery: Sync {
    fn k_nearest(&self, i: usize, k: usize, buf: &mut Vec<(f64, usize)>);
    fn within(&self, i: usize, d: f64, buf: &mut Vec<(f64, usize)>);
}

impl<const D: usize> SpaceQuery for Space<'_, D> {
    fn k_nearest(&self, i: usize, k: usize, buf: &mut Vec<(f64, usize)>) {
        Space::k_nearest(self, i, k, buf)
    }
    fn within(&self, i: usize, d: f64, buf: &mut Vec<(f64, usize)>) {
        Space::within(self, i, d, buf)
    }
}

/// Sort each row by column and assemble CSR.
fn assemble(rows: Vec<Vec<(f64, usize)>>) -> Csr {
    Csr::from_rows(rows.into_iter().map(|r| r.into_iter().map(|(d, j)| (j, d)).collect()).collect())
}

/// The exact `k` nearest neighbours of every point, self excluded.
///
/// `xy` holds interleaved coordinates (x0, y0, x1, y1, ...); for
/// [`Metric::GreatCircle`] they are (longitude, latitude) in degrees, and one
/// place spelled two ways (longitude 190 and -170, any longitude at a pole)
/// counts as one location.
/// Ties at the k-th distance go to the lower position. The result's data are
/// distances (km for great circle).
///
/// ```
/// use vicino_core::neighbors::{k_nearest, Metric};
/// let xy = [0.0, 0.0, 1.0, 0.0, 3.0, 0.0];
/// let nb = k_nearest(&xy, 1, Metric::Euclidean).unwrap();
/// let g = nb.graph.view();
/// assert_eq!(g.indices(), &[1, 0, 1]);
/// assert_eq!(g.data(), &[1.0, 1.0, 2.0]);
/// ```
pub fn k_nearest(xy: &[f64], k: usize, metric: Metric) -> Result<Neighbors> {
    let n = metric.check(xy)?;
    let xy = &*metric.canonical(xy);
    if k == 0 || k >= n {
        return Err(Error::InvalidK { k, n });
    }
    let dups = Duplicates::find(as_pairs(xy));
    let rows = build(xy, metric, |space, i, buf| {
        let same = dups.of(i);
        if same.len() > k {
            // k copies at distance 0: the lowest positions other than i
            same.iter().filter(|&&j| j != i).take(k).map(|&j| (0.0, j)).collect()
        } else {
            space.k_nearest(i, k, buf);
            buf.clone()
        }
    })?;
    Ok(Neighbors { graph: assemble(rows), duplicate_units: dups.duplicate_units })
}

/// Every pair of distinct points at distance `<= radius` (inclusive), self
/// excluded. Data are distances (km for great circle).
///
/// ```
/// use vicino_core::neighbors::{within_distance, Metric};
/// let xy = [0.0, 0.0, 1.0, 0.0, 3.0, 0.0];
/// let nb = within_distance(&xy, 2.0, Metric::Euclidean).unwrap();
/// assert_eq!(nb.graph.view().counts(), vec![1, 2, 1]);
/// ```
pub fn within_distance(xy: &[f64], radius: f64, metric: Metric) -> Result<Neighbors> {
    metric.check(xy)?;
    let xy = &*metric.canonical(xy);
    if !(radius >= 0.0) || !radius.is_finite() {
        return Err(Error::InvalidRadius { radius });
    }
    let dups = Duplicates::find(as_pairs(xy));
    let rows = build(xy, metric, |space, i, buf| {
        space.within(i, radius, buf);
        buf.clone()
    })?;
    Ok(Neighbors { graph: assemble(rows), duplicate_units: dups.duplicate_units })
}
