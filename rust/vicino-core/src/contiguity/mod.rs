//! Contiguity of polygons: which units share a point of boundary (queen) or
//! a stretch of boundary of positive length (rook), and how long each shared
//! stretch is.
//!
//! Method: candidate pairs are the units whose bounding boxes, widened by
//! the tolerance, overlap (found with a uniform grid, or an R-tree from
//! `rstar` when box sizes vary too much for a grid; in parallel with
//! `rayon`). For each candidate pair every boundary segment of one unit
//! that reaches the other's box is tested against those of the other
//! ([`contact`]): exactly, with robust orientation predicates, when the
//! tolerance is 0, so shared borders need not have matching vertices (a
//! vertex in the middle of the other unit's edge is found); within the
//! tolerance otherwise. The shared length is the length of the union of the
//! stretches of one unit's boundary that lie on the other's (with a
//! tolerance: that run alongside it, within the tolerance and within 10
//! degrees of parallel, see [`contact`]); with a tolerance it is the mean of
//! the two sides, so the result stays symmetric.
//!
//! Rules, exactly:
//! * queen: the boundaries have a common point (with tolerance t: come
//!   within distance t);
//! * rook: the common stretch has positive length (with tolerance t: is
//!   longer than t);
//! * under both rules a unit that lies inside another's exterior ring
//!   (inside a hole of it, or overlapping it) is its neighbour, as are
//!   units whose boundaries cross.
//!
//! Complexity: O(n log n) for the tree, then about O(s^2) per candidate
//! pair for s segments near the other unit.

pub mod contact;
pub mod geometry;

use crate::csr::{build_rows, Csr};
use crate::error::{Error, Pair, Result};
use crate::guard::Guard;
use crate::neighbors::metric::{haversine_km, Metric};
use crate::neighbors::LINK_BYTES;
use contact::{coincident_interval, meet_exact, near, union_length, Meet};
use geometry::BBox;
pub use geometry::Polygons;
use rayon::prelude::*;
use rstar::primitives::{GeomWithData, Rectangle};
use rstar::{RTree, AABB};
use std::sync::atomic::{AtomicUsize, Ordering};

/// Which contact makes two units neighbours.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Rule {
    Queen,
    Rook,
}

impl Rule {
    /// Parse the public name of a rule.
    pub fn parse(name: &str) -> Result<Self> {
        match name {
            "queen" => Ok(Self::Queen),
            "rook" => Ok(Self::Rook),
            _ => Err(Error::UnknownRule { name: name.to_string() }),
        }
    }
}

/// Contiguity of n units: the symmetric neighbour graph, whose data are the
/// shared border lengths (0 for a contact at points only), each unit's
/// perimeter, and the units with empty geometry (islands).
#[derive(Debug, Clone)]
pub struct Contiguity {
    pub graph: Csr,
    pub perimeter: Vec<f64>,
    pub empty: Vec<usize>,
}

fn seg_length(metric: Metric, a: [f64; 2], b: [f64; 2]) -> f64 {
    match metric {
        Metric::Euclidean => ((b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2)).sqrt(),
        Metric::GreatCircle => haversine_km(a, b),
    }
}

fn widen(b: BBox, t: f64) -> BBox {
    [b[0] - t, b[1] - t, b[2] + t, b[3] + t]
}

fn seg_meets_box(a: [f64; 2], b: [f64; 2], bx: &BBox) -> bool {
    a[0].max(b[0]) >= bx[0] && a[0].min(b[0]) <= bx[2] && a[1].max(b[1]) >= bx[1] && a[1].min(b[1]) <= bx[3]
}

fn inside_box(inner: &BBox, outer: &BBox) -> bool {
    inner[0] >= outer[0] && inner[1] >= outer[1] && inner[2] <= outer[2] && inner[3] <= outer[3]
}

type Seg = ([f64; 2], [f64; 2]);

/// What one boundary knows of another.
#[derive(Default)]
struct Touch {
    contact: bool,
    crossed: bool,
}

