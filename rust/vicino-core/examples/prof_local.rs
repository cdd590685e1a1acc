//! Core-only timing of local Moran's I with conditional permutations on
//! k = 8 nearest-neighbour weights of uniform random points, on one thread
//! and on all: `cargo run --release --example prof_local -- 100000 999`.
use std::time::Instant;
use vicino_core::neighbors::{k_nearest, Metric};
use vicino_core::stats::{local::local_moran, Alternative};
use vicino_core::Guard;
fn main() {
    let args: Vec<usize> = std::env::args().skip(1).map(|a| a.parse().expect("a number")).collect();
    let n = args.first().copied().unwrap_or(100_000);
    let r = args.get(1).copied().unwrap_or(999);
    let mut s = 1u64;
    let mut rnd = || {
        s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let xy: Vec<f64> = (0..2 * n).map(|_| rnd()).collect();
    let w = k_nearest(&xy, 8, Metric::Euclidean, &Guard::unlimited()).unwrap().graph;
    let x: Vec<f64> = (0..n).map(|i| xy[2 * i] + rnd()).collect();
    for threads in [1, rayon::current_num_threads()] {
        let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
        let t = Instant::now();
        let m = pool.install(|| local_moran(w.view(), &x, r, 1, Alternative::TwoSided, &Guard::unlimited()).unwrap());
        let dt = t.elapsed();
        let samples = (n * 8 * r) as f64;
        let mean_p = m.permutation.unwrap().p_value.iter().sum::<f64>() / n as f64;
        println!(
            "{threads} thread(s): {dt:?}, {:.2} ns per sampled neighbour, mean p {mean_p:.3}",
            dt.as_secs_f64() * 1e9 / samples
        );
    }
}
