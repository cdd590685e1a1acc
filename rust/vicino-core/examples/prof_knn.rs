//! Core-only timing of k nearest neighbours on uniform random points:
//! `cargo run --release --example prof_knn -- [n] [k]`.
use std::time::Instant;
use vicino_core::neighbors::{k_nearest, within_distance, Metric};
use vicino_core::Guard;
fn main() {
    let mut args = std::env::args().skip(1);
    let n: usize = args.next().map(|s| s.parse().unwrap()).unwrap_or(1_000_000);
    let k: usize = args.next().map(|s| s.parse().unwrap()).unwrap_or(8);
    let mut s = 12345u64;
    let mut rnd = || {
        s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let xy: Vec<f64> = (0..2 * n).map(|_| rnd()).collect();
    for _ in 0..3 {
        let t = Instant::now();
        let nb = k_nearest(&xy, k, Metric::Euclidean, &Guard::unlimited()).unwrap();
        let a = t.elapsed();
        let t = Instant::now();
        let r = within_distance(
            &xy,
            (k as f64 / (std::f64::consts::PI * n as f64)).sqrt(),
            Metric::Euclidean,
            &Guard::unlimited(),
        )
        .unwrap();
        println!(
            "k_nearest {:?} ({} links); within_distance {:?} ({} links)",
            a,
            nb.graph.view().nnz(),
            t.elapsed(),
            r.graph.view().nnz()
        );
    }
}
