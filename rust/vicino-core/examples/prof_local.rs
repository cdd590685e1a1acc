//! Core-only timing of local Moran's I with conditional permutations on
//! k = 8 nearest-neighbour weights of uniform random points, on one thread
//! and on all, with wall and CPU time: `cargo run --release --example prof_local -- 100000 999`.
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
        let (t, c) = (Instant::now(), cpu_seconds());
        let m = pool.install(|| local_moran(w.view(), &x, r, 1, Alternative::TwoSided, &Guard::unlimited()).unwrap());
        let dt = t.elapsed();
        let cpu = cpu_seconds() - c;
        let samples = (n * 8 * r) as f64;
        let mean_p = m.permutation.unwrap().p_value.iter().sum::<f64>() / n as f64;
        println!(
            "{threads} thread(s): {dt:?} wall, {cpu:.2} s cpu, {:.2} ns cpu per sampled neighbour, mean p {mean_p:.3}",
            cpu * 1e9 / samples
        );
    }
}

/// User + system time of this process so far (from /proc/self/stat, Linux; 0 elsewhere):
/// on a shared machine the CPU time of a run is steadier than its wall time.
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    // the fields after the command name (which is in parentheses); utime and stime are 14 and 15
    let rest = stat.rsplit_once(')').map_or("", |(_, r)| r);
    let f: Vec<&str> = rest.split_whitespace().collect();
    let ticks = |k: usize| f.get(k).and_then(|x| x.parse::<f64>().ok()).unwrap_or(0.0);
    // field 3 (the state) comes first; clock ticks of 1/100 s (the Linux default USER_HZ)
    (ticks(11) + ticks(12)) / 100.0
}
