// Dense oracles index their matrices by (i, j), as the formulas do.
#![allow(clippy::needless_range_loop)]
//! Polygon contiguity on unit-square lattices with random cells removed,
//! translated by whole numbers and scaled by powers of two (so every
//! coordinate and length is exact in f64). The reference is the lattice
//! itself: cells (r, c) and (r', c') share an edge when |dr| + |dc| = 1
//! (rook) and a point when max(|dr|, |dc|) = 1 (queen) (common practice).

use std::collections::{BTreeMap, BTreeSet};
use vicino_core::Guard;

use proptest::prelude::*;
use vicino_core::contiguity::{contiguity, Contiguity, Polygons, Rule};
use vicino_core::neighbors::Metric;

// ---------------------------------------------------------------------------
// helpers

/// Flat polygon buffers in the layout of geometry.rs: interleaved
/// coordinates, ring offsets, polygon offsets, unit offsets (all from 0).
#[derive(Default, Clone)]
struct Buffers {
    coords: Vec<f64>,
    rings: Vec<i64>,
    polys: Vec<i64>,
    units: Vec<i64>,
}

impl Buffers {
    fn new() -> Self {
        Self { coords: vec![], rings: vec![0], polys: vec![0], units: vec![0] }
    }
    /// Add a unit made of one closed square ring with lower-left (x, y) and side s.
    fn square(&mut self, x: f64, y: f64, s: f64) {
        for (px, py) in [(x, y), (x + s, y), (x + s, y + s), (x, y + s), (x, y)] {
            self.coords.extend([px, py]);
        }
        self.rings.push((self.coords.len() / 2) as i64);
        self.polys.push((self.rings.len() - 1) as i64);
        self.units.push((self.polys.len() - 1) as i64);
    }
    /// Add a unit with no polygons (an empty geometry).
    fn empty(&mut self) {
        self.units.push((self.polys.len() - 1) as i64);
    }
    fn polygons(&self) -> Polygons<'_> {
        Polygons::new(&self.coords, &self.rings, &self.polys, &self.units).unwrap()
    }
}

/// A rows x cols lattice of squares of side `scale`, shifted by (dx, dy),
/// keeping the cells where `keep` is true; returns buffers and the (r, c) of
/// each unit in order.
fn lattice(rows: usize, cols: usize, keep: &[bool], dx: f64, dy: f64, scale: f64) -> (Buffers, Vec<(i64, i64)>) {
    let mut b = Buffers::new();
    let mut cells = Vec::new();
    for r in 0..rows {
        for c in 0..cols {
            if keep[r * cols + c] {
                b.square(dx + scale * c as f64, dy + scale * r as f64, scale);
                cells.push((r as i64, c as i64));
            }
        }
    }
    (b, cells)
}

/// Links of a contiguity graph: (i, j) -> shared length.
fn links(c: &Contiguity) -> BTreeMap<(usize, usize), f64> {
    let g = c.graph.view();
    let mut out = BTreeMap::new();
    for i in 0..g.n() {
        let (cols, lens) = g.row(i);
        for (&j, &l) in cols.iter().zip(lens) {
            assert!(out.insert((i, j as usize), l).is_none(), "duplicate link ({i}, {j})");
        }
    }
    out
}

fn pairs(c: &Contiguity) -> BTreeSet<(usize, usize)> {
    links(c).into_keys().collect()
}

/// Lattice reference (common practice): rook = edge neighbours, queen = edge or corner.
fn lattice_pairs(cells: &[(i64, i64)], rule: Rule) -> BTreeSet<(usize, usize)> {
    let mut out = BTreeSet::new();
    for (i, &(ri, ci)) in cells.iter().enumerate() {
        for (j, &(rj, cj)) in cells.iter().enumerate() {
            let (dr, dc) = ((ri - rj).abs(), (ci - cj).abs());
            let linked = match rule {
                Rule::Rook => dr + dc == 1,
                Rule::Queen => i != j && dr.max(dc) == 1,
            };
            if linked {
                out.insert((i, j));
            }
        }
    }
    out
}

fn run(b: &Buffers, rule: Rule) -> Contiguity {
    contiguity(&b.polygons(), rule, 0.0, Metric::Euclidean, &Guard::unlimited()).unwrap()
}

// ---------------------------------------------------------------------------
// fixed cases

