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
//! so they are each other's nearest neighbours, ordered by position. Queries
//! run in the Z-order of the locations (see `Layout`), on a copy of the
//! points in that order, so that memory is read in order whatever the order
//! of the input; each row is written to its own place at the end.

pub mod metric;

use crate::csr::{build_fixed_rows, build_rows, build_visited_rows, Csr, BUILD_BLOCK as ROWS_PER_BLOCK};
use crate::error::{Error, Result};
use crate::frame::Frame;
use crate::guard::Guard;
use kiddo::{ImmutableKdTree, SquaredEuclidean};
pub use metric::{Metric, EARTH_RADIUS_KM};
use rayon::prelude::*;
use std::num::NonZeroUsize;
use std::sync::atomic::{AtomicUsize, Ordering};

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

/// The search space: the tree over the points in one order (the tree's
/// items), the points in that order for exact distances, and the position
/// of each item in the caller's numbering. Laid out in Z-order, a query and
/// the points it finds sit close together in memory, whatever the order of
/// the input.
struct Space<'a, const D: usize> {
    tree: ImmutableKdTree<f64, D>,
    xy: &'a [[f64; 2]],
    label: &'a [usize],
    metric: Metric,
    to_tree: fn([f64; 2]) -> [f64; D],
}

impl<'a, const D: usize> Space<'a, D> {
    /// The space of points `xy` (item s at `xy[s]`, position `label[s]`).
    fn new(xy: &'a [[f64; 2]], label: &'a [usize], metric: Metric, to_tree: fn([f64; 2]) -> [f64; D]) -> Self {
        debug_assert_eq!(xy.len(), label.len());
        let pts: Vec<[f64; D]> = xy.par_iter().map(|&p| to_tree(p)).collect();
        let tree =
            ImmutableKdTree::<f64, D>::new_from_slice_parallel(&pts).expect("finite coordinates always build a tree");
        Self { tree, xy, label, metric, to_tree }
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

    /// All points within `d` of item s in the public metric, s excluded,
    /// as (distance, position), unsorted.
    fn within(&self, s: usize, d: f64, out: &mut Vec<(f64, usize)>) {
        self.within_at(&(self.to_tree)(self.xy[s]), self.xy[s], s, d, out)
    }

    /// All points within `d` of a query point (`q` in tree coordinates,
    /// `qxy` as given), the item `skip` excluded; streamed from the tree,
    /// so nothing is allocated per query.
    fn within_at(&self, q: &[f64; D], qxy: [f64; 2], skip: usize, d: f64, out: &mut Vec<(f64, usize)>) {
        out.clear();
        self.tree.query(q).within::<SquaredEuclidean<f64>>(self.tree_radius_sq(d)).unsorted().visit(|r| {
            let j = r.item as usize;
            if j != skip {
                let dj = self.metric.distance(qxy, self.xy[j]);
                if dj <= d {
                    out.push((dj, self.label[j]));
                }
            }
        });
    }

    /// Whether two sorted distances are far enough apart that the tree's
    /// rounding cannot have swapped them.
    fn clearly_less(&self, a: f64, b: f64) -> bool {
        match self.metric {
            Metric::Euclidean => b > a * (1.0 + 4.0 * SLACK),
            Metric::GreatCircle => metric::chord_for_km(b) > (metric::chord_for_km(a) + 2e-12) * (1.0 + 4.0 * SLACK),
        }
    }

    /// The k nearest of item s, s excluded, sorted by (distance, position).
    fn k_nearest(&self, s: usize, k: usize, buf: &mut Vec<(f64, usize)>) {
        self.k_nearest_at(&(self.to_tree)(self.xy[s]), self.xy[s], s, k, buf)
    }

    /// The k nearest of a query point, the item `skip` (if any) excluded,
    /// sorted by (distance, position); fewer when the space holds fewer.
    fn k_nearest_at(&self, q: &[f64; D], qxy: [f64; 2], skip: usize, k: usize, buf: &mut Vec<(f64, usize)>) {
        let n = self.xy.len();
        let available = n - (skip < n) as usize;
        let m = (k + 2).min(n);
        buf.clear();
        if m == 0 || k == 0 {
            return;
        }
        // unsorted: the pairs are sorted here, by the public metric
        let found = self
            .tree
            .query(q)
            .nearest_n::<SquaredEuclidean<f64>>(NonZeroUsize::new(m).expect("m >= 1"))
            .unsorted()
            .execute();
        buf.extend(found.iter().filter(|r| r.item as usize != skip).map(|r| {
            let j = r.item as usize;
            (self.metric.distance(qxy, self.xy[j]), self.label[j])
        }));
        sort_pairs(buf);
        let k = k.min(available);
        let settled = buf.len() == available || (buf.len() > k && self.clearly_less(buf[k - 1].0, buf[k].0));
        if !settled {
            let dk = buf[k - 1].0;
            self.within_at(q, qxy, skip, dk, buf);
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

/// Spread the bits of `v` to the even bit positions of a u64.
fn spread(v: u32) -> u64 {
    let mut x = v as u64;
    x = (x | x << 16) & 0x0000_FFFF_0000_FFFF;
    x = (x | x << 8) & 0x00FF_00FF_00FF_00FF;
    x = (x | x << 4) & 0x0F0F_0F0F_0F0F_0F0F;
    x = (x | x << 2) & 0x3333_3333_3333_3333;
    (x | x << 1) & 0x5555_5555_5555_5555
}

/// The Z-order (Morton) key of every point, 32 bits per axis over the
/// extent of the points, with the point's position: (key, position).
/// NaN coordinates count as the low edge.
fn z_keys(xy: &[[f64; 2]]) -> Vec<(u64, usize)> {
    let (lo, hi) = xy.iter().fold(([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]), |(lo, hi), p| {
        ([lo[0].min(p[0]), lo[1].min(p[1])], [hi[0].max(p[0]), hi[1].max(p[1])])
    });
    let quantize = |v: f64, a: usize| {
        let range = hi[a] - lo[a];
        if range > 0.0 {
            ((v - lo[a]) / range * u32::MAX as f64) as u32
        } else {
            0
        }
    };
    xy.par_iter().enumerate().map(|(i, &p)| (spread(quantize(p[0], 0)) | spread(quantize(p[1], 1)) << 1, i)).collect()
}

/// The positions of the points in Z-order (ties by position): a space-filling
/// order in which to visit units, so that consecutive units are near each
/// other in space and their data near each other in cache, whatever the
/// order of the input.
pub(crate) fn z_order(xy: &[[f64; 2]]) -> Vec<usize> {
    let mut keys = z_keys(xy);
    keys.par_sort_unstable();
    keys.into_par_iter().map(|k| k.1).collect()
}

/// The units in Z-order (Morton order) of their locations, which serves
/// twice: queries run in this order, so consecutive queries visit the same
/// part of the tree (several times faster than random order on large
/// inputs), and units at identical locations are adjacent in it, which
/// finds the groups of duplicates. Ties in the order go by exact
/// coordinates, then by position. The locations are copied in that order
/// (`xy`), so that the search reads memory in order too.
struct Layout {
    /// the position of the unit at each place of the order
    order: Vec<usize>,
    /// the unit's location at each place of the order
    xy: Vec<[f64; 2]>,
    /// start and end in `order` of the group of identical locations of the
    /// unit at each place; empty when no two units share a location
    group: Vec<(usize, usize)>,
    duplicate_units: usize,
}

impl Layout {
    fn new(xy: &[[f64; 2]]) -> Self {
        let n = xy.len();
        // -0.0 and 0.0 are the same place
        let place = |i: usize| ((xy[i][0] + 0.0).to_bits(), (xy[i][1] + 0.0).to_bits());
        let mut keys = z_keys(xy);
        keys.par_sort_unstable();
        // equal keys (rare: 32 bits per axis) are put in (place, position) order
        let mut a = 0;
        while a < n {
            let mut b = a + 1;
            while b < n && keys[b].0 == keys[a].0 {
                b += 1;
            }
            if b - a > 1 {
                keys[a..b].sort_unstable_by_key(|&(_, i)| (place(i), i));
            }
            a = b;
        }
        let order: Vec<usize> = keys.into_par_iter().map(|k| k.1).collect();
        let sorted: Vec<[f64; 2]> = order.par_iter().map(|&i| xy[i]).collect();
        // identical locations are adjacent and have equal keys
        let same = |s: usize, t: usize| place(order[s]) == place(order[t]);
        let mut group = Vec::new();
        let mut duplicate_units = 0;
        let mut a = 0;
        while a < n {
            let mut b = a + 1;
            while b < n && same(a, b) {
                b += 1;
            }
            if b - a > 1 {
                if group.is_empty() {
                    group = vec![(0, 0); n];
                }
                duplicate_units += b - a;
                group[a..b].fill((a, b));
            }
            a = b;
        }
        Self { order, xy: sorted, group, duplicate_units }
    }

    /// Positions sharing the location of the unit at place s of the order
    /// (itself included, sorted by position), or an empty slice.
    fn same_place(&self, s: usize) -> &[usize] {
        match self.group.get(s) {
            Some(&(a, b)) => &self.order[a..b],
            None => &[],
        }
    }
}

/// Bytes per link of a result handed to Python: the column index and the
/// distance from the core, and the weight Python adds.
pub const LINK_BYTES: f64 = 24.0;

/// Points ready for searching: checked, in one canonical spelling, and in
/// the [`Frame`] that keeps squared distances in range.
#[derive(Debug, Clone)]
pub struct Prepared<'a> {
    xy: std::borrow::Cow<'a, [f64]>,
    frame: Frame,
    metric: Metric,
}

impl Prepared<'_> {
    /// Number of points.
    pub fn n(&self) -> usize {
        self.xy.len() / 2
    }
}

/// Check interleaved coordinates for `metric` and prepare them for searching.
pub fn prepare(xy: &[f64], metric: Metric) -> Result<Prepared<'_>> {
    metric.check(xy)?;
    let canonical = metric.canonical(xy);
    let frame = Frame::fit(&canonical, metric == Metric::Euclidean)?;
    let xy = match canonical {
        std::borrow::Cow::Borrowed(b) => frame.local(b),
        std::borrow::Cow::Owned(o) => std::borrow::Cow::Owned(frame.local(&o).into_owned()),
    };
    Ok(Prepared { xy, frame, metric })
}

/// Build the search space over the points in the order of `layout` and
/// hand it to `f`; items are places in that order.
fn with_space<R>(p: &Prepared<'_>, layout: &Layout, f: impl FnOnce(&dyn SpaceQuery) -> R) -> R {
    match p.metric {
        Metric::Euclidean => f(&Space::<2>::new(&layout.xy, &layout.order, p.metric, |q| q)),
        Metric::GreatCircle => f(&Space::<3>::new(&layout.xy, &layout.order, p.metric, metric::unit_vector)),
    }
}

/// Object-safe face of [`Space`] for either dimension.
trait SpaceQuery: Sync {
    fn k_nearest(&self, s: usize, k: usize, buf: &mut Vec<(f64, usize)>);
    fn within(&self, s: usize, d: f64, buf: &mut Vec<(f64, usize)>);
}

impl<const D: usize> SpaceQuery for Space<'_, D> {
    fn k_nearest(&self, s: usize, k: usize, buf: &mut Vec<(f64, usize)>) {
        Space::k_nearest(self, s, k, buf)
    }
    fn within(&self, s: usize, d: f64, buf: &mut Vec<(f64, usize)>) {
        Space::within(self, s, d, buf)
    }
}

