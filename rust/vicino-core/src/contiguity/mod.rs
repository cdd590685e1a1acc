//! Contiguity of polygons: which units share a point of boundary (queen) or
//! a stretch of boundary of positive length (rook), and how long each shared
//! stretch is.
//!
//! Method: candidate pairs are the units whose bounding boxes, widened by
//! the tolerance, overlap (an R-tree from `rstar`, queried in parallel with
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

use crate::csr::Csr;
use crate::error::{Error, Result};
use crate::neighbors::metric::{haversine_km, Metric};
use contact::{coincident_interval, meet_exact, near, union_length, Meet};
pub use geometry::Polygons;
use geometry::BBox;
use rayon::prelude::*;
use rstar::primitives::{GeomWithData, Rectangle};
use rstar::{RTree, AABB};

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
fn pair(p: &Polygons<'_>, i: usize, j: usize, boxes: &[Option<BBox>], tol: f64, metric: Metric, s: &mut Scratch) -> Option<(bool, f64)> {
    let (bi, bj) = (boxes[i]?, boxes[j]?);
    let (wi, wj) = (widen(bi, tol), widen(bj, tol));
    s.si.clear();
    s.si.extend(p.segments_of(i).filter(|(a, b)| seg_meets_box(*a, *b, &wj)));
    if s.si.is_empty() && !inside_box(&bi, &bj) && !inside_box(&bj, &bi) {
        return None;
    }
    s.sj.clear();
    s.sj.extend(p.segments_of(j).filter(|(a, b)| seg_meets_box(*a, *b, &wi)));
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
pub fn contiguity(p: &Polygons<'_>, rule: Rule, tolerance: f64, lengths: Metric) -> Result<Contiguity> {
    if !(tolerance >= 0.0) || !tolerance.is_finite() {
        return Err(Error::InvalidTolerance { tolerance });
    }
    let n = p.n();
    let boxes: Vec<Option<BBox>> = (0..n).into_par_iter().map(|u| p.bbox(u)).collect();
    let empty: Vec<usize> = (0..n).filter(|&u| boxes[u].is_none()).collect();
    let items: Vec<GeomWithData<Rectangle<[f64; 2]>, usize>> = boxes
        .iter()
        .enumerate()
        .filter_map(|(u, b)| b.map(|b| GeomWithData::new(Rectangle::from_corners([b[0], b[1]], [b[2], b[3]]), u)))
        .collect();
    let tree = RTree::bulk_load(items);
    let found: Vec<Vec<(usize, f64)>> = (0..n)
        .into_par_iter()
        .with_min_len(64)
        .map_init(Scratch::default, |scratch, i| {
            let Some(b) = boxes[i] else { return Vec::new() };
            let w = widen(b, tolerance);
            let env = AABB::from_corners([w[0], w[1]], [w[2], w[3]]);
            let mut out: Vec<(usize, f64)> = tree
                .locate_in_envelope_intersecting(&env)
                .filter(|g| g.data > i)
                .filter_map(|g| {
                    let (rook, len) = pair(p, i, g.data, &boxes, tolerance, lengths, scratch)?;
                    (rule == Rule::Queen || rook).then_some((g.data, len))
                })
                .collect();
            out.sort_unstable_by_key(|e| e.0);
            out
        })
        .collect();
    let graph = symmetric_from_upper(&found);
    let perimeter = (0..n)
        .into_par_iter()
        .map(|u| p.segments_of(u).fold(0.0, |acc, (a, b)| acc + seg_length(lengths, a, b)))
        .collect();
    Ok(Contiguity { graph, perimeter, empty })
}

/// The symmetric CSR whose upper triangle is given row by row (columns
/// sorted and above the diagonal): each row is its lower part (from the
/// transposed upper rows, met in row order, hence sorted) then its upper part.
fn symmetric_from_upper(upper: &[Vec<(usize, f64)>]) -> Csr {
    let n = upper.len();
    let mut lower: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
    for (i, links) in upper.iter().enumerate() {
        for &(j, v) in links {
            lower[j].push((i, v));
        }
    }
    let mut indptr = Vec::with_capacity(n + 1);
    indptr.push(0i64);
    for i in 0..n {
        indptr.push(indptr[i] + (lower[i].len() + upper[i].len()) as i64);
    }
    let row = |i: usize| lower[i].iter().chain(&upper[i]);
    let indices = (0..n).into_par_iter().flat_map_iter(|i| row(i).map(|&(j, _)| j as i64)).collect();
    let data = (0..n).into_par_iter().flat_map_iter(|i| row(i).map(|&(_, v)| v)).collect();
    Csr::from_canonical(n, indptr, indices, data)
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

/// Cliff-Ord weights (Cliff and Ord 1981): w_ij = (b_ij / p_i)^a / d_ij^b for
/// rook neighbours, with b_ij the shared border length, p_i the perimeter
/// of i (so b_ij / p_i is the share of i's boundary shared with j) and d_ij
/// the distance between the centroids. Asymmetric in general.
pub fn cliff_ord(p: &Polygons<'_>, border_power: f64, distance_power: f64, tolerance: f64, metric: Metric) -> Result<(Csr, Contiguity)> {
    let c = contiguity(p, Rule::Rook, tolerance, metric)?;
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
                return Err(Error::CoincidentCentroids { i, j });
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