#[test]
fn full_lattice_counts() {
    let (rows, cols) = (6, 7);
    let (b, cells) = lattice(rows, cols, &vec![true; rows * cols], 0.0, 0.0, 1.0);
    let rook = run(&b, Rule::Rook);
    let queen = run(&b, Rule::Queen);
    let (rc, qc) = (rook.graph.view().counts(), queen.graph.view().counts());
    for (u, &(r, c)) in cells.iter().enumerate() {
        let edge_r = r == 0 || r == rows as i64 - 1;
        let edge_c = c == 0 || c == cols as i64 - 1;
        let (want_rook, want_queen) = match (edge_r, edge_c) {
            (true, true) => (2, 3),                  // corner (common practice)
            (true, false) | (false, true) => (3, 5), // edge (common practice)
            (false, false) => (4, 8),                // interior (common practice)
        };
        assert_eq!(rc[u], want_rook, "rook count of cell ({r}, {c})");
        assert_eq!(qc[u], want_queen, "queen count of cell ({r}, {c})");
    }
    // common practice: a rows x cols lattice has r(c-1) + c(r-1) edge pairs and 2(r-1)(c-1) diagonal pairs
    let edge_pairs = rows * (cols - 1) + cols * (rows - 1);
    assert_eq!(rook.graph.view().nnz(), 2 * edge_pairs);
    assert_eq!(queen.graph.view().nnz(), 2 * (edge_pairs + 2 * (rows - 1) * (cols - 1)));
}

#[test]
fn empty_units_are_islands() {
    let mut b = Buffers::new();
    b.square(0.0, 0.0, 1.0);
    b.empty();
    b.square(1.0, 0.0, 1.0);
    let c = run(&b, Rule::Queen);
    assert_eq!(c.empty, vec![1]); // documented: empty geometries are listed as islands
    assert_eq!(pairs(&c), BTreeSet::from([(0, 2), (2, 0)])); // reference: the two squares share the edge x = 1
    assert_eq!(c.perimeter[0], 4.0); // common practice: perimeter of a unit square
    assert_eq!(c.perimeter[1], 0.0); // an empty unit has no boundary
}

#[test]
fn half_offset_t_junction() {
    // a square of side 2 beside two unit squares meeting at (2, 1), the middle of its edge
    let mut b = Buffers::new();
    b.square(0.0, 0.0, 2.0);
    b.square(2.0, 0.0, 1.0);
    b.square(2.0, 1.0, 1.0);
    let c = run(&b, Rule::Rook);
    let l = links(&c);
    // reference: exact geometry, each shared stretch has length 1
    assert_eq!(l.get(&(0, 1)), Some(&1.0));
    assert_eq!(l.get(&(0, 2)), Some(&1.0));
    assert_eq!(l.get(&(1, 2)), Some(&1.0));
    assert_eq!(l.len(), 6);
}

#[test]
fn rook_with_tiny_tolerance_keeps_lattice_counts() {
    let (b, cells) = lattice(3, 3, &[true; 9], 0.0, 0.0, 1.0);
    let c = contiguity(&b.polygons(), Rule::Rook, 1e-9, Metric::Euclidean, &Guard::unlimited()).unwrap();
    assert_eq!(pairs(&c), lattice_pairs(&cells, Rule::Rook)); // common practice: rook lattice 4 / 3 / 2
}

// ---------------------------------------------------------------------------
// properties

