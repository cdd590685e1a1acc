//! Core-only timing of the eigenvalue bounds: `cargo run --release --example
//! prof_eigen -- [side] [kind]` with kind one of rook, rook-row, queen-row,
//! knn-row, cycle (n = side^2 units).
use std::time::Instant;
use vicino_core::neighbors::{k_nearest, Metric};
use vicino_core::spectral::eigenvalue_bounds;
use vicino_core::{Csr, Guard};

fn lattice(side: usize, queen: bool, row: bool) -> Csr {
    let rows = (0..side * side)
        .map(|u| {
            let (i, j) = ((u / side) as i64, (u % side) as i64);
            let mut r = Vec::new();
            for di in -1i64..=1 {
                for dj in -1i64..=1 {
                    let (a, b) = (i + di, j + dj);
                    let rook = di.abs() + dj.abs() == 1;
                    if (rook || (queen && (di, dj) != (0, 0))) && a >= 0 && b >= 0 && a < side as i64 && b < side as i64
                    {
                        r.push(((a as usize) * side + b as usize, 1.0));
                    }
                }
            }
            let c = if row { 1.0 / r.len() as f64 } else { 1.0 };
            r.iter_mut().for_each(|e| e.1 *= c);
            r
        })
        .collect();
    Csr::from_rows(rows)
}

fn main() {
    let side: usize = std::env::args().nth(1).map(|s| s.parse().unwrap()).unwrap_or(100);
    let kind = std::env::args().nth(2).unwrap_or_else(|| "rook".into());
    let n = side * side;
    let w = match kind.as_str() {
        "rook" => lattice(side, false, false),
        "rook-row" => lattice(side, false, true),
        "queen-row" => lattice(side, true, true),
        "knn-row" => {
            let mut s = 12345u64;
            let mut rnd = || {
                s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                (s >> 11) as f64 / (1u64 << 53) as f64
            };
            let xy: Vec<f64> = (0..2 * n).map(|_| rnd()).collect();
            let nb = k_nearest(&xy, 8, Metric::Euclidean, &Guard::unlimited()).unwrap();
            let g = nb.graph;
            g.view().with_data(vec![0.125; g.view().nnz()])
        }
        _ => Csr::from_rows((0..n).map(|i| vec![((i + 1) % n, 1.0 + (i % 3) as f64)]).collect()),
    };
    let t = Instant::now();
    let r = eigenvalue_bounds(w.view(), 1e-8, &Guard::unlimited());
    println!("{kind} n={n}: {r:?} in {:?}", t.elapsed());
}
