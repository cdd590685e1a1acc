//! Core-only timing of writing and reading weights files (Matrix Market,
//! triplet, ids) for k = 8 nearest-neighbour, row-standardized weights of
//! uniform random points: `cargo run --release --example prof_io [n]`, or
//! `... prof_io n FILE` to time reading one Matrix Market file.
use std::time::Instant;
use vicino_core::io::{ids, matrix_market, triplet};
use vicino_core::neighbors::{k_nearest, Metric};
use vicino_core::standardize::{standardize, Islands, Method};
use vicino_core::Guard;
fn main() {
    let n: usize = std::env::args().nth(1).map_or(1_000_000, |a| a.parse().expect("n"));
    let g = Guard::unlimited();
    if let Some(file) = std::env::args().nth(2) {
        // `prof_io n FILE`: only read FILE (Matrix Market), three times
        for _ in 0..3 {
            let t = Instant::now();
            let back = matrix_market::read(&file, &g).unwrap();
            println!("mtx read {:?} nnz {}", t.elapsed(), back.graph.view().nnz());
        }
        return;
    }
    let mut s = 1u64;
    let mut rnd = || {
        s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let xy: Vec<f64> = (0..2 * n).map(|_| rnd()).collect();
    let nb = k_nearest(&xy, 8, Metric::Euclidean, &g).unwrap();
    let d = standardize(nb.graph.view(), Method::Row, Islands::Raise, &g).unwrap();
    let w = nb.graph.view().with_data(d);
    let dir = std::env::temp_dir();
    let mtx = dir.join("prof_io.mtx");
    let mtx = mtx.to_str().unwrap();
    let tri = dir.join("prof_io.txt");
    let tri = tri.to_str().unwrap();
    let side = dir.join("prof_io.ids.csv");
    let side = side.to_str().unwrap();
    let t = Instant::now();
    matrix_market::write(mtx, w.view(), "{}", &g).unwrap();
    println!("mtx write {:?} ({} bytes)", t.elapsed(), std::fs::metadata(mtx).unwrap().len());
    let t = Instant::now();
    let back = matrix_market::read(mtx, &g).unwrap();
    println!("mtx read {:?} nnz {}", t.elapsed(), back.graph.view().nnz());
    let t = Instant::now();
    triplet::write(tri, w.view(), "{}", &g).unwrap();
    println!("triplet write {:?}", t.elapsed());
    let t = Instant::now();
    let back = triplet::read(tri, &g).unwrap();
    println!("triplet read {:?} nnz {}", t.elapsed(), back.graph.view().nnz());
    let v: Vec<i64> = (0..n as i64).collect();
    let t = Instant::now();
    ids::write_int(side, &v, &g).unwrap();
    println!("ids write {:?}", t.elapsed());
    let t = Instant::now();
    let _ = ids::read(side, &g).unwrap();
    println!("ids read {:?}", t.elapsed());
    if std::env::var("KEEP").is_ok() {
        return;
    }
    for p in [mtx, tri, side] {
        let _ = std::fs::remove_file(p);
    }
}
