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
//! (Shimrat 1962) of its midpoint against the other's exterior segments,
//! found through the same sweep structure ([`SegIndex`]). O(s log s) for s
//! segments near the overlap, plus the segments each ray meets. Boundaries
//! that touch without crossing can bound an overlap too: [`enters`] finds
//! it from the exact meetings ([`Meetings`]) gathered while the common
//! border is measured, testing one midpoint per piece off the other
//! boundary next to a meeting and per run of segments without meetings.

use super::candidates::overlap;
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

/// Where the segments `to` meet a segment's box: a sweep structure when
/// there are enough of them and of the segments that ask, else a scan.
///
/// The sweep sorts the segments by their low end along one axis (the one
/// along which their extents overlap least: x for a border running east
/// and west, however much it wiggles) and keeps a max-tree of their high
/// ends in that order, so a query lists the k segments whose extents meet
/// its own along that axis in O((k + 1) log s). (An R-tree of the boxes
/// degrades here: the boxes of a wiggling border are tall and thin, its
/// nodes slabs that every query crosses, about O(s^0.5) per query.)
pub struct SegIndex(Option<Sweep>);

struct Sweep {
    axis: usize,
    /// segments by their low end along `axis`, and those low ends
    order: Vec<usize>,
    lo: Vec<f64>,
    /// max-tree of the high ends in that order: leaves at `size + k`
    hi: Vec<f64>,
    size: usize,
}

impl Sweep {
    fn new(to: &[Seg]) -> Self {
        let extent = |axis: usize| {
            let (mut lo, mut hi, mut sum) = (f64::INFINITY, f64::NEG_INFINITY, 0.0);
            for &(a, b) in to {
                lo = lo.min(a[axis].min(b[axis]));
                hi = hi.max(a[axis].max(b[axis]));
                sum += (a[axis] - b[axis]).abs();
            }
            // how many segments overlap a point on average along the axis
            sum / (hi - lo).max(f64::MIN_POSITIVE)
        };
        let axis = if extent(0) <= extent(1) { 0 } else { 1 };
        let low = |k: usize| to[k].0[axis].min(to[k].1[axis]);
        let mut order: Vec<usize> = (0..to.len()).collect();
        order.sort_unstable_by(|&a, &b| low(a).total_cmp(&low(b)));
        let lo = order.iter().map(|&k| low(k)).collect();
        let size = to.len().next_power_of_two();
        let mut hi = vec![f64::NEG_INFINITY; 2 * size];
        for (slot, &k) in order.iter().enumerate() {
            hi[size + slot] = to[k].0[axis].max(to[k].1[axis]);
        }
        for node in (1..size).rev() {
            hi[node] = hi[2 * node].max(hi[2 * node + 1]);
        }
        Sweep { axis, order, lo, hi, size }
    }

    /// Call `f` with each segment whose extent along the axis meets [q0, q1].
    fn each(&self, q0: f64, q1: f64, mut f: impl FnMut(usize)) {
        // only segments starting at or before q1, and of those the ones ending at or after q0
        let end = self.lo.partition_point(|&v| v <= q1);
        let mut stack = vec![(1usize, 0usize, self.size)];
        while let Some((node, from, to)) = stack.pop() {
            if from >= end || self.hi[node] < q0 {
                continue;
            }
            if to - from == 1 {
                f(self.order[from]);
                continue;
            }
            let mid = (from + to) / 2;
            stack.push((2 * node + 1, mid, to));
            stack.push((2 * node, from, mid));
        }
    }
}

impl SegIndex {
    /// Below this many segment pairs a scan is faster than building the sweep.
    pub const SCAN: usize = 1024;

    pub fn new(to: &[Seg], asking: usize) -> Self {
        let big = to.len() >= 16 && to.len().saturating_mul(asking) > Self::SCAN;
        SegIndex(big.then(|| Sweep::new(to)))
    }

    /// Call `f` with each segment of `to` whose box may meet `bx` (a
    /// superset: callers test the boxes again). The order differs between
    /// the two routes; callers only accumulate, so results do not.
    pub fn each(&self, to: &[Seg], bx: &BBox, mut f: impl FnMut(P, P)) {
        self.each_at(to, bx, |_, a, b| f(a, b));
    }

    /// As [`SegIndex::each`], with the position of each segment in `to`.
    pub fn each_at(&self, to: &[Seg], bx: &BBox, mut f: impl FnMut(usize, P, P)) {
        match &self.0 {
            None => to.iter().enumerate().for_each(|(k, &(a, b))| f(k, a, b)),
            Some(sweep) => sweep.each(bx[sweep.axis], bx[sweep.axis + 2], |k| f(k, to[k].0, to[k].1)),
        }
    }
}

/// The inside of one unit with its holes filled (the area within its
/// exterior rings), for point-in-polygon tests.
pub struct Fill {
    segs: Vec<Seg>,
    rings: Vec<usize>,
    /// the segments swept along the axis where they overlap least; rays run
    /// along the other axis, so each meets few segments
    sweep: Sweep,
    bbox: BBox,
    odd: Vec<usize>,
}