/// Append a row of (distance, column) pairs, sorted by column, to CSR buffers.
fn push_row(buf: &mut [(f64, usize)], cols: &mut Vec<i64>, dists: &mut Vec<f64>) {
    buf.sort_unstable_by_key(|&(_, j)| j);
    for &(d, j) in buf.iter() {
        cols.push(j as i64);
        dists.push(d);
    }
}

/// Neighbour lists from rows built in Z-order, distances back in world units.
fn finish(p: &Prepared<'_>, parts: crate::csr::Parts<f64>, duplicate_units: usize) -> Neighbors {
    let (indptr, indices, mut data) = parts;
    p.frame.lengths_to_world(&mut data);
    Neighbors { graph: Csr::from_canonical(p.n(), indptr, indices, data), duplicate_units }
}

/// The exact `k` nearest neighbours of every point, self excluded.
///
/// `xy` holds interleaved coordinates (x0, y0, x1, y1, ...); for
/// [`Metric::GreatCircle`] they are (longitude, latitude) in degrees, and one
/// place spelled two ways (longitude 190 and -170, any longitude at a pole)
/// counts as one location.
/// Ties at the k-th distance go to the lower position. The result's data are
/// distances (km for great circle). The output (n k links) is refused when
/// it would not fit the guard's memory budget.
///
/// ```
/// use vicino_core::{Guard, neighbors::{k_nearest, Metric}};
/// let xy = [0.0, 0.0, 1.0, 0.0, 3.0, 0.0];
/// let nb = k_nearest(&xy, 1, Metric::Euclidean, &Guard::unlimited()).unwrap();
/// let g = nb.graph.view();
/// assert_eq!(g.indices(), &[1, 0, 1]);
/// assert_eq!(g.data(), &[1.0, 1.0, 2.0]);
/// ```
pub fn k_nearest(xy: &[f64], k: usize, metric: Metric, guard: &Guard) -> Result<Neighbors> {
    let p = prepare(xy, metric)?;
    let n = p.n();
    if k == 0 || k >= n {
        return Err(Error::InvalidK { k, n });
    }
    guard.reserve(n as f64 * k as f64 * LINK_BYTES, "the k nearest neighbours of every unit", "use a smaller k")?;
    let layout = Layout::new(as_pairs(&p.xy));
    let parts = with_space(&p, &layout, |space| {
        build_fixed_rows(n, k, &layout.order, n >= 512, Vec::new, |buf, s, i, cols, dists| {
            guard.check()?;
            let same = layout.same_place(s);
            if same.len() > k {
                // k copies at distance 0: the lowest positions other than i
                buf.clear();
                buf.extend(same.iter().filter(|&&j| j != i).take(k).map(|&j| (0.0, j)));
            } else {
                space.k_nearest(s, k, buf);
            }
            push_row(buf, cols, dists);
            Ok(())
        })
    })?;
    Ok(finish(&p, parts, layout.duplicate_units))
}

