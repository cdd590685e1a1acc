//! Core-only timing of the spatial lag on row-standardized k = 8 nearest
//! neighbours of uniform random points (in the order drawn), general CSR
//! against the packed form: `cargo run --release --example prof_lag -- 1000000 1`
//! (units, columns).
use std::time::Instant;
use vicino_core::lag::{lag, Packed};
use vicino_core::neighbors::{k_nearest, Metric};
use vicino_core::standardize::{standardize, Islands, Method};
use vicino_core::Guard;

fn best(reps: usize, mut f: impl FnMut()) -> f64 {
    (0..reps)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn main() {
    let args: Vec<usize> = std::env::args().skip(1).map(|a| a.parse().expect("a number")).collect();
    let (n, m) = (args.first().copied().unwrap_or(1_000_000), args.get(1).copied().unwrap_or(1));
    let mut s = 1u64;
    let mut rnd = || {
        s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let xy: Vec<f64> = (0..2 * n).map(|_| rnd()).collect();
    let nb = k_nearest(&xy, 8, Metric::Euclidean, &Guard::unlimited()).unwrap();
    let binary = nb.graph.view().with_data(vec![1.0; nb.graph.view().nnz()]);
    let d = standardize(binary.view(), Method::Row, Islands::Raise, &Guard::unlimited()).unwrap();
    let w = binary.view().with_data(d);
    let x: Vec<f64> = (0..n * m).map(|_| rnd()).collect();
    let t = Instant::now();
    let p = Packed::new(w.view()).unwrap();
    println!("pack {:.4} s, {} MB", t.elapsed().as_secs_f64(), p.bytes() >> 20);
    let a = lag(w.view(), &x, m).unwrap();
    let b = p.lag(&x, m).unwrap();
    assert!(a.iter().zip(&b).all(|(u, v)| u.to_bits() == v.to_bits()));
    let (mut g, mut a1) = (f64::INFINITY, f64::INFINITY);
    for _ in 0..15 {
        g = g.min(best(1, || drop(lag(w.view(), &x, m).unwrap())));
        a1 = a1.min(best(1, || drop(p.lag(&x, m).unwrap())));
    }
    println!("general {g:.4} s, packed {a1:.4} s");
}
