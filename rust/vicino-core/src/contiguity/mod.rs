//! Contiguity of polygons: which units share a point of boundary (queen) or
//! a stretch of boundary of positive length (rook), and how long each shared
//! stretch is.
//!
//! Method: coordinates are first brought near 1 by an exact power of two
//! ([`Frame::near_one`]) when they are tiny or large, so that the same
//! polygons at any scale give the same links and exactly scaled lengths
//! (the tolerance is scaled with them). Candidate pairs are the units whose
//! bounding boxes, widened by the tolerance, overlap ([`candidates`]: a
//! uniform grid sized by the number of units, or an R-tree when a grid
//! would be poor; in parallel with `rayon`, rows visited in the Z-order of
//! the box centres so that the cost does not depend on the input order). For each candidate pair every
//! boundary segment of one unit that reaches the other's box is tested
//! against those of the other that reach its box ([`contact`], through a
//! per-pair sweep of the segments when there are many, so a long shared
//! border costs about O(s log s), not O(s^2)): exactly, with robust
//! orientation predicates, when the tolerance is 0, so shared borders need
//! not have matching vertices (a vertex in the middle of the other unit's
//! edge is found); within the tolerance otherwise. The shared length is
//! the length of the union of the stretches of one unit's boundary that lie
//! on the other's (with a tolerance: that run alongside it, within the
//! tolerance and within 10 degrees of parallel, see [`contact`]); with a
//! tolerance it is the mean of the two sides, so the result stays
//! symmetric.
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
//! One definition of the shared length, so that every rook link has a
//! positive one: the length of each unit's boundary that lies within the
//! other (holes filled), counting the common boundary once,
//! |bd A ∩ B| + |bd B ∩ A| - |bd A ∩ bd B|. For units that only touch this
//! is their common border; for units that overlap (boundaries that cross,
//! or that touch with one running into the other unit, found by
//! [`contact::enters`] from the meetings of the first pass), the perimeter
//! of their overlap plus any common border outside it; for an enclave
//! (a unit inside another's exterior ring, boundaries apart) the enclave's
//! perimeter.
//!
//! Complexity: O(n log n) for the candidates, then about O(s log s) per
//! candidate pair for s segments near the other unit.

pub mod candidates;
pub mod contact;
pub mod geometry;

use crate::csr::{build_rows, Csr};
use crate::error::{Error, Link, Pair, Result, Unit};
use crate::frame::{times_pow2, Frame};
use crate::guard::Guard;
use crate::neighbors::metric::{haversine_km, Metric};
use crate::neighbors::{z_order, LINK_BYTES};
use candidates::Candidates;
use contact::{
    coincident_interval, enters, inside_length, meet_exact, near, seg_box, union_length, Fill, Inside, Meet, Meetings,
    Other, Seg, SegIndex,
};
use geometry::BBox;
pub use geometry::Polygons;
use rayon::prelude::*;
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

/// What one boundary knows of another.
#[derive(Default)]
struct Touch {
    contact: bool,
    crossed: bool,
}

