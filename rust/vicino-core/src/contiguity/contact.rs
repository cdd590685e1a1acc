//! Contact between two boundary segments: whether they touch, and which
//! stretch of the first lies on (or, with a tolerance, near) the second.
//!
//! Without tolerance the tests are exact: orientation by the robust
//! predicates of Shewchuk (1997) through `geo`'s `RobustKernel`, so a vertex
//! touches an edge only when it lies exactly on it. With tolerance t > 0 a
//! point of segment a is "near" segment b when its distance to b is at most
//! t; the near points of a form one interval of its parameter, because the
//! distance to a convex set is convex along a line. The stretch that counts
//! as shared is narrower: the points of a within t of b that also project
//! onto b, for segments within 10 degrees of parallel, so that two units
//! meeting at a corner do not gain a "shared stretch" of length about 2t
//! from the edges around the corner.
//!
//! For units whose boundaries cross (their interiors overlap), [`Fill`] and
//! [`inside_length`] measure the part of one boundary that lies within the
//! other unit (holes filled): each segment is cut at its meetings with the
//! other boundary, and each piece is classified by a crossing-number test
//! (Shimrat 1962) of its midpoint, on an R-tree of the other's exterior
//! segments, with the ray along the shorter side of its box. O(s log s)
//! for s segments near the overlap, plus the segments each ray meets.

use super::candidates::{meeting, overlap, tree_of, BoxTree};
use super::geometry::{BBox, Polygons};
use geo::kernels::{Kernel, Orientation, RobustKernel};
use geo::Coord;

type P = [f64; 2];

fn orient(p: P, q: P, r: P) -> Orientation {
    let c = |a: P| Coord { x: a[0], y: a[1] };
    RobustKernel::orient2d(c(p), c(q), c(r))
}

fn sub(a: P, b: P) -> P {
    [a[0] - b[0], a[1] - b[1]]
}
fn dot(a: P, b: P) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}

/// Parameter of p projected on the line a0 + t (a1 - a0).
fn param(a0: P, a1: P, p: P) -> f64 {
    let d = sub(a1, a0);
    dot(sub(p, a0), d) / dot(d, d)
}

/// Whether p (known collinear with segment a) lies within its closed extent.
fn on_collinear(a0: P, a1: P, p: P) -> bool {
    p[0] >= a0[0].min(a1[0]) && p[0] <= a0[0].max(a1[0]) && p[1] >= a0[1].min(a1[1]) && p[1] <= a0[1].max(a1[1])
}

/// How two segments meet, exactly.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Meet {
    /// No common point.
    Apart,
    /// Common points but no common stretch.
    Point,
    /// The segments cross at a point inside both (the boundaries cross, so
    /// the units overlap).
    Cross,
    /// Collinear with a common stretch: the parameter interval of it on `a`.
    Stretch(f64, f64),
}

/// Exact meeting of segments a = (a0, a1) and b = (b0, b1), both of positive length.
pub fn meet_exact(a0: P, a1: P, b0: P, b1: P) -> Meet {
    let (o1, o2) = (orient(a0, a1, b0), orient(a0, a1, b1));
    let collinear = Orientation::Collinear;
    if o1 == collinear && o2 == collinear {
        let (t0, t1) = (param(a0, a1, b0), param(a0, a1, b1));
        let (lo, hi) = (t0.min(t1).max(0.0), t0.max(t1).min(1.0));
        // decide overlap by exact coordinates, not by the rounded parameters
        let any = on_collinear(a0, a1, b0)
            || on_collinear(a0, a1, b1)
            || on_collinear(b0, b1, a0)
            || on_collinear(b0, b1, a1);
        if !any {
            return Meet::Apart;
        }
        return if hi > lo { Meet::Stretch(lo, hi) } else { Meet::Point };
    }
    let (o3, o4) = (orient(b0, b1, a0), orient(b0, b1, a1));
    if o1 != o2 && o3 != o4 {
        let proper = o1 != collinear && o2 != collinear && o3 != collinear && o4 != collinear;
        return if proper { Meet::Cross } else { Meet::Point };
    }
    let touching = (o1 == collinear && on_collinear(a0, a1, b0))
        || (o2 == collinear && on_collinear(a0, a1, b1))
        || (o3 == collinear && on_collinear(b0, b1, a0))
        || (o4 == collinear && on_collinear(b0, b1, a1));
    if touching {
        Meet::Point
    } else {
        Meet::Apart
    }
}