/// Length of the part of the segments `from` lying on / alongside the segments `to`.
fn covered(from: &[Seg], to: &[Seg], tol: f64, metric: Metric, touch: &mut Touch, iv: &mut Vec<(f64, f64)>) -> f64 {
    let mut total = 0.0;
    for &(a0, a1) in from {
        iv.clear();
        let ab = [a0[0].min(a1[0]) - tol, a0[1].min(a1[1]) - tol, a0[0].max(a1[0]) + tol, a0[1].max(a1[1]) + tol];
        for &(b0, b1) in to {
            // most pairs of segments are apart: reject them by their boxes
            if !seg_meets_box(b0, b1, &ab) {
                continue;
            }
            if (a0 == b1 && a1 == b0) || (a0 == b0 && a1 == b1) {
                // the same edge in both units (clean shared vertices)
                touch.contact = true;
                iv.push((0.0, 1.0));
                continue;
            }
            if tol == 0.0 {
                match meet_exact(a0, a1, b0, b1) {
                    Meet::Apart => {}
                    Meet::Point => touch.contact = true,
                    Meet::Cross => {
                        touch.contact = true;
                        touch.crossed = true;
                    }
                    Meet::Stretch(l, h) => {
                        touch.contact = true;
                        iv.push((l, h));
                    }
                }
            } else if near(a0, a1, b0, b1, tol) {
                touch.contact = true;
                touch.crossed |= meet_exact(a0, a1, b0, b1) == Meet::Cross;
                if let Some(r) = coincident_interval(a0, a1, b0, b1, tol) {
                    iv.push(r);
                }
            }
        }
        if !iv.is_empty() {
            total += union_length(iv, seg_length(metric, a0, a1));
        }
    }
    total
}

/// Buffers reused across the pairs one thread examines.
#[derive(Default)]
struct Scratch {
    si: Vec<Seg>,
    sj: Vec<Seg>,
    iv: Vec<(f64, f64)>,
}

/// Contact of units i and j: None when they are not neighbours under queen,
/// else (rook, shared length).
fn pair(
    p: &Polygons<'_>,
    i: usize,
    j: usize,
    boxes: &[Option<BBox>],
    tol: f64,
    metric: Metric,
    s: &mut Scratch,
) -> Option<(bool, f64)> {
    let (bi, bj) = (boxes[i]?, boxes[j]?);
    let (wi, wj) = (widen(bi, tol), widen(bj, tol));
    s.si.clear();
    p.segments_meeting(i, &wj, &mut s.si);
    if s.si.is_empty() && !inside_box(&bi, &bj) && !inside_box(&bj, &bi) {
        return None;
    }
    s.sj.clear();
    p.segments_meeting(j, &wi, &mut s.sj);
    let mut touch = Touch::default();
    let mut length = covered(&s.si, &s.sj, tol, metric, &mut touch, &mut s.iv);
    if tol > 0.0 && touch.contact {
        let other = covered(&s.sj, &s.si, tol, metric, &mut touch, &mut s.iv);
        length = 0.5 * (length + other);
    }
    let mut contact = touch.contact;
    // crossing boundaries: the units overlap, neighbours under both rules
    let mut rook = touch.crossed || if tol == 0.0 { length > 0.0 } else { length > tol };
    if !contact {
        // no common boundary: neighbours only if one lies inside the other
        let within = |inner: usize, outer: usize, bin: &BBox, bout: &BBox| {
            inside_box(bin, bout) && p.first_point(inner).is_some_and(|q| p.inside_exterior(outer, q))
        };
        if within(j, i, &bj, &bi) || within(i, j, &bi, &bj) {
            contact = true;
            rook = true;
        }
    }
    contact.then_some((rook, length))
}

/// Contiguity of polygons under `rule`, with `tolerance` in coordinate
/// units; shared lengths and perimeters are measured in `lengths`
/// (coordinate units, or km along great circles for lon/lat).
pub fn contiguity(p: &Polygons<'_>, rule: Rule, tolerance: f64, lengths: Metric, guard: &Guard) -> Result<Contiguity> {
    if !(tolerance >= 0.0) || !tolerance.is_finite() {
        return Err(Error::InvalidTolerance { tolerance });
    }
    let n = p.n();
    let boxes: Vec<Option<BBox>> = (0..n).into_par_iter().map(|u| p.bbox(u)).collect();
    let empty: Vec<usize> = (0..n).filter(|&u| boxes[u].is_none()).collect();
    let wide: Vec<Option<BBox>> = boxes.iter().map(|b| b.map(|b| widen(b, tolerance))).collect();
    let index = match Grid::new(&wide) {
        Some(g) => Candidates::Grid(g),
        None => Candidates::Tree(tree_of(&wide)),
    };
    // the upper triangle, row by row, then mirrored
    let room = (guard.memory_limit() as f64 / (2.0 * LINK_BYTES)) as usize;
    let links = AtomicUsize::new(0);
    let upper = build_rows(
        n,
        None,
        n >= 256,
        || (Scratch::default(), Vec::new()),
        |(scratch, js): &mut (Scratch, Vec<usize>), i, cols, lens| {
            guard.check()?;
            js.clear();
            index.visit(&wide, i, js);
            js.sort_unstable();
            let before = cols.len();
            for &j in js.iter() {
                if let Some((rook, len)) = pair(p, i, j, &boxes, tolerance, lengths, scratch) {
                    if rule == Rule::Queen || rook {
                        cols.push(j as i64);
                        lens.push(len);
                    }
                }
            }
            if links.fetch_add(cols.len() - before, Ordering::Relaxed) > room {
                return Err(Error::TooLarge {
                    what: "the contiguity links",
                    needed: 2.0 * LINK_BYTES * room as f64,
                    limit: guard.memory_limit(),
                    advice: "most units touch most others: check that the polygons are not overlapping copies",
                });
            }
            Ok(())
        },
    )?;
    let graph = Csr::from_parts(n, upper).view().plus_transpose();
    let perimeter = (0..n)
        .into_par_iter()
        .map(|u| p.segments_of(u).fold(0.0, |acc, (a, b)| acc + seg_length(lengths, a, b)))
        .collect();
    Ok(Contiguity { graph, perimeter, empty })
}

