//! Dense eigenvalue routines for small matrices (row-major, n x n): the
//! exact route for small weights matrices and the projected problems of the
//! Krylov methods.
//!
//! * [`hessenberg`]: Householder reduction to upper Hessenberg form,
//!   10/3 n^3 flops (Golub and Van Loan 2013, Algorithm 7.4.2). A symmetric
//!   matrix comes out tridiagonal.
//! * [`hessenberg_eigenvalues`]: Francis double-shift QR iteration on the
//!   Hessenberg matrix, with deflation on negligible subdiagonals and
//!   exceptional shifts after 10 and 20 steps without deflation (Golub and
//!   Van Loan 2013, Algorithm 7.5.2), about 10 n^3 flops; eigenvalues only.
//! * [`tridiagonal_extreme`]: the smallest or largest eigenvalue of a
//!   symmetric tridiagonal matrix by bisection on Sturm counts, to full
//!   precision, O(n) per step.
//! * [`jacobi`]: all eigenvalues and vectors of a small symmetric matrix by
//!   cyclic Jacobi rotations (Golub and Van Loan 2013, Algorithm 8.5.3),
//!   accurate to a few units of rounding of the matrix norm.

/// Householder reduction of `a` (n x n, row-major) to upper Hessenberg form
/// in place (a similarity: the eigenvalues are unchanged).
pub fn hessenberg(a: &mut [f64], n: usize) {
    let mut v = vec![0.0; n];
    for k in 0..n.saturating_sub(2) {
        let alpha: f64 = (k + 1..n).map(|i| a[i * n + k] * a[i * n + k]).sum::<f64>().sqrt();
        if alpha == 0.0 {
            continue;
        }
        let x0 = a[(k + 1) * n + k];
        let s = if x0 >= 0.0 { -alpha } else { alpha };
        // v = x - s e1, stored in v[k+1..n]
        for i in k + 1..n {
            v[i] = a[i * n + k];
        }
        v[k + 1] -= s;
        let vv: f64 = v[k + 1..n].iter().map(|x| x * x).sum();
        if vv == 0.0 {
            continue;
        }
        // A <- (I - 2 v v^T / vv) A
        let mut d = vec![0.0; n];
        for i in k + 1..n {
            for (dj, &aij) in d.iter_mut().zip(&a[i * n..(i + 1) * n]) {
                *dj += v[i] * aij;
            }
        }
        for i in k + 1..n {
            let f = 2.0 * v[i] / vv;
            for (aij, &dj) in a[i * n..(i + 1) * n].iter_mut().zip(&d) {
                *aij -= f * dj;
            }
        }
        // A <- A (I - 2 v v^T / vv)
        for i in 0..n {
            let row = &mut a[i * n..(i + 1) * n];
            let d: f64 = (k + 1..n).map(|j| row[j] * v[j]).sum::<f64>() * 2.0 / vv;
            for j in k + 1..n {
                row[j] -= d * v[j];
            }
        }
        for i in k + 2..n {
            a[i * n + k] = 0.0;
        }
    }
}

/// Balance `a` in place by a diagonal similarity with powers of two (exact;
/// Parlett and Reinsch 1969), so that each row and column have comparable
/// norms: weights far apart in magnitude otherwise let the QR iteration
/// take a small but significant subdiagonal for rounding.
pub fn balance(a: &mut [f64], n: usize) {
    for _ in 0..200 {
        let mut done = true;
        for i in 0..n {
            let c: f64 = (0..n).filter(|&j| j != i).map(|j| a[j * n + i].abs()).sum();
            let r: f64 = (0..n).filter(|&j| j != i).map(|j| a[i * n + j].abs()).sum();
            if c == 0.0 || r == 0.0 {
                continue;
            }
            let (mut f, mut cc, s) = (1.0f64, c, c + r);
            while cc < r / 2.0 && f < 1e150 {
                f *= 2.0;
                cc *= 4.0;
            }
            while cc > r * 2.0 && f > 1e-150 {
                f /= 2.0;
                cc /= 4.0;
            }
            if (cc + r) / f < 0.95 * s {
                done = false;
                for j in 0..n {
                    a[i * n + j] /= f;
                    a[j * n + i] *= f;
                }
            }
        }
        if done {
            break;
        }
    }
}

fn sign(a: f64, b: f64) -> f64 {
    if b >= 0.0 {
        a.abs()
    } else {
        -a.abs()
    }
}

