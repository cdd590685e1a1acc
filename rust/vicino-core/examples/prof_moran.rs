//! Core-only timing of the pieces of a Moran permutation test on k = 8
//! nearest-neighbour weights of uniform random points:
//! `cargo run --release --example prof_moran -- 1000000` (units, default 10^5).
use std::time::Instant;
use vicino_core::neighbors::{k_nearest, Metric};
use vicino_core::standardize::{standardize, Islands, Method};
use vicino_core::stats::global::moran;
use vicino_core::stats::moments::{sums, weight_sums};
use vicino_core::stats::permutation::{shuffle, shuffle_into, stream};
use vicino_core::stats::Alternative;
use vicino_core::Guard;
fn main() {
    let n: usize = std::env::args().nth(1).map_or(100_000, |a| a.parse().expect("a number of units"));
    let mut s = 1u64;
    let mut rnd = || {
        s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let xy: Vec<f64> = (0..2 * n).map(|_| rnd()).collect();
    let nb = k_nearest(&xy, 8, Metric::Euclidean, &Guard::unlimited()).unwrap();
    let d = standardize(nb.graph.view(), Method::Row, Islands::Raise, &Guard::unlimited()).unwrap();
    let w = nb.graph.view().with_data(d);
    let z: Vec<f64> = (0..n).map(|_| rnd() - 0.5).collect();
    let t = Instant::now();
    let tr = w.view().transpose();
    println!("transpose {:?} nnz {}", t.elapsed(), tr.data().len());
    let t = Instant::now();
    let pt = w.view().plus_transpose();
    println!("plus_transpose {:?} nnz {}", t.elapsed(), pt.data().len());
    let t = Instant::now();
    let _ = sums(w.view());
    println!("sums {:?}", t.elapsed());
    let t = Instant::now();
    let _ = moran(w.view(), &z, 0, 1, Alternative::TwoSided, &Guard::unlimited()).unwrap();
    println!("moran without permutations {:?}", t.elapsed());
    let t = Instant::now();
    let (_, q) = weight_sums(w.view());
    println!("weight_sums {:?}", t.elapsed());
    let y = q.local(&z);
    let mut buf = y.clone();
    let t = Instant::now();
    for r in 0..200 {
        buf.copy_from_slice(&y);
        shuffle(&mut stream(1, r), &mut buf);
    }
    println!("shuffle per draw {:?}", t.elapsed() / 200);
    let t = Instant::now();
    for r in 0..200 {
        shuffle_into(&mut stream(1, r), &y, &mut buf);
    }
    println!("blocked shuffle per draw {:?}", t.elapsed() / 200);
    let t = Instant::now();
    let mut acc = 0.0;
    for _ in 0..200 {
        acc += q.eval_local(&buf);
    }
    println!("eval per draw {:?} {}", t.elapsed() / 200, acc);
    let t = Instant::now();
    let mut acc = 0.0;
    for _ in 0..100 {
        let (a, b) = q.eval_local_pair(&buf, &y);
        acc += a + b;
    }
    println!("pair per draw {:?} {}", t.elapsed() / 200, acc);
    let zz = buf.clone();
    let t = Instant::now();
    let mut acc = 0.0;
    for _ in 0..200 {
        acc += q.eval(&zz);
    }
    println!("eval+local per draw {:?} {}", t.elapsed() / 200, acc);
}