impl Fill {
    pub fn new(p: &Polygons<'_>, u: usize) -> Option<Self> {
        let bbox = p.bbox(u)?;
        let mut all = Vec::new();
        p.exterior_segments(u, &mut all);
        let segs: Vec<Seg> = all.iter().map(|&(a, b, _)| (a, b)).collect();
        let rings = all.iter().map(|&(_, _, r)| r).collect();
        let sweep = Sweep::new(&segs);
        Some(Fill { segs, rings, sweep, bbox, odd: Vec::new() })
    }

    /// Whether q lies inside an exterior ring (points on the boundary may
    /// go either way: callers classify those separately).
    pub fn contains(&mut self, q: P) -> bool {
        let b = self.bbox;
        if q[0] < b[0] || q[0] > b[2] || q[1] < b[1] || q[1] > b[3] {
            return false;
        }
        // the ray from q towards +infinity along `ax`, through the segments
        // whose extent along the other axis holds q
        let other = self.sweep.axis;
        let ax = 1 - other;
        self.odd.clear();
        let (segs, rings, odd) = (&self.segs, &self.rings, &mut self.odd);
        self.sweep.each(q[other], q[other], |k| {
            let (s, e) = segs[k];
            if (s[other] > q[other]) != (e[other] > q[other]) {
                let at = s[ax] + (q[other] - s[other]) / (e[other] - s[other]) * (e[ax] - s[ax]);
                if q[ax] < at {
                    odd.push(rings[k]);
                }
            }
        });
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

/// The exact meetings of two boundaries, each side in the parameters of
/// its own segments: (segment, lo, hi), lo == hi at a point, lo < hi along
/// a common stretch. Gathered in the one pass that measures the common
/// border, so that [`enters`] can tell, without a second pass, whether one
/// boundary runs into the other unit where the two only touch.
#[derive(Default)]
pub struct Meetings {
    pub a: Vec<(usize, f64, f64)>,
    pub b: Vec<(usize, f64, f64)>,
    at: Vec<f64>,
}

impl Meetings {
    pub fn clear(&mut self) {
        self.a.clear();
        self.b.clear();
    }

    /// Record the meeting `m` = meet_exact(a0, a1, b0, b1) of segment `ka`
    /// of one side with segment `kb` of the other.
    pub fn record(&mut self, (ka, a0, a1): (usize, P, P), (kb, b0, b1): (usize, P, P), m: Meet) {
        let at = &mut self.at;
        match m {
            Meet::Apart => {}
            Meet::Point | Meet::Cross => {
                at.clear();
                meeting_params(a0, a1, b0, b1, at);
                self.a.extend(at.iter().map(|&t| (ka, t, t)));
                at.clear();
                meeting_params(b0, b1, a0, a1, at);
                self.b.extend(at.iter().map(|&t| (kb, t, t)));
            }
            Meet::Stretch(l, h) => {
                self.a.push((ka, l, h));
                let (t0, t1) = (param(b0, b1, a0), param(b0, b1, a1));
                self.b.push((kb, t0.min(t1).max(0.0), t0.max(t1).min(1.0)));
            }
        }
    }
}

/// Point-in-unit tests against one unit with its holes filled: a scan of
/// its rings for the first few (or for a small unit), then a [`Fill`].
pub struct Inside<'p> {
    p: &'p Polygons<'p>,
    u: usize,
    bbox: BBox,
    small: bool,
    scans: usize,
    fill: Option<Fill>,
}

impl<'p> Inside<'p> {
    const SCANS: usize = 16;

    pub fn new(p: &'p Polygons<'p>, u: usize, bbox: BBox) -> Self {
        let small = p.rings_of(u).map(|(_, r)| r.len()).sum::<usize>() <= 64;
        Inside { p, u, bbox, small, scans: 0, fill: None }
    }

    /// Whether q lies inside an exterior ring of the unit (points on its
    /// boundary may go either way).
    pub fn contains(&mut self, q: P) -> bool {
        let b = self.bbox;
        if q[0] < b[0] || q[0] > b[2] || q[1] < b[1] || q[1] > b[3] {
            return false;
        }
        if self.fill.is_none() && (self.small || self.scans < Self::SCANS) {
            self.scans += 1;
            return self.p.inside_exterior(self.u, q);
        }
        let (p, u) = (self.p, self.u);
        self.fill.get_or_insert_with(|| Fill::new(p, u).expect("a unit with a box has points")).contains(q)
    }
}

/// Pieces shorter than this (in a segment's parameter) are rounding gaps
/// between meetings, too short to classify.
const PIECE: f64 = 16.0 * f64::EPSILON;

/// A piece whose midpoint lies within this fraction of its length of the
/// other boundary runs along it within rounding (a vertex an ulp off a
/// straight edge): its side cannot be told from a rounded midpoint, and it
/// counts as on the boundary, not inside.
const ALONG: f64 = 1.0 / (1u64 << 40) as f64;

fn dist2_to_segment(q: P, b0: P, b1: P) -> f64 {
    let t = param(b0, b1, q).clamp(0.0, 1.0);
    let d = sub(q, [b0[0] + t * (b1[0] - b0[0]), b0[1] + t * (b1[1] - b0[1])]);
    dot(d, d)
}

/// The other unit and its boundary segments near the segments asking,
/// with an index of them (built when first needed, if not given).
pub struct Other<'a, 'p> {
    inside: Inside<'p>,
    to: &'a [Seg],
    index: Option<&'a SegIndex>,
    own: Option<SegIndex>,
}

impl<'a, 'p> Other<'a, 'p> {
    pub fn new(inside: Inside<'p>, to: &'a [Seg], index: Option<&'a SegIndex>) -> Self {
        Other { inside, to, index, own: None }
    }