/// The eigenvalues (real part, imaginary part) of the upper Hessenberg
/// matrix `h` (n x n, row-major; overwritten). `None` when an eigenvalue
/// takes more than 60 steps (not seen in practice).
pub fn hessenberg_eigenvalues(h: &mut [f64], n: usize) -> Option<Vec<(f64, f64)>> {
    let at = |i: usize, j: usize| i * n + j;
    let mut out = Vec::with_capacity(n);
    let norm: f64 =
        (0..n).flat_map(|i| (i.saturating_sub(1)..n).map(move |j| (i, j))).map(|(i, j)| h[at(i, j)].abs()).sum();
    let mut nn = n as isize - 1;
    let mut t = 0.0;
    while nn >= 0 {
        let mut its = 0;
        loop {
            let nu = nn as usize;
            // look for a negligible subdiagonal element
            let mut l = nu;
            while l >= 1 {
                let s = h[at(l - 1, l - 1)].abs() + h[at(l, l)].abs();
                let s = if s == 0.0 { norm } else { s };
                if h[at(l, l - 1)].abs() <= f64::EPSILON * s {
                    h[at(l, l - 1)] = 0.0;
                    break;
                }
                l -= 1;
            }
            let x = h[at(nu, nu)];
            if l == nu {
                out.push((x + t, 0.0));
                nn -= 1;
                break;
            }
            let y = h[at(nu - 1, nu - 1)];
            let w = h[at(nu, nu - 1)] * h[at(nu - 1, nu)];
            if l + 1 == nu {
                // a 2 x 2 block: a real pair or a complex pair
                let p = 0.5 * (y - x);
                let q = p * p + w;
                let z = q.abs().sqrt();
                let x = x + t;
                if q >= 0.0 {
                    let z = p + sign(z, p);
                    let a = x + z;
                    let b = if z != 0.0 { x - w / z } else { a };
                    out.push((a, 0.0));
                    out.push((b, 0.0));
                } else {
                    out.push((x + p, z));
                    out.push((x + p, -z));
                }
                nn -= 2;
                break;
            }
            if its == 60 {
                return None;
            }
            let (mut x, mut y, mut w) = (x, y, w);
            if its == 10 || its == 20 {
                // exceptional shift
                t += x;
                for i in 0..=nu {
                    h[at(i, i)] -= x;
                }
                let s = h[at(nu, nu - 1)].abs() + h[at(nu - 1, nu - 2)].abs();
                x = 0.75 * s;
                y = x;
                w = -0.4375 * s * s;
            }
            its += 1;
            // the start of the double-shift sweep: two consecutive small subdiagonals
            let mut m = nu - 2;
            let (mut p, mut q, mut r);
            loop {
                let z = h[at(m, m)];
                let rr = x - z;
                let ss = y - z;
                p = (rr * ss - w) / h[at(m + 1, m)] + h[at(m, m + 1)];
                q = h[at(m + 1, m + 1)] - z - rr - ss;
                r = h[at(m + 2, m + 1)];
                let s = p.abs() + q.abs() + r.abs();
                p /= s;
                q /= s;
                r /= s;
                if m == l {
                    break;
                }
                let u = h[at(m, m - 1)].abs() * (q.abs() + r.abs());
                let v = p.abs() * (h[at(m - 1, m - 1)].abs() + z.abs() + h[at(m + 1, m + 1)].abs());
                if u <= f64::EPSILON * v {
                    break;
                }
                m -= 1;
            }
            for i in m + 2..=nu {
                h[at(i, i - 2)] = 0.0;
                if i != m + 2 {
                    h[at(i, i - 3)] = 0.0;
                }
            }
            // chase the bulge with 3 x 3 Householder reflections
            let mut k = m;
            while k < nu {
                if k != m {
                    p = h[at(k, k - 1)];
                    q = h[at(k + 1, k - 1)];
                    r = if k + 1 != nu { h[at(k + 2, k - 1)] } else { 0.0 };
                    x = p.abs() + q.abs() + r.abs();
                    if x != 0.0 {
                        p /= x;
                        q /= x;
                        r /= x;
                    }
                }
                let s = sign((p * p + q * q + r * r).sqrt(), p);
                if s != 0.0 {
                    if k == m {
                        if l != m {
                            h[at(k, k - 1)] = -h[at(k, k - 1)];
                        }
                    } else {
                        h[at(k, k - 1)] = -s * x;
                    }
                    p += s;
                    x = p / s;
                    y = q / s;
                    let z = r / s;
                    q /= p;
                    r /= p;
                    for j in k..=nu {
                        let mut pp = h[at(k, j)] + q * h[at(k + 1, j)];
                        if k + 1 != nu {
                            pp += r * h[at(k + 2, j)];
                            h[at(k + 2, j)] -= pp * z;
                        }
                        h[at(k + 1, j)] -= pp * y;
                        h[at(k, j)] -= pp * x;
                    }
                    let top = nu.min(k + 3);
                    for i in l..=top {
                        let mut pp = x * h[at(i, k)] + y * h[at(i, k + 1)];
                        if k + 1 != nu {
                            pp += z * h[at(i, k + 2)];
                            h[at(i, k + 2)] -= pp * r;
                        }
                        h[at(i, k + 1)] -= pp * q;
                        h[at(i, k)] -= pp;
                    }
                }
                k += 1;
            }
        }
    }
    Some(out)
}