/// Interval of t in [0, 1] where |a0 + t d - c| <= r, if any.
fn disk(a0: P, d: P, c: P, r: f64) -> Option<(f64, f64)> {
    let f = sub(a0, c);
    let (qa, qb, qc) = (dot(d, d), 2.0 * dot(d, f), dot(f, f) - r * r);
    let disc = qb * qb - 4.0 * qa * qc;
    if disc < 0.0 {
        return None;
    }
    let s = disc.sqrt();
    let (lo, hi) = ((-qb - s) / (2.0 * qa), (-qb + s) / (2.0 * qa));
    clip(lo, hi)
}

fn clip(lo: f64, hi: f64) -> Option<(f64, f64)> {
    let (lo, hi) = (lo.max(0.0), hi.min(1.0));
    (lo <= hi).then_some((lo, hi))
}

/// Segments count as near-coincident only within this angle of parallel.
pub const MAX_ANGLE_DEGREES: f64 = 10.0;

/// Whether segments a and b come within `tol` of each other.
pub fn near(a0: P, a1: P, b0: P, b1: P, tol: f64) -> bool {
    if !matches!(meet_exact(a0, a1, b0, b1), Meet::Apart) {
        return true;
    }
    let d = sub(a1, a0);
    let e = sub(b1, b0);
    // apart segments are nearest at an endpoint of one of them
    disk(a0, d, b0, tol).is_some()
        || disk(a0, d, b1, tol).is_some()
        || disk(b0, e, a0, tol).is_some()
        || disk(b0, e, a1, tol).is_some()
        || slab(a0, a1, b0, b1, tol).is_some()
        || slab(b0, b1, a0, a1, tol).is_some()
}

/// Interval of t in [0, 1] where a0 + t (a1 - a0) projects onto segment b
/// and lies within `tol` of its line.
fn slab(a0: P, a1: P, b0: P, b1: P, tol: f64) -> Option<(f64, f64)> {
    let d = sub(a1, a0);
    let e = sub(b1, b0);
    let le2 = dot(e, e);
    // lo <= c0 + c1 t <= hi
    let lin = |c0: f64, c1: f64, lo: f64, hi: f64| -> Option<(f64, f64)> {
        if c1 == 0.0 {
            return (c0 >= lo && c0 <= hi).then_some((0.0, 1.0));
        }
        let (t0, t1) = ((lo - c0) / c1, (hi - c0) / c1);
        clip(t0.min(t1), t0.max(t1))
    };
    let f = sub(a0, b0);
    let len = le2.sqrt();
    let cross = |u: P, v: P| u[0] * v[1] - u[1] * v[0];
    let proj = lin(dot(f, e) / le2, dot(d, e) / le2, 0.0, 1.0)?;
    let perp = lin(cross(e, f) / len, cross(e, d) / len, -tol, tol)?;
    clip(proj.0.max(perp.0), proj.1.min(perp.1))
}

/// Interval of t in [0, 1] where a0 + t (a1 - a0) runs alongside segment b
/// within `tol` (see the module notes), if any.
pub fn coincident_interval(a0: P, a1: P, b0: P, b1: P, tol: f64) -> Option<(f64, f64)> {
    let (d, e) = (sub(a1, a0), sub(b1, b0));
    let cos = dot(d, e).abs() / (dot(d, d) * dot(e, e)).sqrt();
    if cos < MAX_ANGLE_DEGREES.to_radians().cos() {
        return None;
    }
    slab(a0, a1, b0, b1, tol)
}

/// Total length of the union of intervals (sorted in place), times `scale`.
pub fn union_length(iv: &mut [(f64, f64)], scale: f64) -> f64 {
    iv.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let mut total = 0.0;
    let mut cur: Option<(f64, f64)> = None;
    for &(l, h) in iv.iter() {
        cur = match cur {
            Some((cl, ch)) if l <= ch => Some((cl, ch.max(h))),
            Some((cl, ch)) => {
                total += ch - cl;
                Some((l, h))
            }
            None => Some((l, h)),
        };
    }
    if let Some((cl, ch)) = cur {
        total += ch - cl;
    }
    total * scale
}

/// A segment: its two ends.
pub type Seg = (P, P);