/// Every pair of distinct points at distance `<= radius` (inclusive), self
/// excluded. Data are distances (km for great circle). The number of links
/// is estimated from a sample of units first, and counted as they are
/// found, so an output beyond the guard's memory budget is refused.
///
/// ```
/// use vicino_core::{Guard, neighbors::{within_distance, Metric}};
/// let xy = [0.0, 0.0, 1.0, 0.0, 3.0, 0.0];
/// let nb = within_distance(&xy, 2.0, Metric::Euclidean, &Guard::unlimited()).unwrap();
/// assert_eq!(nb.graph.view().counts(), vec![1, 2, 1]);
/// ```
pub fn within_distance(xy: &[f64], radius: f64, metric: Metric, guard: &Guard) -> Result<Neighbors> {
    if !(radius >= 0.0) || !radius.is_finite() {
        return Err(Error::InvalidRadius { radius });
    }
    let p = prepare(xy, metric)?;
    within_each(&p, |_| radius, guard)
}

/// Every unit i linked to the units within its own radius `radii[i]`
/// (inclusive; adaptive bandwidths), self excluded. Not symmetric in
/// general. Data are distances.
///
/// ```
/// use vicino_core::{Guard, neighbors::{within_radii, Metric}};
/// let xy = [0.0, 0.0, 1.0, 0.0, 3.0, 0.0];
/// let nb = within_radii(&xy, &[1.0, 0.5, 2.0], Metric::Euclidean, &Guard::unlimited()).unwrap();
/// assert_eq!(nb.graph.view().counts(), vec![1, 0, 1]);
/// ```
pub fn within_radii(xy: &[f64], radii: &[f64], metric: Metric, guard: &Guard) -> Result<Neighbors> {
    let p = prepare(xy, metric)?;
    if radii.len() != p.n() {
        return Err(Error::LengthMismatch { what: "the radii", expected: p.n(), got: radii.len() });
    }
    if let Some(&radius) = radii.iter().find(|r| !(**r >= 0.0 && r.is_finite())) {
        return Err(Error::InvalidRadius { radius });
    }
    within_each(&p, |i| radii[i], guard)
}