fn lattice_input() -> impl Strategy<Value = (usize, usize, Vec<bool>)> {
    (1usize..8, 1usize..8)
        .prop_flat_map(|(r, c)| (Just(r), Just(c), proptest::collection::vec(prop::bool::weighted(0.75), r * c)))
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 128, ..ProptestConfig::default() })]

    #[test]
    fn lattice_with_holes_matches_reference(
        (rows, cols, keep) in lattice_input(),
        dx in -1000i32..1000, dy in -1000i32..1000, k in -6i32..7,
    ) {
        let scale = 2f64.powi(k);
        let (base, cells) = lattice(rows, cols, &keep, 0.0, 0.0, 1.0);
        let (moved, _) = lattice(rows, cols, &keep, dx as f64, dy as f64, scale);
        prop_assume!(!cells.is_empty());
        for rule in [Rule::Queen, Rule::Rook] {
            let c0 = run(&base, rule);
            let c1 = run(&moved, rule);
            let l0 = links(&c0);
            let l1 = links(&c1);
            // lattice reference (common practice)
            prop_assert_eq!(pairs(&c0), lattice_pairs(&cells, rule));
            // symmetry: every link both ways, with the same length
            for (&(i, j), &len) in &l0 {
                prop_assert_eq!(l0.get(&(j, i)), Some(&len));
                prop_assert!(i != j, "self link at {}", i);
            }
            // translation by whole numbers and scaling by 2^k keep the neighbour sets
            prop_assert_eq!(pairs(&c1), pairs(&c0));
            // border lengths: exactly the side for edge neighbours, 0 at corners (exact geometry)
            for (&(i, j), &len) in &l1 {
                let (ri, ci) = cells[i];
                let (rj, cj) = cells[j];
                let edge = (ri - rj).abs() + (ci - cj).abs() == 1;
                prop_assert_eq!(len, if edge { scale } else { 0.0 });
                prop_assert_eq!(l0[&(i, j)], if edge { 1.0 } else { 0.0 });
            }
            // perimeter of a square of side s is 4 s (exact)
            prop_assert!(c1.perimeter.iter().all(|&p| p == 4.0 * scale));
            prop_assert!(c0.empty.is_empty());
        }
        // rook links are a subset of queen links
        let (q, r) = (pairs(&run(&moved, Rule::Queen)), pairs(&run(&moved, Rule::Rook)));
        prop_assert!(r.is_subset(&q));
    }

    #[test]
    fn unit_order_does_not_matter(
        (rows, cols, keep) in lattice_input(), seed in any::<u64>(),
    ) {
        let (b, cells) = lattice(rows, cols, &keep, 0.0, 0.0, 1.0);
        let n = cells.len();
        prop_assume!(n >= 2);
        // a permutation from the seed (Fisher-Yates with an LCG)
        let mut perm: Vec<usize> = (0..n).collect();
        let mut s = seed | 1;
        for i in (1..n).rev() {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            perm.swap(i, (s >> 33) as usize % (i + 1));
        }
        let mut shuffled = Buffers::new();
        for &p in &perm {
            let (r, c) = cells[p];
            shuffled.square(c as f64, r as f64, 1.0);
        }
        for rule in [Rule::Queen, Rule::Rook] {
            let want: BTreeSet<(usize, usize)> = pairs(&run(&b, rule));
            let got: BTreeSet<(usize, usize)> = pairs(&run(&shuffled, rule)).into_iter().map(|(i, j)| (perm[i], perm[j])).collect();
            prop_assert_eq!(got, want);
        }
    }
}

#[test]
fn crossing_boundaries_are_rook_neighbours() {
    let mut b = Buffers::new();
    b.square(0.0, 0.0, 2.0);
    b.square(1.0, 1.0, 2.0);
    assert_eq!(pairs(&run(&b, Rule::Queen)), BTreeSet::from([(0, 1), (1, 0)])); // the boundaries cross at (2, 1) and (1, 2)
    assert_eq!(pairs(&run(&b, Rule::Rook)), BTreeSet::from([(0, 1), (1, 0)])); // documented rule (mod.rs)
}

#[test]
fn shuffled_units_give_the_same_links() {
    // a 30 x 30 lattice with every seventh cell missing, its units in a
    // scrambled order: rows run in Z-order inside, so the links and lengths
    // are those of the lattice (common practice) whatever the input order
    let (rows, cols) = (30, 30);
    let keep: Vec<bool> = (0..rows * cols).map(|k| k % 7 != 3).collect();
    let (_, cells) = lattice(rows, cols, &keep, 0.0, 0.0, 1.0);
    let m = cells.len();
    let perm: Vec<usize> = (0..m).map(|p| (p * 389 + 11) % m).collect(); // 389 is prime, m = 771 = 3 * 257
    let mut b = Buffers::new();
    for &u in &perm {
        b.square(cells[u].1 as f64, cells[u].0 as f64, 1.0);
    }
    for rule in [Rule::Queen, Rule::Rook] {
        let c = run(&b, rule);
        let got: BTreeMap<(usize, usize), f64> =
            links(&c).into_iter().map(|((i, j), l)| ((perm[i], perm[j]), l)).collect();
        let want = lattice_pairs(&cells, rule);
        assert_eq!(got.keys().copied().collect::<BTreeSet<_>>(), want, "{rule:?}");
        // rook neighbours share a whole unit side, queen-only ones a corner
        for (&(i, j), &l) in &got {
            let rook = (cells[i].0 - cells[j].0).abs() + (cells[i].1 - cells[j].1).abs() == 1;
            assert_eq!(l, if rook { 1.0 } else { 0.0 }, "{rule:?} ({i}, {j})");
        }
    }
}