/// The box of a segment, widened by `t`.
pub fn seg_box(a: P, b: P, t: f64) -> BBox {
    [a[0].min(b[0]) - t, a[1].min(b[1]) - t, a[0].max(b[0]) + t, a[1].max(b[1]) + t]
}

/// Where the segments `to` meet a segment's box: an R-tree of their boxes
/// when there are enough of them and of the segments that ask, else a scan.
pub struct SegIndex(Option<BoxTree>);

impl SegIndex {
    /// Below this many segment pairs a scan is faster than building a tree.
    const SCAN: usize = 1024;

    pub fn new(to: &[Seg], asking: usize) -> Self {
        let big = to.len() >= 16 && to.len().saturating_mul(asking) > Self::SCAN;
        SegIndex(big.then(|| tree_of(to.iter().enumerate().map(|(k, &(a, b))| (k, seg_box(a, b, 0.0))))))
    }

    /// Call `f` with each segment of `to` whose box may meet `bx` (a
    /// superset: callers test the boxes again). The order differs between
    /// the two routes; callers only accumulate, so results do not.
    pub fn each(&self, to: &[Seg], bx: &BBox, mut f: impl FnMut(P, P)) {
        match &self.0 {
            None => to.iter().for_each(|&(a, b)| f(a, b)),
            Some(tree) => meeting(tree, bx).for_each(|k| f(to[k].0, to[k].1)),
        }
    }
}

/// The inside of one unit with its holes filled (the area within its
/// exterior rings), for point-in-polygon tests.
pub struct Fill {
    segs: Vec<(P, P, usize)>,
    tree: BoxTree,
    bbox: BBox,
    /// rays run along y (true) or x (false): along the shorter side of the box
    vertical: bool,
    odd: Vec<usize>,
}

impl Fill {
    pub fn new(p: &Polygons<'_>, u: usize) -> Option<Self> {
        let bbox = p.bbox(u)?;
        let mut segs = Vec::new();
        p.exterior_segments(u, &mut segs);
        let tree = tree_of(segs.iter().enumerate().map(|(k, &(a, b, _))| (k, seg_box(a, b, 0.0))));
        let vertical = bbox[3] - bbox[1] < bbox[2] - bbox[0];
        Some(Fill { segs, tree, bbox, vertical, odd: Vec::new() })
    }

    /// Whether q lies inside an exterior ring (points on the boundary may
    /// go either way: callers classify those separately).
    pub fn contains(&mut self, q: P) -> bool {
        let b = self.bbox;
        if q[0] < b[0] || q[0] > b[2] || q[1] < b[1] || q[1] > b[3] {
            return false;
        }
        // the ray from q towards the high side of the box, along one axis
        let (ax, ray) = if self.vertical { (1, [q[0], q[1], q[0], b[3]]) } else { (0, [q[0], q[1], b[2], q[1]]) };
        let other = 1 - ax;
        self.odd.clear();
        for k in meeting(&self.tree, &ray) {
            let (s, e, ring) = self.segs[k];
            if (s[other] > q[other]) != (e[other] > q[other]) {
                let at = s[ax] + (q[other] - s[other]) / (e[other] - s[other]) * (e[ax] - s[ax]);
                if q[ax] < at {
                    self.odd.push(ring);
                }
            }
        }
        // inside any exterior ring: an odd number of crossings of that ring
        self.odd.sort_unstable();
        self.odd.chunk_by(|a, b| a == b).any(|run| run.len() % 2 == 1)
    }
}

/// Parameter on a = (a0, a1) of the meeting point with b, for segments
/// known to meet at a point (crossing, or touching at an end of one).
fn meeting_params(a0: P, a1: P, b0: P, b1: P, out: &mut Vec<f64>) {
    let (d, e) = (sub(a1, a0), sub(b1, b0));
    let denom = d[0] * e[1] - d[1] * e[0];
    if denom != 0.0 {
        let f = sub(b0, a0);
        out.push(((f[0] * e[1] - f[1] * e[0]) / denom).clamp(0.0, 1.0));
    } else {
        out.extend([param(a0, a1, b0).clamp(0.0, 1.0), param(a0, a1, b1).clamp(0.0, 1.0)]);
    }
}