/// The radius search of every unit, radius per unit in world units.
fn within_each(p: &Prepared<'_>, radius: impl Fn(usize) -> f64 + Sync, guard: &Guard) -> Result<Neighbors> {
    let n = p.n();
    let r = |i: usize| p.frame.to_local(radius(i));
    let layout = Layout::new(as_pairs(&p.xy));
    const ADVICE: &str = "use a smaller radius, or k_nearest for a fixed number of neighbours";
    const WHAT: &str = "the links within the radius";
    let parts = with_space(p, &layout, |space| {
        // estimate the links from units spread over the map (every s-th in Z-order)
        let step = n.div_ceil(256).max(1);
        let sample: Vec<usize> = (0..n).step_by(step).collect();
        let found: usize = sample
            .par_iter()
            .map_init(Vec::new, |buf, &s| {
                space.within(s, r(layout.order[s]), buf);
                buf.len()
            })
            .sum();
        let estimate = found as f64 / sample.len() as f64 * n as f64;
        guard.reserve(estimate * LINK_BYTES, WHAT, ADVICE)?;
        // and count them as they come, in case the sample was lucky
        let room = (guard.memory_limit() as f64 / LINK_BYTES) as usize;
        let links = AtomicUsize::new(0);
        // room for a block of rows at about the estimated count, so that the
        // block buffers rarely grow (each growth copies the block)
        let per_block = (estimate / n as f64 * 1.25 * ROWS_PER_BLOCK as f64) as usize;
        build_visited_rows(n, Some(&layout.order), n >= 512, Vec::new, |buf, s, i, cols, dists| {
            guard.check()?;
            if cols.capacity() == 0 {
                cols.reserve(per_block);
                dists.reserve(per_block);
            }
            space.within(s, r(i), buf);
            if links.fetch_add(buf.len(), Ordering::Relaxed) + buf.len() > room {
                return Err(Error::TooLarge {
                    what: WHAT,
                    needed: estimate.max(room as f64) * LINK_BYTES,
                    limit: guard.memory_limit(),
                    advice: ADVICE,
                });
            }
            push_row(buf, cols, dists);
            Ok(())
        })
    })?;
    Ok(finish(p, parts, layout.duplicate_units))
}

