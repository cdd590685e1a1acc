//! Core-only timing of contiguity on polygons stored as WKB files:
//! `cargo run --release --example prof_contiguity -- units.wkb units.off`
//! (the .wkb file holds the bytes of all units, the .off file their i64
//! offsets in native byte order; `tests/benchmarks/bench_contiguity.py`
//! explains how to make them from shapely).
use std::time::Instant;
use vicino_core::contiguity::{contiguity, Rule};
use vicino_core::io::wkb::decode_polygons;
use vicino_core::neighbors::Metric;
use vicino_core::Guard;
fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let bytes = std::fs::read(&args[0]).expect("read wkb");
    let off: Vec<i64> = std::fs::read(&args[1])
        .expect("read offsets")
        .chunks_exact(8)
        .map(|c| i64::from_ne_bytes(c.try_into().unwrap()))
        .collect();
    for _ in 0..2 {
        let t = Instant::now();
        let b = decode_polygons(&bytes, &off).unwrap();
        let decode = t.elapsed();
        let p = b.polygons().unwrap();
        let check = t.elapsed();
        for rule in [Rule::Queen, Rule::Rook] {
            let t = Instant::now();
            let c = contiguity(&p, rule, 0.0, Metric::Euclidean, &Guard::unlimited()).unwrap();
            println!("decode {decode:?} check {check:?} {rule:?} {:?} links {}", t.elapsed(), c.graph.view().nnz());
        }
    }
}