/// Lengths of the part of segments `from` inside `fill` (the other unit,
/// holes filled) and of the part lying on the other's boundary `to`, each
/// segment's length given by `len`. Pieces between meetings with `to` are
/// classified by their midpoints; pieces on `to` count as inside.
pub fn inside_length(
    from: &[Seg],
    to: &[Seg],
    index: &SegIndex,
    fill: &mut Fill,
    len: impl Fn(P, P) -> f64,
) -> (f64, f64) {
    let (mut inside, mut on) = (0.0, 0.0);
    let (mut cuts, mut iv) = (Vec::new(), Vec::new());
    for &(a0, a1) in from {
        cuts.clear();
        iv.clear();
        cuts.extend([0.0, 1.0]);
        let ab = seg_box(a0, a1, 0.0);
        index.each(to, &ab, |b0, b1| {
            if !overlap(&seg_box(b0, b1, 0.0), &ab) {
                return;
            }
            match meet_exact(a0, a1, b0, b1) {
                Meet::Apart => {}
                Meet::Point | Meet::Cross => meeting_params(a0, a1, b0, b1, &mut cuts),
                Meet::Stretch(l, h) => {
                    iv.push((l, h));
                    cuts.extend([l, h]);
                }
            }
        });
        cuts.sort_unstable_by(f64::total_cmp);
        cuts.dedup();
        iv.sort_unstable_by(|a: &(f64, f64), b| a.0.total_cmp(&b.0));
        let whole = len(a0, a1);
        for w in cuts.windows(2) {
            let (t0, t1) = (w[0], w[1]);
            if !(t1 > t0) {
                continue;
            }
            let mid = 0.5 * (t0 + t1);
            let piece = (t1 - t0) * whole;
            if iv.iter().any(|&(l, h)| l <= mid && mid <= h) {
                on += piece;
                inside += piece;
            } else if fill.contains([a0[0] + mid * (a1[0] - a0[0]), a0[1] + mid * (a1[1] - a0[1])]) {
                inside += piece;
            }
        }
    }
    (inside, on)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_cases() {
        // crossing, T-junction, collinear overlap, collinear touch, apart
        assert_eq!(meet_exact([0., 0.], [2., 2.], [0., 2.], [2., 0.]), Meet::Cross);
        assert_eq!(meet_exact([0., 0.], [2., 0.], [1., 0.], [1., 1.]), Meet::Point);
        assert_eq!(meet_exact([0., 0.], [2., 0.], [1., 0.], [3., 0.]), Meet::Stretch(0.5, 1.0));
        assert_eq!(meet_exact([0., 0.], [2., 0.], [2., 0.], [3., 0.]), Meet::Point);
        assert_eq!(meet_exact([0., 0.], [2., 0.], [2.5, 0.], [3., 0.]), Meet::Apart);
        assert_eq!(meet_exact([0., 0.], [2., 0.], [0., 1.], [2., 1.]), Meet::Apart);
    }

    #[test]
    fn near_cases() {
        // a parallel segment 0.1 away over half its length: the part of a
        // alongside it is t in [0.5, 1] (by hand)
        let iv = coincident_interval([0., 0.], [2., 0.], [1., 0.1], [3., 0.1], 0.15).unwrap();
        assert!((iv.0 - 0.5).abs() < 1e-12 && iv.1 == 1.0, "{iv:?}");
        assert!(coincident_interval([0., 0.], [2., 0.], [1., 0.2], [3., 0.2], 0.15).is_none());
        // perpendicular segments meeting at a corner: near, but nothing alongside
        assert!(near([0., 0.], [1., 0.], [1., 0.], [1., 1.], 0.01));
        assert!(coincident_interval([0., 0.], [1., 0.], [1., 0.], [1., 1.], 0.01).is_none());
        // collinear segments end to end: near, alongside only at one point
        assert_eq!(coincident_interval([0., 0.], [1., 0.], [1., 0.], [2., 0.], 0.01), Some((1.0, 1.0)));
        // a gap of 0.5 (exact in binary) between two apart segments: near from 0.5 on
        assert!(near([0., 0.], [1., 0.], [1.5, 0.], [2., 0.], 0.5));
        assert!(!near([0., 0.], [1., 0.], [1.5, 0.], [2., 0.], 0.49));
        assert_eq!(meet_exact([0., 0.], [2., 2.], [0., 2.], [2., 0.]), Meet::Cross);
        let mut v = vec![(0.5, 0.7), (0.0, 0.2), (0.1, 0.3)];
        assert!((union_length(&mut v, 10.0) - 5.0).abs() < 1e-12);
    }
}