/// Most units for which [`all_pairs`] links every unit to every other
/// (about 380 MB of links at the limit).
pub const ALL_PAIRS_MAX_UNITS: usize = 4_000;

/// Every unit linked to every other, with their distances: O(n^2), refused
/// above [`ALL_PAIRS_MAX_UNITS`] units with the memory it would need.
///
/// ```
/// use vicino_core::{Guard, neighbors::{all_pairs, Metric}};
/// let nb = all_pairs(&[0.0, 0.0, 3.0, 4.0, 0.0, 1.0], Metric::Euclidean, &Guard::unlimited()).unwrap();
/// assert_eq!(nb.graph.view().data(), &[5.0, 1.0, 5.0, 4.242640687119285, 1.0, 4.242640687119285]);
/// ```
pub fn all_pairs(xy: &[f64], metric: Metric, guard: &Guard) -> Result<Neighbors> {
    let p = prepare(xy, metric)?;
    let n = p.n();
    let needed = n as f64 * (n as f64 - 1.0) * LINK_BYTES;
    if n > ALL_PAIRS_MAX_UNITS {
        return Err(Error::TooLarge {
            what: "linking every unit to every other",
            needed,
            limit: (ALL_PAIRS_MAX_UNITS as f64 * (ALL_PAIRS_MAX_UNITS as f64 - 1.0) * LINK_BYTES) as u64,
            advice: "above 4,000 units give a cutoff: a radius or k",
        });
    }
    guard.reserve(needed, "linking every unit to every other", "give a cutoff: a radius or k")?;
    let pts = as_pairs(&p.xy);
    let parts = build_rows(
        n,
        None,
        n >= 256,
        || (),
        |_, i, cols, dists| {
            guard.check()?;
            for j in (0..n).filter(|&j| j != i) {
                cols.push(j as i64);
                dists.push(p.metric.distance(pts[i], pts[j]));
            }
            Ok(())
        },
    )?;
    Ok(finish(&p, parts, Layout::new(pts).duplicate_units))
}

/// The `k` nearest of each query unit among the target units, itself
/// excluded, sorted by (distance, position); positions refer to the
/// prepared points, distances are in world units. `targets` must be
/// increasing. Ties go to the lower position, as in [`k_nearest`].
pub fn nearest_among(
    p: &Prepared<'_>,
    targets: &[usize],
    queries: &[usize],
    k: usize,
    guard: &Guard,
) -> Result<Vec<Vec<(f64, usize)>>> {
    let all = as_pairs(&p.xy);
    debug_assert!(targets.windows(2).all(|p| p[0] < p[1]));
    let sub: Vec<[f64; 2]> = targets.iter().map(|&t| all[t]).collect();
    if sub.is_empty() {
        return Ok(vec![Vec::new(); queries.len()]);
    }
    fn run<const D: usize>(
        space: &Space<'_, D>,
        p: &Prepared<'_>,
        targets: &[usize],
        queries: &[usize],
        k: usize,
        guard: &Guard,
    ) -> Result<Vec<Vec<(f64, usize)>>> {
        let all = as_pairs(&p.xy);
        queries
            .par_iter()
            .with_min_len(64)
            .map_init(Vec::new, |buf, &q| {
                guard.check()?;
                // the query's own slot among the targets, if it is one
                let skip = targets.binary_search(&q).unwrap_or(usize::MAX);
                space.k_nearest_at(&(space.to_tree)(all[q]), all[q], skip, k, buf);
                Ok(buf.iter().map(|&(d, j)| (p.frame.to_world(d), j)).collect())
            })
            .collect()
    }
    match p.metric {
        Metric::Euclidean => run(&Space::<2>::new(&sub, targets, p.metric, |q| q), p, targets, queries, k, guard),
        Metric::GreatCircle => {
            run(&Space::<3>::new(&sub, targets, p.metric, metric::unit_vector), p, targets, queries, k, guard)
        }
    }
}