/// Length of the part of the segments `from` lying on / alongside the
/// segments `to`; with `rec`, their exact meetings are recorded too.
#[allow(clippy::too_many_arguments)]
fn covered(
    from: &[Seg],
    to: &[Seg],
    index: &SegIndex,
    tol: f64,
    metric: Metric,
    touch: &mut Touch,
    iv: &mut Vec<(f64, f64)>,
    mut rec: Option<&mut Meetings>,
) -> f64 {
    let mut total = 0.0;
    for (ka, &(a0, a1)) in from.iter().enumerate() {
        iv.clear();
        let ab = seg_box(a0, a1, tol);
        index.each_at(to, &ab, |kb, b0, b1| {
            // most pairs of segments are apart: reject them by their boxes
            if !seg_meets_box(b0, b1, &ab) {
                return;
            }
            if (a0 == b1 && a1 == b0) || (a0 == b0 && a1 == b1) {
                // the same edge in both units (clean shared vertices)
                touch.contact = true;
                iv.push((0.0, 1.0));
                if let Some(r) = rec.as_deref_mut() {
                    r.record((ka, a0, a1), (kb, b0, b1), Meet::Stretch(0.0, 1.0));
                }
                return;
            }
            let exact = (tol == 0.0 || rec.is_some()).then(|| meet_exact(a0, a1, b0, b1));
            if let (Some(r), Some(m)) = (rec.as_deref_mut(), exact) {
                r.record((ka, a0, a1), (kb, b0, b1), m);
            }
            if tol == 0.0 {
                match exact.expect("computed at tolerance 0") {
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
                touch.crossed |= exact.unwrap_or_else(|| meet_exact(a0, a1, b0, b1)) == Meet::Cross;
                if let Some(r) = coincident_interval(a0, a1, b0, b1, tol) {
                    iv.push(r);
                }
            }
        });
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
    meets: Meetings,
}

/// The shared length of units i and j whose boundaries cross (see the
/// module notes): |bd i ∩ j| + |bd j ∩ i| - |bd i ∩ bd j|, the common
/// boundary taken as the mean of what each side finds on the other.
fn overlap_length(p: &Polygons<'_>, i: usize, j: usize, s: &Scratch, metric: Metric) -> f64 {
    let (Some(mut fi), Some(mut fj)) = (Fill::new(p, i), Fill::new(p, j)) else { return 0.0 };
    let len = |a, b| seg_length(metric, a, b);
    let (in_i, on_i) = inside_length(&s.si, &s.sj, &SegIndex::new(&s.sj, s.si.len()), &mut fj, len);
    let (in_j, on_j) = inside_length(&s.sj, &s.si, &SegIndex::new(&s.si, s.sj.len()), &mut fi, len);
    (in_i + in_j - 0.5 * (on_i + on_j)).max(0.0)
}

/// Contact of units i and j: None when they are not neighbours under queen,
/// else (rook, shared length); a rook contact has a positive length.
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
    let to_j = SegIndex::new(&s.sj, s.si.len());
    s.meets.clear();
    let mut length = covered(&s.si, &s.sj, &to_j, tol, metric, &mut touch, &mut s.iv, Some(&mut s.meets));
    if tol > 0.0 && touch.contact {
        let to_i = SegIndex::new(&s.si, s.sj.len());
        let other = covered(&s.sj, &s.si, &to_i, tol, metric, &mut touch, &mut s.iv, None);
        length = 0.5 * (length + other);
    }
    let mut contact = touch.contact;
    let mut rook = if tol == 0.0 { length > 0.0 } else { length > tol };
    // boundaries that touch without crossing may still bound an overlap (two
    // boxes overlapping along a common edge, a unit inside another touching
    // its boundary): then one boundary runs into the other unit
    let overlapping = touch.crossed
        || (touch.contact
            && (enters(&s.si, &mut s.meets.a, &mut Other::new(Inside::new(p, j, bj), &s.sj, Some(&to_j)))
                || enters(&s.sj, &mut s.meets.b, &mut Other::new(Inside::new(p, i, bi), &s.si, None))));
    if overlapping {
        // the units overlap: neighbours under both rules, sharing the
        // boundary within the overlap
        length = length.max(overlap_length(p, i, j, s, metric));
        rook = length > 0.0;
    }
    if !contact {
        // no common boundary: neighbours only if one lies inside the other
        // (an enclave), sharing the enclave's whole boundary
        let within = |inner: usize, outer: usize, bin: &BBox, bout: &BBox| {
            inside_box(bin, bout) && p.first_point(inner).is_some_and(|q| p.inside_exterior(outer, q))
        };
        let inner = if within(j, i, &bj, &bi) {
            Some(j)
        } else if within(i, j, &bi, &bj) {
            Some(i)
        } else {
            None
        };
        if let Some(u) = inner {
            contact = true;
            length = perimeter_of(p, u, metric);
            rook = length > 0.0;
        }
    }
    contact.then_some((rook, length))
}

fn perimeter_of(p: &Polygons<'_>, u: usize, metric: Metric) -> f64 {
    p.segments_of(u).fold(0.0, |acc, (a, b)| acc + seg_length(metric, a, b))
}

/// Contiguity of polygons under `rule`, with `tolerance` in coordinate
/// units; shared lengths and perimeters are measured in `lengths`
/// (coordinate units, or km along great circles for lon/lat). Tiny or
/// large coordinates are computed on in a rescaled frame (exact), and
/// refused ([`Error::CoordinateSpan`]) when their span is too wide for it.
pub fn contiguity(p: &Polygons<'_>, rule: Rule, tolerance: f64, lengths: Metric, guard: &Guard) -> Result<Contiguity> {
    if !(tolerance >= 0.0) || !tolerance.is_finite() {
        return Err(Error::InvalidTolerance { tolerance });
    }
    let frame = Frame::near_one(p.coords(), lengths == Metric::Euclidean)?;
    let local = frame.local(p.coords());
    let mut c = contiguity_in(&p.with_coords(&local), rule, frame.to_local(tolerance), lengths, guard)?;
    to_world(&frame, &mut c);
    Ok(c)
}

/// The lengths of `c`, computed in `frame`, in world units.
fn to_world(frame: &Frame, c: &mut Contiguity) {
    frame.lengths_to_world(&mut c.perimeter);
    if !frame.is_identity() {
        c.graph = c.graph.view().with_data(c.graph.view().data().iter().map(|&v| frame.to_world(v)).collect());
    }
}

/// Contiguity in the frame of the coordinates given.
fn contiguity_in(p: &Polygons<'_>, rule: Rule, tolerance: f64, lengths: Metric, guard: &Guard) -> Result<Contiguity> {
    let n = p.n();
    let boxes: Vec<Option<BBox>> = (0..n).into_par_iter().map(|u| p.bbox(u)).collect();
    let empty: Vec<usize> = (0..n).filter(|&u| boxes[u].is_none()).collect();
    let wide: Vec<Option<BBox>> = boxes.iter().map(|b| b.map(|b| widen(b, tolerance))).collect();
    let index = Candidates::new(&wide);
    // rows visited in the Z-order of the box centres, so that consecutive
    // rows meet the same units (in cache) whatever the order of the input
    let centres: Vec<[f64; 2]> =
        boxes.iter().map(|b| b.map_or([f64::NAN; 2], |b| [0.5 * (b[0] + b[2]), 0.5 * (b[1] + b[3])])).collect();
    let visit = z_order(&centres);
    drop(centres);
    // the upper triangle, row by row, then mirrored
    let room = (guard.memory_limit() as f64 / (2.0 * LINK_BYTES)) as usize;
    let links = AtomicUsize::new(0);
    let upper = build_rows(
        n,
        Some(&visit),
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
    let perimeter = (0..n).into_par_iter().map(|u| perimeter_of(p, u, lengths)).collect();
    Ok(Contiguity { graph, perimeter, empty })
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
/// one), in parallel, computed in a frame near 1 (so tiny and large
/// coordinates neither underflow nor overflow the area sums).
pub fn centroids(p: &Polygons<'_>) -> Result<Vec<f64>> {
    let frame = Frame::near_one(p.coords(), true)?;
    let local = frame.local(p.coords());
    let lp = p.with_coords(&local);
    Ok((0..p.n())
        .into_par_iter()
        .with_min_len(256)
        .flat_map_iter(|u| centroid(&lp, u).map_or([f64::NAN; 2], |c| c.map(|v| frame.to_world(v))))
        .collect())
}

/// The checks of the Cliff-Ord parameters and, for great circles, of the
/// longitude / latitude ranges (as for points).
fn check_cliff_ord(p: &Polygons<'_>, powers: [(&'static str, f64); 2], tolerance: f64, metric: Metric) -> Result<()> {
    for (name, value) in powers {
        if !(value >= 0.0) || !value.is_finite() {
            return Err(Error::InvalidPower { name, value });
        }
    }
    if !(tolerance >= 0.0) || !tolerance.is_finite() {
        return Err(Error::InvalidTolerance { tolerance });
    }
    if metric == Metric::GreatCircle {
        for u in 0..p.n() {
            for q in p.rings_of(u).flat_map(|(_, ring)| ring) {
                if !(-180.0..=360.0).contains(&q[0]) {
                    return Err(Error::LongitudeOutOfRange { unit: Unit(u), value: q[0] });
                }
                if !(-90.0..=90.0).contains(&q[1]) {
                    return Err(Error::LatitudeOutOfRange { unit: Unit(u), value: q[1] });
                }
            }
        }
    }
    Ok(())
}

/// share^a / d^b * 2^(e b): the Cliff-Ord weight for a distance `d`
/// measured in a frame 2^e times the world's. Direct when the powers stay
/// in range (bit for bit the plain formula when e = 0), else in log space;
/// 0, subnormal or infinite when the weight itself is out of range.
fn cliff_ord_weight(share: f64, d: f64, a: f64, b: f64, e: i32) -> f64 {
    let scale = f64::from(e) * b;
    let direct = share.powf(a) / d.powf(b);
    if direct.is_normal() && scale.abs() <= 2100.0 {
        let whole = scale.floor();
        return times_pow2(direct * (scale - whole).exp2(), whole as i32);
    }
    let log_d = if b == 0.0 { 0.0 } else { b * d.ln() };
    (a * share.ln() - log_d + scale * std::f64::consts::LN_2).exp()
}

/// Cliff-Ord weights (Cliff and Ord 1981): w_ij = (b_ij / p_i)^a / d_ij^b for
/// rook neighbours, with b_ij the shared border length, p_i the perimeter
/// of i (so b_ij / p_i is the share of i's boundary shared with j) and d_ij
/// the distance between the centroids. Asymmetric in general. The powers
/// must be finite and >= 0 ([`Error::InvalidPower`]); a weight beyond the
/// range of floating point is refused ([`Error::WeightOutOfRange`]), never
/// stored as 0 or infinity.
pub fn cliff_ord(
    p: &Polygons<'_>,
    border_power: f64,
    distance_power: f64,
    tolerance: f64,
    metric: Metric,
    guard: &Guard,
) -> Result<(Csr, Contiguity)> {
    check_cliff_ord(p, [("border_power", border_power), ("distance_power", distance_power)], tolerance, metric)?;
    let frame = Frame::near_one(p.coords(), metric == Metric::Euclidean)?;
    let local = frame.local(p.coords());
    let lp = p.with_coords(&local);
    let mut c = contiguity_in(&lp, Rule::Rook, frame.to_local(tolerance), metric, guard)?;
    let n = p.n();
    let centres: Vec<Option<[f64; 2]>> = (0..n).into_par_iter().map(|u| centroid(&lp, u)).collect();
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
            // a rook link has a positive length, so a positive share
            let w = cliff_ord_weight(len / c.perimeter[i], d, border_power, distance_power, frame.exponent());
            // subnormal weights would have lost digits: refused with the others
            if !w.is_normal() {
                return Err(Error::WeightOutOfRange {
                    what: "Cliff-Ord weight",
                    link: Link(i, j),
                    value: w,
                    advice: "use smaller powers, or rescale the coordinates so that distances are nearer 1",
                });
            }
            row.push((j, w));
        }
        rows.push(row);
    }
    to_world(&frame, &mut c);
    Ok((Csr::from_rows(rows), c))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn boxes(b: &[[f64; 4]]) -> (Vec<f64>, Vec<i64>, Vec<i64>, Vec<i64>) {
        let coords = b.iter().flat_map(|&[x0, y0, x1, y1]| [x0, y0, x1, y0, x1, y1, x0, y1, x0, y0]).collect();
        let offsets: Vec<i64> = (0..=b.len() as i64).collect();
        (coords, offsets.iter().map(|k| 5 * k).collect(), offsets.clone(), offsets)
    }

    #[test]
    fn overlaps_whose_boundaries_only_touch() {
        // lengths by hand: the overlap [1, 2] x [0, 2] has perimeter 6; a box inside
        // touching the other's bottom shares its perimeter 4; boxes side by side share 1
        for (b, want) in [
            ([[0., 0., 2., 2.], [1., 0., 3., 2.]], 6.0),
            ([[0., 0., 10., 10.], [2., 0., 3., 1.]], 4.0),
            ([[0., 0., 1., 1.], [1., 0., 2., 1.]], 1.0),
        ] {
            let (c, r, p, u) = boxes(&b);
            let polys = Polygons::new(&c, &r, &p, &u).unwrap();
            for tol in [0.0, 1e-9] {
                let got = contiguity(&polys, Rule::Rook, tol, Metric::Euclidean, &Guard::unlimited()).unwrap();
                assert_eq!(got.graph.view().data(), &[want, want], "{b:?} {tol}");
            }
        }
    }

    #[test]
    fn cliff_ord_weights_in_any_frame() {
        // the plain formula (Cliff and Ord 1981): 0.25 / 0.5^2 = 1
        assert_eq!(cliff_ord_weight(0.25, 0.5, 1.0, 2.0, 0), 1.0);
        // a frame 2^-10 times the world: d_world = 0.5 * 2^10, w = 0.25 / 2^18 = 2^-20
        assert_eq!(cliff_ord_weight(0.25, 0.5, 1.0, 2.0, -10), 2f64.powi(-20));
        // 0.25^600 underflows on the way; the weight 0.5^600 / 0.25^600 = 2^600 does not
        let w = cliff_ord_weight(0.5, 0.25, 600.0, 600.0, 0);
        assert!((w.log2() - 600.0).abs() < 1e-9, "{w}");
        // beyond floating point: infinite, refused by the caller
        assert_eq!(cliff_ord_weight(0.5, 0.25, 1.0, 1e6, 0), f64::INFINITY);
        assert_eq!(cliff_ord_weight(0.5, 0.25, 1e6, 0.0, 0), 0.0);
    }
}
