//! Candidate pairs of units: those whose bounding boxes overlap.
//!
//! A uniform grid files each box under the cells it covers; a pair is
//! reported once, from the cell that holds the low corner of the overlap of
//! the two boxes. The grid has at most about 4 cells per unit whatever the
//! spread of the units (cells need not be square, so units strung along a
//! line or far apart get a grid of a few cells, not one sized by the
//! spread), and its cells are about the median box size when that fits.
//! When the boxes would be filed more than 16 times per unit on average
//! (box sizes vary too much), or the extent is degenerate, an R-tree
//! (`rstar`, bulk-loaded: Leutenegger et al. 1997, sort-tile-recursive)
//! serves instead. Both find the same pairs.
//!
//! Complexity: O(n + filed boxes) for the grid, O(n log n) for the tree;
//! queries are O(log n + candidates) per unit.

use super::geometry::BBox;
use rstar::primitives::{GeomWithData, Rectangle};
use rstar::{RTree, AABB};

/// Whether two boxes overlap (boundaries included).
pub fn overlap(a: &BBox, b: &BBox) -> bool {
    a[0] <= b[2] && b[0] <= a[2] && a[1] <= b[3] && b[1] <= a[3]
}

/// Boxes in an R-tree, each with its unit (or segment) number.
pub type BoxTree = RTree<GeomWithData<Rectangle<[f64; 2]>, usize>>;

/// An R-tree (`rstar`) of the boxes that are present.
pub fn tree_of(boxes: impl Iterator<Item = (usize, BBox)>) -> BoxTree {
    let items = boxes.map(|(u, b)| GeomWithData::new(Rectangle::from_corners([b[0], b[1]], [b[2], b[3]]), u)).collect();
    RTree::bulk_load(items)
}

/// The members of `tree` whose boxes meet `b` (boundaries included).
pub fn meeting<'t>(tree: &'t BoxTree, b: &BBox) -> impl Iterator<Item = usize> + 't {
    tree.locate_in_envelope_intersecting(&AABB::from_corners([b[0], b[1]], [b[2], b[3]])).map(|g| g.data)
}

/// What finds the candidate pairs.
pub enum Candidates {
    Grid(Grid),
    Tree(BoxTree),
}

impl Candidates {
    /// The grid when it fits the boxes well, the R-tree otherwise.
    pub fn new(boxes: &[Option<BBox>]) -> Self {
        match Grid::new(boxes) {
            Some(g) => Candidates::Grid(g),
            None => Candidates::Tree(tree_of(boxes.iter().enumerate().filter_map(|(u, b)| b.map(|b| (u, b))))),
        }
    }