fn overlap(a: &BBox, b: &BBox) -> bool {
    a[0] <= b[2] && b[0] <= a[2] && a[1] <= b[3] && b[1] <= a[3]
}

/// An R-tree (`rstar`) of the boxes, for data whose box sizes vary too much
/// for the uniform grid.
fn tree_of(boxes: &[Option<BBox>]) -> RTree<GeomWithData<Rectangle<[f64; 2]>, usize>> {
    let items = boxes
        .iter()
        .enumerate()
        .filter_map(|(u, b)| b.map(|b| GeomWithData::new(Rectangle::from_corners([b[0], b[1]], [b[2], b[3]]), u)))
        .collect();
    RTree::bulk_load(items)
}

/// What finds the candidate pairs.
enum Candidates {
    Grid(Grid),
    Tree(RTree<GeomWithData<Rectangle<[f64; 2]>, usize>>),
}

impl Candidates {
    /// Push onto `out` the units after i whose boxes overlap i's box (unsorted, once each).
    fn visit(&self, boxes: &[Option<BBox>], i: usize, out: &mut Vec<usize>) {
        let Some(bi) = boxes[i] else { return };
        match self {
            Candidates::Tree(tree) => {
                let env = AABB::from_corners([bi[0], bi[1]], [bi[2], bi[3]]);
                out.extend(tree.locate_in_envelope_intersecting(&env).map(|g| g.data).filter(|&j| j > i));
            }
            Candidates::Grid(g) => {
                let (c0, r0, c1, r1) = g.span(&bi);
                for r in r0..=r1 {
                    for c in c0..=c1 {
                        let id = r * g.gx + c;
                        for &j in &g.members[g.start[id]..g.start[id + 1]] {
                            let j = j as usize;
                            let Some(bj) = boxes[j] else { continue };
                            // report the pair only from the cell that holds the
                            // low corner of the overlap of the two boxes
                            if j > i
                                && overlap(&bi, &bj)
                                && g.col(bi[0].max(bj[0])) == c
                                && g.row(bi[1].max(bj[1])) == r
                            {
                                out.push(j);
                            }
                        }
                    }
                }
            }
        }
    }
}

/// A uniform grid whose cells are about the median box size: every box is
/// filed under the cells it covers. Measured on 10^6 Voronoi cells, filing
/// and visiting take about half the time of building and querying the
/// R-tree.
struct Grid {
    ext: BBox,
    cell: f64,
    gx: usize,
    gy: usize,
    start: Vec<usize>,
    members: Vec<u32>,
}

impl Grid {
    fn col(&self, x: f64) -> usize {
        (((x - self.ext[0]) / self.cell) as usize).min(self.gx - 1)
    }
    fn row(&self, y: f64) -> usize {
        (((y - self.ext[1]) / self.cell) as usize).min(self.gy - 1)
    }
    fn span(&self, b: &BBox) -> (usize, usize, usize, usize) {
        (self.col(b[0]), self.row(b[1]), self.col(b[2]), self.row(b[3]))
    }

