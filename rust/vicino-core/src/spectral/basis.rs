//! Vector kernels of the Krylov methods: an orthonormal basis stored as one
//! vector per column, classical Gram-Schmidt applied twice ("twice is
//! enough": Giraud, Langou and Rozloznik 2005), and products of the basis
//! with small matrices. Work is split into blocks of rows of a fixed size
//! and partial sums are added in block order, so results do not depend on
//! the number of threads. O(n m) per orthogonalization against m vectors.

use rayon::prelude::*;

/// Rows per block; blocks run in parallel above `PARALLEL` rows.
const BLOCK: usize = 4096;
const PARALLEL: usize = 32_768;

/// A deterministic start vector with entries spread over [-1, 1) (splitmix64
/// of the position): generic, so not orthogonal to any eigenvector in
/// practice.
pub fn start_vector(n: usize) -> Vec<f64> {
    let mut v: Vec<f64> = (0..n as u64)
        .map(|i| {
            let mut z = i.wrapping_add(0x9E37_79B9_7F4A_7C15).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^= z >> 31;
            (z >> 11) as f64 / (1u64 << 52) as f64 - 1.0
        })
        .collect();
    let s = norm(&v);
    v.iter_mut().for_each(|x| *x /= s);
    v
}

/// A dot product with eight running sums (so the compiler can vectorize it).
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let mut acc = [0.0; 8];
    let (ca, cb) = (a.chunks_exact(8), b.chunks_exact(8));
    let tail: f64 = ca.remainder().iter().zip(cb.remainder()).map(|(x, y)| x * y).sum();
    for (x, y) in ca.zip(cb) {
        for k in 0..8 {
            acc[k] += x[k] * y[k];
        }
    }
    acc.iter().sum::<f64>() + tail
}

fn blocks(n: usize) -> usize {
    n.div_ceil(BLOCK)
}

/// The dot products of `w` with each of `vs`, added block by block in order.
pub fn dots(vs: &[Vec<f64>], w: &[f64]) -> Vec<f64> {
    let n = w.len();
    let partial = |b: usize| -> Vec<f64> {
        let r = b * BLOCK..((b + 1) * BLOCK).min(n);
        vs.iter().map(|v| dot(&v[r.clone()], &w[r.clone()])).collect()
    };
    let parts: Vec<Vec<f64>> = if n >= PARALLEL {
        (0..blocks(n)).into_par_iter().map(partial).collect()
    } else {
        (0..blocks(n)).map(partial).collect()
    };
    let mut out = vec![0.0; vs.len()];
    for p in parts {
        out.iter_mut().zip(p).for_each(|(o, x)| *o += x);
    }
    out
}

/// The Euclidean norm, added block by block in order.
pub fn norm(w: &[f64]) -> f64 {
    w.chunks(BLOCK).map(|c| dot(c, c)).sum::<f64>().sqrt()
}

/// w <- w - sum_i c_i vs_i.
pub fn subtract(vs: &[Vec<f64>], c: &[f64], w: &mut [f64]) {
    let apply = |(b, chunk): (usize, &mut [f64])| {
        let at = b * BLOCK;
        for (v, &ci) in vs.iter().zip(c) {
            for (x, y) in chunk.iter_mut().zip(&v[at..]) {
                *x -= ci * y;
            }
        }
    };
    if w.len() >= PARALLEL {
        w.par_chunks_mut(BLOCK).enumerate().for_each(apply);
    } else {
        w.chunks_mut(BLOCK).enumerate().for_each(apply);
    }
}

/// Orthogonalize `w` against `vs` (classical Gram-Schmidt, twice); returns
/// the coefficients, so that w_before = sum_i h_i vs_i + w_after.
pub fn orthogonalize(vs: &[Vec<f64>], w: &mut [f64]) -> Vec<f64> {
    let mut h = dots(vs, w);
    subtract(vs, &h, w);
    let c = dots(vs, w);
    subtract(vs, &c, w);
    h.iter_mut().zip(c).for_each(|(a, b)| *a += b);
    h
}

/// The columns `cols` of V S, where S is the `m` x `width` row-major matrix
/// `s` and V the first `m` vectors of `vs`.
pub fn combine(vs: &[Vec<f64>], s: &[f64], width: usize, cols: &[usize]) -> Vec<Vec<f64>> {
    let n = vs[0].len();
    let m = s.len() / width;
    let part = |b: usize| -> Vec<f64> {
        let r = b * BLOCK..((b + 1) * BLOCK).min(n);
        let len = r.len();
        let mut out = vec![0.0; len * cols.len()];
        for (c, &col) in cols.iter().enumerate() {
            let o = &mut out[c * len..(c + 1) * len];
            for (i, v) in vs.iter().take(m).enumerate() {
                let coef = s[i * width + col];
                if coef != 0.0 {
                    o.iter_mut().zip(&v[r.clone()]).for_each(|(x, y)| *x += coef * y);
                }
            }
        }
        out
    };
    let parts: Vec<Vec<f64>> = if n >= PARALLEL {
        (0..blocks(n)).into_par_iter().map(part).collect()
    } else {
        (0..blocks(n)).map(part).collect()
    };
    let mut out = vec![Vec::with_capacity(n); cols.len()];
    for p in parts {
        let len = p.len() / cols.len().max(1);
        for (c, o) in out.iter_mut().enumerate() {
            o.extend_from_slice(&p[c * len..(c + 1) * len]);
        }
    }
    out
}

/// One three-term Lanczos update in place, w <- w - alpha q - beta p, and
/// the norm of the result; the squares are added block by block in order.
pub fn three_term(w: &mut [f64], q: &[f64], p: &[f64], alpha: f64, beta: f64) -> f64 {
    let apply = |(b, chunk): (usize, &mut [f64])| -> f64 {
        let at = b * BLOCK;
        let (qb, pb) = (&q[at..at + chunk.len()], &p[at..at + chunk.len()]);
        for ((x, &y), &z) in chunk.iter_mut().zip(qb).zip(pb) {
            *x -= alpha * y + beta * z;
        }
        dot(chunk, chunk)
    };
    let parts: Vec<f64> = if w.len() >= PARALLEL {
        w.par_chunks_mut(BLOCK).enumerate().map(apply).collect()
    } else {
        w.chunks_mut(BLOCK).enumerate().map(apply).collect()
    };
    parts.iter().sum::<f64>().sqrt()
}

/// y <- y + c x.
pub fn axpy(y: &mut [f64], c: f64, x: &[f64]) {
    let apply = |(b, chunk): (usize, &mut [f64])| {
        let at = b * BLOCK;
        chunk.iter_mut().zip(&x[at..]).for_each(|(u, &v)| *u += c * v);
    };
    if y.len() >= PARALLEL {
        y.par_chunks_mut(BLOCK).enumerate().for_each(apply);
    } else {
        y.chunks_mut(BLOCK).enumerate().for_each(apply);
    }
}