    /// Push onto `out` the units after i whose boxes overlap i's box (unsorted, once each).
    pub fn visit(&self, boxes: &[Option<BBox>], i: usize, out: &mut Vec<usize>) {
        let Some(bi) = boxes[i] else { return };
        match self {
            Candidates::Tree(tree) => out.extend(meeting(tree, &bi).filter(|&j| j > i)),
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

/// A uniform grid of gx x gy cells of size cw x ch. Measured on 10^6
/// Voronoi cells, filing and visiting take about half the time of building
/// and querying the R-tree.
pub struct Grid {
    ext: BBox,
    cw: f64,
    ch: f64,
    gx: usize,
    gy: usize,
    start: Vec<usize>,
    members: Vec<u32>,
}

/// The number of cells along an axis of `extent` with cells of `cell`,
/// as a float (so that no spread can overflow it).
fn cells(extent: f64, cell: f64) -> f64 {
    (extent / cell).floor() + 1.0
}

impl Grid {
    fn col(&self, x: f64) -> usize {
        // `as` saturates (NaN becomes 0), and the cell count caps it
        (((x - self.ext[0]) / self.cw) as usize).min(self.gx - 1)
    }
    fn row(&self, y: f64) -> usize {
        (((y - self.ext[1]) / self.ch) as usize).min(self.gy - 1)
    }
    fn span(&self, b: &BBox) -> (usize, usize, usize, usize) {
        (self.col(b[0]), self.row(b[1]), self.col(b[2]), self.row(b[3]))
    }

    /// The number of cells along x and y: about median-sized cells, but at
    /// most about 4 per unit in all and at most that many along either axis.
    fn shape(width: f64, height: f64, median: f64, units: usize) -> (usize, usize) {
        let limit = 4.0 * units as f64;
        let (mut nx, mut ny) = (cells(width, median), cells(height, median));
        if nx * ny > limit {
            // shrink both axes by one factor, keeping at least one cell on each
            let f = (nx * ny / limit).sqrt();
            ny = (ny / f).floor().clamp(1.0, limit);
            nx = (limit / ny).floor().clamp(1.0, limit);
        }
        (nx as usize, ny as usize)
    }

    /// None when the grid would be poor: boxes vary so much in size that it
    /// would file them too many times, or the extent is degenerate (then the
    /// R-tree serves).
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
        let median = *sizes.select_nth_unstable_by(mid, f64::total_cmp).1;
        let usable = |v: f64| v > 0.0 && v.is_finite();
        if !usable(median) || !usable(width) || !usable(height) {
            return None;
        }
        let (gx, gy) = Self::shape(width, height, median, live.len());
        let (cw, ch) = (width / gx as f64, height / gy as f64);
        if !usable(cw) || !usable(ch) {
            return None;
        }
        let mut g = Grid { ext, cw, ch, gx, gy, start: vec![0; gx * gy + 1], members: Vec::new() };
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

#[cfg(test)]
mod tests {
    use super::*;

    fn pairs(c: &Candidates, boxes: &[Option<BBox>]) -> Vec<(usize, usize)> {
        let mut out = Vec::new();
        for i in 0..boxes.len() {
            let mut js = Vec::new();
            c.visit(boxes, i, &mut js);
            js.sort_unstable();
            out.extend(js.into_iter().map(|j| (i, j)));
        }
        out
    }

    /// Brute force over all pairs (common practice: the oracle of any spatial index).
    fn brute(boxes: &[Option<BBox>]) -> Vec<(usize, usize)> {
        let mut out = Vec::new();
        for i in 0..boxes.len() {
            for j in i + 1..boxes.len() {
                if let (Some(a), Some(b)) = (boxes[i], boxes[j]) {
                    if overlap(&a, &b) {
                        out.push((i, j));
                    }
                }
            }
        }
        out
    }

    #[test]
    fn far_apart_units_get_a_small_grid() {
        // two thin boxes 1e14 apart: the grid was sized by the spread (about 226 GB)
        let boxes = vec![Some([0.0, 0.0, 1.0, 1e-6]), Some([1e14, 0.0, 1e14 + 1.0, 1e-6])];
        let g = Grid::new(&boxes).expect("a grid fits");
        assert!(g.gx * g.gy <= 8, "{} x {}", g.gx, g.gy);
        assert_eq!(pairs(&Candidates::Grid(g), &boxes), brute(&boxes));
    }

    #[test]
    fn one_huge_box_beside_small_ones() {
        let mut boxes: Vec<Option<BBox>> = (0..200).map(|k| Some([k as f64, 0.0, k as f64 + 1.0, 1.0])).collect();
        boxes.push(Some([-1e150, -1e150, 1e150, 1e150]));
        boxes.push(None);
        boxes.push(Some([1e-300, 0.5, 2e-300, 0.75]));
        let c = Candidates::new(&boxes);
        assert_eq!(pairs(&c, &boxes), brute(&boxes));
        let tree = Candidates::Tree(tree_of(boxes.iter().enumerate().filter_map(|(u, b)| b.map(|b| (u, b)))));
        assert_eq!(pairs(&tree, &boxes), brute(&boxes));
    }

    #[test]
    fn grid_shapes_stay_bounded() {
        for (w, h, m, n) in
            [(1e300, 1e-300, 1e-300, 2), (1e14, 1.0, 1.0, 10), (1.0, 1.0, 1e-300, 1000), (3.0, 2.0, 1.0, 6)]
        {
            let (gx, gy) = Grid::shape(w, h, m, n);
            assert!(gx >= 1 && gy >= 1 && gx * gy <= 4 * n, "{w} {h} {m} {n}: {gx} x {gy}");
        }
        // median-sized cells when they fit: 3 x 2 cells of size 1 (and the edges)
        assert_eq!(Grid::shape(3.0, 2.0, 1.0, 6), (4, 3));
    }
}