    /// None when boxes vary so much in size that the grid would file them
    /// too many times (then the R-tree serves).
    fn new(boxes: &[Option<BBox>]) -> Option<Self> {
        let live: Vec<BBox> = boxes.iter().flatten().copied().collect();
        if live.len() < 2 || boxes.len() > u32::MAX as usize {
            return None;
        }
        let ext = live.iter().fold([f64::INFINITY, f64::INFINITY, f64::NEG_INFINITY, f64::NEG_INFINITY], |e, b| {
            [e[0].min(b[0]), e[1].min(b[1]), e[2].max(b[2]), e[3].max(b[3])]
        });
        let (width, height) = (ext[2] - ext[0], ext[3] - ext[1]);
        let mut sizes: Vec<f64> = live.iter().map(|b| (b[2] - b[0]).max(b[3] - b[1])).collect();
        let mid = sizes.len() / 2;
        let mut cell = *sizes.select_nth_unstable_by(mid, f64::total_cmp).1;
        if !(cell > 0.0) || !(width > 0.0) || !(height > 0.0) {
            return None;
        }
        // at most about 4 cells per unit
        let limit = 4.0 * live.len() as f64;
        if (width / cell + 1.0) * (height / cell + 1.0) > limit {
            cell = ((width * height) / limit).sqrt().max(cell);
        }
        let (gx, gy) = ((width / cell) as usize + 1, (height / cell) as usize + 1);
        let mut g = Grid { ext, cell, gx, gy, start: vec![0; gx * gy + 1], members: Vec::new() };
        let mut filed = 0usize;
        for b in &live {
            let (c0, r0, c1, r1) = g.span(b);
            filed += (c1 - c0 + 1) * (r1 - r0 + 1);
            if filed > 16 * live.len() {
                return None;
            }
            for r in r0..=r1 {
                for c in c0..=c1 {
                    g.start[r * gx + c + 1] += 1;
                }
            }
        }
        for k in 0..gx * gy {
            g.start[k + 1] += g.start[k];
        }
        let mut slot = g.start.clone();
        g.members = vec![0u32; filed];
        for (u, b) in boxes.iter().enumerate() {
            let Some(b) = b else { continue };
            let (c0, r0, c1, r1) = g.span(b);
            for r in r0..=r1 {
                for c in c0..=c1 {
                    g.members[slot[r * gx + c]] = u as u32;
                    slot[r * gx + c] += 1;
                }
            }
        }
        Some(g)
    }
}

/// Centroid of unit u (area-weighted over its polygons, holes subtracted),
/// computed with `geo`; None for an empty unit or one of zero area.
pub fn centroid(p: &Polygons<'_>, u: usize) -> Option<[f64; 2]> {
    use geo::{Centroid, Coord, LineString, MultiPolygon, Polygon};
    let mut polys = Vec::new();
    let mut exterior: Option<LineString<f64>> = None;
    let mut holes = Vec::new();
    for (is_ext, ring) in p.rings_of(u) {
        let ls: LineString<f64> = ring.iter().map(|q| Coord { x: q[0], y: q[1] }).collect();
        if is_ext {
            if let Some(e) = exterior.take() {
                polys.push(Polygon::new(e, std::mem::take(&mut holes)));
            }
            exterior = Some(ls);
        } else {
            holes.push(ls);
        }
    }
    if let Some(e) = exterior {
        polys.push(Polygon::new(e, holes));
    }
    MultiPolygon::new(polys).centroid().map(|c| [c.x(), c.y()])
}

/// Centroids of all units as interleaved x, y (NaN for a unit without
/// one), in parallel.
pub fn centroids(p: &Polygons<'_>) -> Vec<f64> {
    use rayon::prelude::*;
    (0..p.n()).into_par_iter().with_min_len(256).flat_map_iter(|u| centroid(p, u).unwrap_or([f64::NAN; 2])).collect()
}

/// Cliff-Ord weights (Cliff and Ord 1981): w_ij = (b_ij / p_i)^a / d_ij^b for
/// rook neighbours, with b_ij the shared border length, p_i the perimeter
/// of i (so b_ij / p_i is the share of i's boundary shared with j) and d_ij
/// the distance between the centroids. Asymmetric in general.
pub fn cliff_ord(
    p: &Polygons<'_>,
    border_power: f64,
    distance_power: f64,
    tolerance: f64,
    metric: Metric,
    guard: &Guard,
) -> Result<(Csr, Contiguity)> {
    let c = contiguity(p, Rule::Rook, tolerance, metric, guard)?;
    let n = p.n();
    let centres: Vec<Option<[f64; 2]>> = (0..n).into_par_iter().map(|u| centroid(p, u)).collect();
    let g = c.graph.view();
    let mut rows = Vec::with_capacity(n);
    for i in 0..n {
        let (cols, lens) = g.row(i);
        let mut row = Vec::with_capacity(cols.len());
        for (&j, &len) in cols.iter().zip(lens) {
            let j = j as usize;
            let d = match (centres[i], centres[j]) {
                (Some(a), Some(b)) => metric.distance(a, b),
                _ => 0.0,
            };
            if d == 0.0 && distance_power != 0.0 {
                return Err(Error::CoincidentCentroids { pair: Pair(i, j) });
            }
            let share = if c.perimeter[i] > 0.0 { len / c.perimeter[i] } else { 0.0 };
            let w = share.powf(border_power) / d.powf(distance_power);
            // a unit inside another without a shared border has share 0: no link
            if w > 0.0 {
                row.push((j, w));
            }
        }
        rows.push(row);
    }
    Ok((Csr::from_rows(rows), c))
}
