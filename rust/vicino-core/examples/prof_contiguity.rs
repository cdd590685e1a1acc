//! Core-only timing of contiguity on polygons stored as WKB files:
//! `cargo run --release --example prof_contiguity -- units.wkb units.off`
//! (the .wkb file holds the bytes of all units, the .off file their i64
//! offsets in native byte order; `tests/benchmarks/bench_contiguity.py`
//! explains how to make them from shapely).
use std::time::Instant;
use vicino_core::contiguity::{contiguity, Polygons, Rule};
use vicino_core::io::wkb::decode_polygons;
use vicino_core::neighbors::Metric;
fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let bytes = std::fs::read(&args[0]).expect("read wkb");
    let off: Vec<i64> = std::fs::read(&args[1]).expect("read offsets").chunks_exact(8).map(|c| i64::from_ne_bytes(c.try_into().unwrap())).collect();
    {
        use rayon::prelude::*;
        use rstar::primitives::{GeomWithData, Rectangle};
        use rstar::{RTree, AABB};
        let b = decode_polygons(&bytes, &off).unwrap();
        let p = Polygons::new(&b.coords, &b.rings, &b.polys, &b.units).unwrap();
        let boxes: Vec<[f64; 4]> = (0..p.n()).map(|u| p.bbox(u).unwrap()).collect();
        let t = Instant::now();
        let tree = RTree::bulk_load(boxes.iter().enumerate().map(|(u, b)| GeomWithData::new(Rectangle::from_corners([b[0], b[1]], [b[2], b[3]]), u)).collect());
        let built = t.elapsed();
        let count: usize = (0..p.n()).into_par_iter().map(|i| {
            let b = boxes[i];
            tree.locate_in_envelope_intersecting(&AABB::from_corners([b[0], b[1]], [b[2], b[3]])).filter(|g| g.data > i).count()
        }).sum();
        println!("rstar build {built:?} queries {:?} candidate pairs {count}", t.elapsed() - built);
    }
    for _ in 0..2 {
        let t = Instant::now();
        let b = decode_polygons(&bytes, &off).unwrap();
        let decode = t.elapsed();
        let p = Polygons::new(&b.coords, &b.rings, &b.polys, &b.units).unwrap();
        let check = t.elapsed();
        for rule in [Rule::Queen, Rule::Rook] {
            let t = Instant::now();
            let c = contiguity(&p, rule, 0.0, Metric::Euclidean).unwrap();
            println!("decode {decode:?} check {check:?} {rule:?} {:?} links {}", t.elapsed(), c.graph.view().nnz());
        }
    }
}