    /// Whether the piece of length `len` with midpoint q lies inside the
    /// unit, away from its boundary.
    fn holds(&mut self, q: P, len: f64) -> bool {
        if !self.inside.contains(q) {
            return false;
        }
        let r = len * ALONG;
        let mut along = false;
        let to = self.to;
        let index = match self.index {
            Some(index) => index,
            None => self.own.get_or_insert_with(|| SegIndex::new(to, SegIndex::SCAN)),
        };
        index.each(to, &seg_box(q, q, r), |b0, b1| along |= dist2_to_segment(q, b0, b1) <= r * r);
        !along
    }
}

/// Whether some part of the segments `from` (in ring order) that does not
/// lie on the other boundary lies inside the other unit (`other`), given
/// every exact meeting of `from` with the other boundary (`meets`, sorted
/// here). Each segment is cut at its meetings and the pieces off the other
/// boundary are tested by their midpoints (a piece along the other
/// boundary within rounding counts as on it); a segment without meetings that
/// continues the previous one lies on the same side as the end of it, so
/// only the first of such a run is tested. Stops at the first piece inside.
pub fn enters(from: &[Seg], meets: &mut [(usize, f64, f64)], other: &mut Other<'_, '_>) -> bool {
    meets.sort_unstable_by(|x, y| x.0.cmp(&y.0).then(x.1.total_cmp(&y.1)));
    let at = |a0: P, a1: P, t: f64| [a0[0] + t * (a1[0] - a0[0]), a0[1] + t * (a1[1] - a0[1])];
    let mut cuts = Vec::new();
    let mut next = 0;
    for (k, &(a0, a1)) in from.iter().enumerate() {
        let first = next;
        while next < meets.len() && meets[next].0 == k {
            next += 1;
        }
        let mine = &meets[first..next];
        if mine.is_empty() {
            let continues = k > 0 && from[k - 1].1 == a0;
            if !continues && other.holds(at(a0, a1, 0.5), dot(sub(a1, a0), sub(a1, a0)).sqrt()) {
                return true;
            }
            continue;
        }
        cuts.clear();
        cuts.extend([0.0, 1.0]);
        cuts.extend(mine.iter().flat_map(|&(_, l, h)| [l, h]));
        cuts.sort_unstable_by(f64::total_cmp);
        cuts.dedup();
        for w in cuts.windows(2) {
            let (t0, t1) = (w[0], w[1]);
            let mid = 0.5 * (t0 + t1);
            if t1 - t0 <= PIECE || mine.iter().any(|&(_, l, h)| l < h && l <= mid && mid <= h) {
                continue;
            }
            if other.holds(at(a0, a1, mid), (t1 - t0) * dot(sub(a1, a0), sub(a1, a0)).sqrt()) {
                return true;
            }
        }
    }
    false
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
    fn sweep_finds_what_a_scan_finds() {
        // a wiggling border and a few long segments; brute force is the oracle (common practice)
        let mut to: Vec<Seg> = (0..300)
            .map(|k| {
                let (x, y) = (k as f64, ((k * 7919) % 13) as f64);
                ([x, y], [x + 1.0, ((k * 104_729) % 11) as f64])
            })
            .collect();
        to.push(([-5.0, 0.0], [400.0, 3.0]));
        to.push(([50.0, -10.0], [50.0, 30.0]));
        let index = SegIndex::new(&to, 100);
        assert!(index.0.is_some());
        for q in [[0.5, 0.0, 3.0, 2.0], [-1.0, -1.0, 0.0, 0.0], [49.0, 20.0, 49.5, 25.0], [299.0, 0.0, 999.0, 99.0]] {
            let mut got = Vec::new();
            index.each(&to, &q, |a, b| {
                if overlap(&seg_box(a, b, 0.0), &q) {
                    got.push((a, b));
                }
            });
            let mut want: Vec<Seg> = to.iter().copied().filter(|&(a, b)| overlap(&seg_box(a, b, 0.0), &q)).collect();
            let key = |s: &Seg| (s.0[0], s.0[1], s.1[0], s.1[1]);
            got.sort_by(|a, b| key(a).partial_cmp(&key(b)).unwrap());
            want.sort_by(|a, b| key(a).partial_cmp(&key(b)).unwrap());
            assert_eq!(got, want, "{q:?}");
        }
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
