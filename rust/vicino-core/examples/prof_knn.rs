//! Core-only timing of k nearest neighbours and the distance band (about k
//! neighbours) on uniform random points, in the order drawn and sorted in
//! strips (a spatially sorted input):
//! `cargo run --release --example prof_knn -- [n] [k] [runs]`.
use std::time::{Duration, Instant};
use vicino_core::neighbors::{k_nearest, within_distance, Metric};
use vicino_core::Guard;

fn best(runs: usize, mut f: impl FnMut() -> usize) -> (Duration, usize) {
    let mut out = (Duration::MAX, 0);
    for _ in 0..runs {
        let t = Instant::now();
        let links = f();
        out = (out.0.min(t.elapsed()), links);
    }
    out
}

fn main() {
    let mut args = std::env::args().skip(1);
    let n: usize = args.next().map(|s| s.parse().unwrap()).unwrap_or(1_000_000);
    let k: usize = args.next().map(|s| s.parse().unwrap()).unwrap_or(8);
    let runs: usize = args.next().map(|s| s.parse().unwrap()).unwrap_or(3);
    let mut s = 12345u64;
    let mut rnd = || {
        s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let drawn: Vec<f64> = (0..2 * n).map(|_| rnd()).collect();
    // strips of about 4 points' height, each by x: nearby points nearby in memory
    let strips = ((n as f64).sqrt() / 4.0).max(1.0);
    let mut idx: Vec<usize> = (0..n).collect();
    idx.sort_by(|&a, &b| {
        let key = |i: usize| ((drawn[2 * i + 1] * strips) as u64, drawn[2 * i]);
        let (ka, kb) = (key(a), key(b));
        ka.0.cmp(&kb.0).then(ka.1.total_cmp(&kb.1))
    });
    let sorted: Vec<f64> = idx.iter().flat_map(|&i| [drawn[2 * i], drawn[2 * i + 1]]).collect();
    let radius = (k as f64 / (std::f64::consts::PI * n as f64)).sqrt();
    for (name, xy) in [("drawn", &drawn), ("sorted", &sorted)] {
        let g = Guard::unlimited();
        let (a, la) = best(runs, || k_nearest(xy, k, Metric::Euclidean, &g).unwrap().graph.view().nnz());
        let (b, lb) = best(runs, || within_distance(xy, radius, Metric::Euclidean, &g).unwrap().graph.view().nnz());
        println!("{name:>6}: k_nearest {a:?} ({la} links); within_distance {b:?} ({lb} links)");
    }
}