/// The smallest (`largest = false`) or largest eigenvalue of the symmetric
/// tridiagonal matrix with diagonal `a` and off-diagonal `b`.
pub fn tridiagonal_extreme(a: &[f64], b: &[f64], largest: bool) -> f64 {
    if largest {
        largest_tridiagonal(a, b)
    } else {
        let neg: Vec<f64> = a.iter().map(|x| -x).collect();
        -largest_tridiagonal(&neg, b)
    }
}

/// The largest eigenvalue of a symmetric tridiagonal matrix with diagonal
/// `a` and off-diagonal `b`, by bisection on Sturm sequence counts.
pub fn largest_tridiagonal(a: &[f64], b: &[f64]) -> f64 {
    let m = a.len();
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for i in 0..m {
        let r = if i > 0 { b[i - 1].abs() } else { 0.0 } + if i + 1 < m { b[i].abs() } else { 0.0 };
        lo = lo.min(a[i] - r);
        hi = hi.max(a[i] + r);
    }
    // number of eigenvalues below x
    let below = |x: f64| {
        let mut count = 0;
        let mut q = 1.0;
        for i in 0..m {
            q = a[i] - x - if i > 0 { b[i - 1] * b[i - 1] / q } else { 0.0 };
            if q == 0.0 {
                q = f64::EPSILON * (x.abs() + 1.0);
            }
            if q < 0.0 {
                count += 1;
            }
        }
        count
    };
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if below(mid) == m {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    hi
}

/// Eigenvalues and eigenvectors of the symmetric `a` (m x m, row-major;
/// overwritten): returns (values, vectors) with vector i in column i of the
/// row-major m x m `vectors`.
pub fn jacobi(a: &mut [f64], m: usize) -> (Vec<f64>, Vec<f64>) {
    let at = |i: usize, j: usize| i * m + j;
    let mut v = vec![0.0; m * m];
    for i in 0..m {
        v[at(i, i)] = 1.0;
    }
    let total: f64 = a.iter().map(|x| x * x).sum::<f64>().sqrt();
    for _sweep in 0..100 {
        let off: f64 = (0..m)
            .flat_map(|i| (0..m).filter(move |&j| j != i).map(move |j| (i, j)))
            .map(|(i, j)| a[at(i, j)] * a[at(i, j)])
            .sum::<f64>()
            .sqrt();
        if off <= f64::EPSILON * total || off == 0.0 {
            break;
        }
        for p in 0..m {
            for q in p + 1..m {
                let apq = a[at(p, q)];
                if apq == 0.0 {
                    continue;
                }
                let theta = (a[at(q, q)] - a[at(p, p)]) / (2.0 * apq);
                let t = sign(1.0, theta) / (theta.abs() + (theta * theta + 1.0).sqrt());
                let c = 1.0 / (t * t + 1.0).sqrt();
                let s = t * c;
                for k in 0..m {
                    let (akp, akq) = (a[at(k, p)], a[at(k, q)]);
                    a[at(k, p)] = c * akp - s * akq;
                    a[at(k, q)] = s * akp + c * akq;
                }
                for k in 0..m {
                    let (apk, aqk) = (a[at(p, k)], a[at(q, k)]);
                    a[at(p, k)] = c * apk - s * aqk;
                    a[at(q, k)] = s * apk + c * aqk;
                }
                for k in 0..m {
                    let (vkp, vkq) = (v[at(k, p)], v[at(k, q)]);
                    v[at(k, p)] = c * vkp - s * vkq;
                    v[at(k, q)] = s * vkp + c * vkq;
                }
            }
        }
    }
    ((0..m).map(|i| a[at(i, i)]).collect(), v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn directed_cycle_eigenvalues_lie_on_the_unit_circle() {
        // from memory: the cyclic permutation matrix of order n has the n-th roots of unity
        let n = 7;
        let mut a = vec![0.0; n * n];
        for i in 0..n {
            a[i * n + (i + 1) % n] = 1.0;
        }
        hessenberg(&mut a, n);
        let ev = hessenberg_eigenvalues(&mut a, n).unwrap();
        assert_eq!(ev.len(), n);
        for (re, im) in ev {
            assert!(((re * re + im * im).sqrt() - 1.0).abs() < 1e-12);
        }
    }

    #[test]
    fn jacobi_of_a_path() {
        // from memory: the path on m vertices has eigenvalues 2 cos(pi k / (m + 1))
        let m = 6;
        let mut a = vec![0.0; m * m];
        for i in 0..m - 1 {
            a[i * m + i + 1] = 1.0;
            a[(i + 1) * m + i] = 1.0;
        }
        let (mut vals, _) = jacobi(&mut a, m);
        vals.sort_by(f64::total_cmp);
        for (k, v) in vals.iter().rev().enumerate() {
            let want = 2.0 * (std::f64::consts::PI * (k + 1) as f64 / (m + 1) as f64).cos();
            assert!((v - want).abs() < 1e-13);
        }
    }
}
