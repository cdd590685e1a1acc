//! Core-only timing of the spectral radius of distance-band weights (about
//! 8 neighbours per unit): `cargo run --release --example prof_spectral -- [n]`.
use std::time::Instant;
use vicino_core::neighbors::{within_distance, Metric};
use vicino_core::spectral::spectral_radius;
use vicino_core::Guard;
fn main() {
    let n: usize = std::env::args().nth(1).map(|s| s.parse().unwrap()).unwrap_or(10_000);
    let mut s = 12345u64;
    let mut rnd = || {
        s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let xy: Vec<f64> = (0..2 * n).map(|_| rnd()).collect();
    let nb =
        within_distance(&xy, (8.0 / (std::f64::consts::PI * n as f64)).sqrt(), Metric::Euclidean, &Guard::unlimited())
            .unwrap();
    let w = nb.graph.view().with_data(vec![1.0; nb.graph.view().nnz()]);
    let t = Instant::now();
    let r = spectral_radius(w.view(), &Guard::unlimited());
    println!("{:?} in {:?}", r, t.elapsed());
}
