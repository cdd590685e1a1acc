// Dense oracles index their matrices by (i, j), as the formulas do.
#![allow(clippy::needless_range_loop)]
//! Neighbour search against brute force: k nearest and within a distance,
//! Euclidean and great circle, with ties (integer grids, duplicated points)
//! and the error cases.

use vicino_core::error::{Error, Unit};
use vicino_core::neighbors::{k_nearest, within_distance, Metric, Neighbors, EARTH_RADIUS_KM};
use vicino_core::Guard;

// ---------------------------------------------------------------------------
// helpers

/// SplitMix64 (Steele, Lea and Flood 2014): a tiny deterministic generator.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.unit()
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next_u64() % n as u64) as usize
    }
}

fn euclid(a: [f64; 2], b: [f64; 2]) -> f64 {
    // common practice: straight-line distance
    let (dx, dy) = (a[0] - b[0], a[1] - b[1]);
    (dx * dx + dy * dy).sqrt()
}

/// Haversine formula on the IUGG mean sphere, R1 = 6371.0088 km. Written out
/// here on purpose, formula for formula like the core's: exact ties on
/// lattices are defined by the rounding of this very formula. (The Python
/// reference tests check the distances against other formulas.)
fn haversine(a: [f64; 2], b: [f64; 2]) -> f64 {
    const R1: f64 = 6371.0088; // IUGG mean Earth radius (Moritz 2000)
    let (lon1, lat1) = (a[0].to_radians(), a[1].to_radians());
    let (lon2, lat2) = (b[0].to_radians(), b[1].to_radians());
    let s_lat = ((lat2 - lat1) * 0.5).sin();
    let s_lon = ((lon2 - lon1) * 0.5).sin();
    let h = s_lat * s_lat + lat1.cos() * lat2.cos() * s_lon * s_lon;
    2.0 * R1 * h.sqrt().min(1.0).asin()
}

fn dist_fn(metric: Metric) -> fn([f64; 2], [f64; 2]) -> f64 {
    match metric {
        Metric::Euclidean => euclid,
        Metric::GreatCircle => haversine,
    }
}

/// One spelling per place on the sphere, as documented for `k_nearest`:
/// longitudes in [180, 360] are the same meridians as [-180, 0], and every
/// longitude at a pole is the same place (common practice).
fn canonical(xy: &[f64], metric: Metric) -> Vec<f64> {
    let mut out = xy.to_vec();
    if metric == Metric::GreatCircle {
        for p in out.chunks_exact_mut(2) {
            if p[1].abs() == 90.0 {
                p[0] = 0.0;
            } else if p[0] >= 180.0 {
                p[0] -= 360.0;
            }
        }
    }
    out
}

fn pt(xy: &[f64], i: usize) -> [f64; 2] {
    [xy[2 * i], xy[2 * i + 1]]
}

/// Rows of the result as (column, distance), in stored order.
fn rows(nb: &Neighbors) -> Vec<Vec<(usize, f64)>> {
    let g = nb.graph.view();
    (0..g.n())
        .map(|i| {
            let (c, v) = g.row(i);
            c.iter().zip(v).map(|(&j, &d)| (j as usize, d)).collect()
        })
        .collect()
}

/// oracle: brute force. The first k of all other units by (distance,
/// position), returned sorted by column.
fn brute_knn(xy: &[f64], k: usize, metric: Metric) -> Vec<Vec<(usize, f64)>> {
    let xy = &canonical(xy, metric)[..];
    let n = xy.len() / 2;
    let d = dist_fn(metric);
    (0..n)
        .map(|i| {
            let mut all: Vec<(f64, usize)> = (0..n).filter(|&j| j != i).map(|j| (d(pt(xy, i), pt(xy, j)), j)).collect();
            all.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            let mut row: Vec<(usize, f64)> = all[..k].iter().map(|&(dj, j)| (j, dj)).collect();
            row.sort_by_key(|&(j, _)| j);
            row
        })
        .collect()
}

/// oracle: brute force. All other units at distance <= radius, by column.
fn brute_within(xy: &[f64], radius: f64, metric: Metric) -> Vec<Vec<(usize, f64)>> {
    let xy = &canonical(xy, metric)[..];
    let n = xy.len() / 2;
    let d = dist_fn(metric);
    (0..n)
        .map(|i| {
            (0..n).filter(|&j| j != i).map(|j| (j, d(pt(xy, i), pt(xy, j)))).filter(|&(_, dj)| dj <= radius).collect()
        })
        .collect()
}

/// oracle: brute force. Units that share their exact location with another.
fn brute_duplicate_units(xy: &[f64], metric: Metric) -> usize {
    let xy = &canonical(xy, metric)[..];
    let n = xy.len() / 2;
    (0..n).filter(|&i| (0..n).any(|j| j != i && pt(xy, i) == pt(xy, j))).count()
}

/// Same columns exactly; distances equal up to `tol`.
fn assert_same(got: &[Vec<(usize, f64)>], want: &[Vec<(usize, f64)>], tol: f64, what: &str) {
    assert_eq!(got.len(), want.len(), "{what}: number of rows");
    for (i, (g, w)) in got.iter().zip(want).enumerate() {
        let gc: Vec<usize> = g.iter().map(|p| p.0).collect();
        let wc: Vec<usize> = w.iter().map(|p| p.0).collect();
        assert_eq!(gc, wc, "{what}: columns of row {i}");
        for (a, b) in g.iter().zip(w) {
            assert!((a.1 - b.1).abs() <= tol, "{what}: row {i} col {}: distance {} vs {}", a.0, a.1, b.1);
        }
    }
}

fn check_knn(xy: &[f64], k: usize, metric: Metric, tol: f64, what: &str) {
    let nb = k_nearest(xy, k, metric, &Guard::unlimited()).unwrap();
    assert_same(&rows(&nb), &brute_knn(xy, k, metric), tol, what);
    assert_eq!(nb.duplicate_units, brute_duplicate_units(xy, metric), "{what}: duplicate units");
}

fn check_within(xy: &[f64], radius: f64, metric: Metric, tol: f64, what: &str) -> Neighbors {
    let nb = within_distance(xy, radius, metric, &Guard::unlimited()).unwrap();
    let got = rows(&nb);
    assert_same(&got, &brute_within(xy, radius, metric), tol, what);
    assert_symmetric(&got, what);
    assert_eq!(nb.duplicate_units, brute_duplicate_units(xy, metric), "{what}: duplicate units");
    nb
}

/// d(i, j) is d(j, i): every link appears both ways with the same distance.
fn assert_symmetric(r: &[Vec<(usize, f64)>], what: &str) {
    for (i, row) in r.iter().enumerate() {
        for &(j, d) in row {
            let back = r[j].iter().find(|p| p.0 == i);
            assert_eq!(back.map(|p| p.1), Some(d), "{what}: link {i}->{j} without its mirror");
            // common practice: distance is symmetric
        }
    }
}

fn random_points(rng: &mut SplitMix64, n: usize, lo: f64, hi: f64) -> Vec<f64> {
    (0..2 * n).map(|_| rng.range(lo, hi)).collect()
}

fn random_lonlat(rng: &mut SplitMix64, n: usize) -> Vec<f64> {
    let mut xy = Vec::with_capacity(2 * n);
    for _ in 0..n {
        // uniform on the sphere: latitude from asin of a uniform number
        xy.push(rng.range(-180.0, 360.0));
        xy.push(rng.range(-1.0, 1.0).asin().to_degrees().clamp(-90.0, 90.0));
    }
    xy
}

/// An integer grid `w` by `h`, in row-major order.
fn grid(w: i32, h: i32) -> Vec<f64> {
    let mut xy = Vec::new();
    for y in 0..h {
        for x in 0..w {
            xy.push(x as f64);
            xy.push(y as f64);
        }
    }
    xy
}

/// Fisher-Yates shuffle of the points (pairs).
fn shuffle_points(rng: &mut SplitMix64, xy: &mut [f64]) {
    let n = xy.len() / 2;
    for i in (1..n).rev() {
        let j = rng.below(i + 1);
        xy.swap(2 * i, 2 * j);
        xy.swap(2 * i + 1, 2 * j + 1);
    }
}

const GC_TOL: f64 = 1e-9; // km

// ---------------------------------------------------------------------------
// k nearest

#[test]
fn knn_euclidean_random_points() {
    let mut rng = SplitMix64(1);
    for &n in &[2usize, 3, 5, 17, 64, 300, 1500] {
        let xy = random_points(&mut rng, n, -100.0, 100.0);
        for &k in &[1usize, 2, 3, 7, 20, n - 1] {
            if k < n {
                check_knn(&xy, k, Metric::Euclidean, 0.0, &format!("random n={n} k={k}"));
            }
        }
    }
}

#[test]
fn knn_euclidean_integer_grid_ties() {
    let mut rng = SplitMix64(2);
    for &(w, h) in &[(1, 9), (3, 3), (12, 12), (25, 20)] {
        let mut xy = grid(w, h);
        let n = (w * h) as usize;
        for pass in 0..2 {
            for k in [1usize, 2, 3, 4, 5, 6, 8, 9, 12, 13, 20, 21, n - 1] {
                if k < n {
                    check_knn(&xy, k, Metric::Euclidean, 0.0, &format!("grid {w}x{h} pass {pass} k={k}"));
                }
            }
            // the same grid in a random order: ties now fall to other positions
            shuffle_points(&mut rng, &mut xy);
        }
    }
}

#[test]
fn knn_euclidean_collinear_many_equal_x() {
    // 600 points with one x coordinate: the tree splits on a constant axis
    let xy: Vec<f64> = (0..600).flat_map(|i| [0.0, (i % 300) as f64]).collect();
    for k in [1usize, 2, 3, 4, 5, 10] {
        check_knn(&xy, k, Metric::Euclidean, 0.0, &format!("collinear k={k}"));
    }
}

#[test]
fn knn_euclidean_duplicated_points() {
    let mut rng = SplitMix64(3);
    for trial in 0..20 {
        let m = 2 + rng.below(40);
        let base = random_points(&mut rng, m, -5.0, 5.0);
        let mut xy = Vec::new();
        for i in 0..m {
            // each location 1 to 6 times
            for _ in 0..1 + rng.below(6) {
                xy.extend_from_slice(&base[2 * i..2 * i + 2]);
            }
        }
        shuffle_points(&mut rng, &mut xy);
        let n = xy.len() / 2;
        for k in 1..=8usize.min(n - 1) {
            check_knn(&xy, k, Metric::Euclidean, 0.0, &format!("duplicates trial {trial} k={k}"));
        }
    }
}

#[test]
fn knn_euclidean_many_copies_of_one_point() {
    // 300 copies of the origin, then a small grid around it
    let mut xy: Vec<f64> = std::iter::repeat_n([0.0, 0.0], 300).flatten().collect();
    xy.extend(grid(5, 5).iter().map(|v| v - 2.0));
    for k in [1usize, 5, 299, 300, 301, 310] {
        check_knn(&xy, k, Metric::Euclidean, 0.0, &format!("copies k={k}"));
    }
}

#[test]
fn knn_negative_zero_is_the_same_place() {
    // -0.0 and 0.0 are one location: distance 0, ties by position
    let xy = [0.0, 0.0, -0.0, -0.0, 1.0, 0.0, 0.0, -0.0];
    let nb = k_nearest(&xy, 2, Metric::Euclidean, &Guard::unlimited()).unwrap();
    assert_same(&rows(&nb), &brute_knn(&xy, 2, Metric::Euclidean), 0.0, "signed zero");
    assert_eq!(nb.duplicate_units, 3); // oracle: by hand, units 0, 1 and 3
}

#[test]
fn knn_example_by_hand() {
    // points on a line at 0, 1, 3, 4: nearest of 0 is 1, of 1 is 0 (d 1,
    // lower position than 2 at d 2), of 2 is 3, of 3 is 2
    let xy = [0.0, 0.0, 1.0, 0.0, 3.0, 0.0, 4.0, 0.0];
    let nb = k_nearest(&xy, 1, Metric::Euclidean, &Guard::unlimited()).unwrap();
    assert_eq!(nb.graph.view().indices(), &[1, 0, 3, 2]); // oracle: by hand
    assert_eq!(nb.graph.view().data(), &[1.0, 1.0, 1.0, 1.0]);
    // k = 2 for unit 1: 0 at 1 and 2 at 2
    let nb = k_nearest(&xy, 2, Metric::Euclidean, &Guard::unlimited()).unwrap();
    assert_eq!(nb.graph.view().row(1), (&[0i64, 2][..], &[1.0, 2.0][..])); // oracle: by hand
}

#[test]
fn knn_great_circle_random_points() {
    let mut rng = SplitMix64(4);
    for &n in &[2usize, 4, 50, 400, 1200] {
        let xy = random_lonlat(&mut rng, n);
        for &k in &[1usize, 2, 6, 15, n - 1] {
            if k < n {
                check_knn(&xy, k, Metric::GreatCircle, GC_TOL, &format!("gc random n={n} k={k}"));
            }
        }
    }
}

#[test]
fn knn_great_circle_clusters_poles_and_dateline() {
    let mut rng = SplitMix64(5);
    let mut xy = Vec::new();
    // tight clusters (separations down to ~1 mm) near the dateline and the poles,
    // plus longitudes given as both -180 and 180, and as x and x + 360
    for &(lon, lat, spread) in
        &[(179.9999, 10.0, 1e-6), (-180.0, -30.0, 1e-4), (0.0, 89.9999, 1e-5), (45.0, -90.0, 0.0), (10.0, 0.0, 1e-8)]
    {
        for _ in 0..30 {
            let lo = (lon + rng.range(-spread, spread)).clamp(-180.0, 360.0);
            let la = (lat + rng.range(-spread, spread)).clamp(-90.0, 90.0);
            xy.push(lo);
            xy.push(la);
        }
    }
    xy.extend_from_slice(&[180.0, 10.0, -180.0, 10.0, 370.0 - 360.0, 0.0, 350.0, 0.0, -10.0, 0.0]);
    shuffle_points(&mut rng, &mut xy);
    for k in [1usize, 2, 5, 29, 30, 31, 60] {
        check_knn(&xy, k, Metric::GreatCircle, GC_TOL, &format!("gc clusters k={k}"));
    }
}

#[test]
fn knn_great_circle_ties_and_duplicates() {
    let mut rng = SplitMix64(6);
    // a 1-degree lattice near the equator, each point twice
    let mut xy = Vec::new();
    for lat in -3..=3 {
        for lon in -4..=4 {
            for _ in 0..2 {
                xy.push(lon as f64);
                xy.push(lat as f64);
            }
        }
    }
    for pass in 0..2 {
        for k in [1usize, 2, 3, 4, 5, 9, 10] {
            check_knn(&xy, k, Metric::GreatCircle, GC_TOL, &format!("gc lattice pass {pass} k={k}"));
        }
        shuffle_points(&mut rng, &mut xy);
    }
}

#[test]
fn knn_great_circle_distances_are_km() {
    // one degree of arc along the equator is R pi / 180 km
    let xy = [0.0, 0.0, 1.0, 0.0, 3.0, 0.0];
    let nb = k_nearest(&xy, 1, Metric::GreatCircle, &Guard::unlimited()).unwrap();
    let want = EARTH_RADIUS_KM * std::f64::consts::PI / 180.0; // common practice: arc = R theta
    assert!((nb.graph.view().data()[0] - want).abs() < 1e-9);
    assert_eq!(EARTH_RADIUS_KM, 6371.0088); // IUGG mean radius R1 (Moritz 2000)
}

#[test]
fn great_circle_one_place_spelled_two_ways() {
    // lon 190 is lon -170, lon 180 is lon -180, and both poles are single
    // places whatever the longitude: each pair is one location at distance 0
    let xy = [190.0, 20.0, -170.0, 20.0, 180.0, -5.0, -180.0, -5.0, 12.0, 90.0, -99.0, 90.0, 0.0, -90.0, 359.0, -90.0];
    let nb = k_nearest(&xy, 1, Metric::GreatCircle, &Guard::unlimited()).unwrap();
    assert_eq!(nb.duplicate_units, 8); // oracle: by hand, four pairs
    assert_eq!(nb.graph.view().indices(), &[1, 0, 3, 2, 5, 4, 7, 6]); // oracle: by hand
    assert!(nb.graph.view().data().iter().all(|&d| d == 0.0));
    let nb = within_distance(&xy, 0.0, Metric::GreatCircle, &Guard::unlimited()).unwrap();
    assert_eq!(nb.graph.view().counts(), vec![1; 8]); // oracle: by hand
                                                      // in the plane these are eight different points
    assert_eq!(k_nearest(&xy, 1, Metric::Euclidean, &Guard::unlimited()).unwrap().duplicate_units, 0);
}

// ---------------------------------------------------------------------------
// within a distance

#[test]
fn within_euclidean_random_points() {
    let mut rng = SplitMix64(7);
    for &n in &[1usize, 2, 10, 100, 700] {
        let xy = random_points(&mut rng, n, 0.0, 50.0);
        for &r in &[0.0, 0.5, 3.0, 10.0, 80.0] {
            check_within(&xy, r, Metric::Euclidean, 0.0, &format!("within n={n} r={r}"));
        }
    }
}

#[test]
fn within_euclidean_grid_boundary_is_inclusive() {
    let xy = grid(11, 11);
    // radii that are exactly a grid distance: 1, sqrt(2), 2, sqrt(5), 5 (3-4-5)
    for &d2 in &[1.0f64, 2.0, 4.0, 5.0, 25.0] {
        let r = d2.sqrt();
        let nb = check_within(&xy, r, Metric::Euclidean, 0.0, &format!("grid r^2={d2}"));
        // the centre (5, 5) at position 60 has every lattice point at distance
        // <= r, boundary included; count them by brute force on offsets
        let want = (-5i32..=5)
            .flat_map(|dx| (-5i32..=5).map(move |dy| (dx, dy)))
            .filter(|&(dx, dy)| (dx, dy) != (0, 0) && ((dx * dx + dy * dy) as f64) <= d2)
            .count(); // oracle: brute force on integer offsets
        assert_eq!(nb.graph.view().counts()[60], want, "r^2 = {d2}");
    }
    // (0,0) and (3,4) are exactly 5 apart and must be linked at radius 5
    let nb = within_distance(&[0.0, 0.0, 3.0, 4.0], 5.0, Metric::Euclidean, &Guard::unlimited()).unwrap();
    assert_eq!(nb.graph.view().counts(), vec![1, 1]); // oracle: by hand, 3-4-5 triangle
    let nb = within_distance(&[0.0, 0.0, 3.0, 4.0], 5.0 - 1e-12, Metric::Euclidean, &Guard::unlimited()).unwrap();
    assert_eq!(nb.graph.view().counts(), vec![0, 0]); // oracle: by hand
}

#[test]
fn within_radius_zero_links_only_duplicates() {
    let mut rng = SplitMix64(8);
    let base = random_points(&mut rng, 30, -1.0, 1.0);
    let mut xy = base.clone();
    xy.extend_from_slice(&base[..20]);
    xy.extend_from_slice(&base[..6]);
    shuffle_points(&mut rng, &mut xy);
    let nb = check_within(&xy, 0.0, Metric::Euclidean, 0.0, "radius 0");
    assert!(nb.graph.view().data().iter().all(|&d| d == 0.0));
    // by construction: locations 0..3 three times (9 units), 3..10 twice (14 units)
    assert_eq!(nb.duplicate_units, 9 + 14); // oracle: by construction
}

#[test]
fn within_great_circle_random_points() {
    let mut rng = SplitMix64(9);
    for &n in &[2usize, 30, 400] {
        let xy = random_lonlat(&mut rng, n);
        for &r in &[0.0, 100.0, 1500.0, 8000.0, 20_000.0, 25_000.0] {
            check_within(&xy, r, Metric::GreatCircle, GC_TOL, &format!("gc within n={n} r={r}"));
        }
    }
}

#[test]
fn within_great_circle_boundary_is_inclusive() {
    // integer longitudes on the equator and integer latitudes on a meridian:
    // the radius is the haversine distance of a 2-degree step, which several
    // pairs meet exactly
    let mut xy = Vec::new();
    for lon in -6..=6 {
        xy.push(lon as f64);
        xy.push(0.0);
    }
    for lat in -6..=6 {
        if lat != 0 {
            xy.push(100.0);
            xy.push(lat as f64);
        }
    }
    xy.extend_from_slice(&[0.0, 90.0, 123.0, 90.0, 180.0, -1.0, -180.0, 1.0]);
    let r = haversine([0.0, 0.0], [2.0, 0.0]);
    let nb = check_within(&xy, r, Metric::GreatCircle, GC_TOL, "gc boundary");
    // unit 6 is (0, 0); (-2, 0), (-1, 0), (1, 0), (2, 0) are within, inclusive
    let g = nb.graph.view();
    let (cols, _) = g.row(6);
    assert_eq!(cols, &[4, 5, 7, 8]); // oracle: by hand
                                     // the two poles copies are 0 apart up to rounding; 180/-1 and -180/1 are 2 degrees apart
    let full = check_within(&xy, 1e-6, Metric::GreatCircle, GC_TOL, "gc pole copies");
    let n = xy.len() / 2;
    assert_eq!(full.graph.view().row(n - 4).0, &[(n - 3) as i64]); // oracle: the north pole is one place
}

#[test]
fn within_great_circle_antipodes() {
    // half the circumference: antipodal points are exactly at pi R
    let xy = [0.0, 0.0, 180.0, 0.0, 90.0, 0.0, 0.0, 90.0, 0.0, -90.0];
    let half = std::f64::consts::PI * EARTH_RADIUS_KM; // common practice: half a great circle
    let nb = check_within(&xy, half, Metric::GreatCircle, 1e-9, "antipodes");
    assert_eq!(nb.graph.view().counts(), vec![4, 4, 4, 4, 4]); // oracle: every pair is at most pi R apart
}

// ---------------------------------------------------------------------------
// errors

#[test]
fn knn_errors() {
    let xy = [0.0, 0.0, 1.0, 0.0, 2.0, 0.0];
    assert_eq!(k_nearest(&xy, 0, Metric::Euclidean, &Guard::unlimited()).unwrap_err(), Error::InvalidK { k: 0, n: 3 });
    assert_eq!(k_nearest(&xy, 3, Metric::Euclidean, &Guard::unlimited()).unwrap_err(), Error::InvalidK { k: 3, n: 3 });
    assert_eq!(
        k_nearest(&xy, 4, Metric::GreatCircle, &Guard::unlimited()).unwrap_err(),
        Error::InvalidK { k: 4, n: 3 }
    );
    assert_eq!(
        k_nearest(&[0.0, 0.0], 1, Metric::Euclidean, &Guard::unlimited()).unwrap_err(),
        Error::InvalidK { k: 1, n: 1 }
    );
    assert_eq!(k_nearest(&[], 1, Metric::Euclidean, &Guard::unlimited()).unwrap_err(), Error::Empty);
    assert_eq!(
        k_nearest(&[0.0, 0.0, 1.0], 1, Metric::Euclidean, &Guard::unlimited()).unwrap_err(),
        Error::OddCoordinates { len: 3 }
    );
    assert!(matches!(
        k_nearest(&[0.0, 0.0, f64::NAN, 1.0, 2.0, 2.0], 1, Metric::Euclidean, &Guard::unlimited()),
        Err(Error::NonFiniteCoordinate { unit: Unit(1), axis: 0, .. })
    ));
    assert!(matches!(
        k_nearest(&[0.0, 0.0, 1.0, f64::INFINITY], 1, Metric::Euclidean, &Guard::unlimited()),
        Err(Error::NonFiniteCoordinate { unit: Unit(1), axis: 1, .. })
    ));
    assert!(matches!(
        k_nearest(&[0.0, 0.0, 1.0, 1e151], 1, Metric::Euclidean, &Guard::unlimited()),
        Err(Error::CoordinateTooLarge { unit: Unit(1), axis: 1, .. })
    ));
    assert_eq!(
        k_nearest(&[0.0, 0.0, 10.0, 90.5], 1, Metric::GreatCircle, &Guard::unlimited()).unwrap_err(),
        Error::LatitudeOutOfRange { unit: Unit(1), value: 90.5 }
    );
    assert_eq!(
        k_nearest(&[0.0, -91.0, 10.0, 0.0], 1, Metric::GreatCircle, &Guard::unlimited()).unwrap_err(),
        Error::LatitudeOutOfRange { unit: Unit(0), value: -91.0 }
    );
    assert_eq!(
        k_nearest(&[0.0, 0.0, -180.5, 0.0], 1, Metric::GreatCircle, &Guard::unlimited()).unwrap_err(),
        Error::LongitudeOutOfRange { unit: Unit(1), value: -180.5 }
    );
    assert!(matches!(
        k_nearest(&[0.0, f64::NAN, 1.0, 1.0], 1, Metric::GreatCircle, &Guard::unlimited()),
        Err(Error::NonFiniteCoordinate { unit: Unit(0), axis: 1, .. })
    ));
    // a latitude of 91 is fine in the plane
    assert!(k_nearest(&[0.0, 91.0, 1.0, 1.0], 1, Metric::Euclidean, &Guard::unlimited()).is_ok());
}

#[test]
fn within_errors() {
    let xy = [0.0, 0.0, 1.0, 0.0];
    for r in [-1.0, -1e-300, f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
        for metric in [Metric::Euclidean, Metric::GreatCircle] {
            assert!(
                matches!(within_distance(&xy, r, metric, &Guard::unlimited()), Err(Error::InvalidRadius { .. })),
                "radius {r} must be refused"
            );
        }
    }
    assert_eq!(within_distance(&[], 1.0, Metric::Euclidean, &Guard::unlimited()).unwrap_err(), Error::Empty);
    assert_eq!(within_distance(&[], 1.0, Metric::GreatCircle, &Guard::unlimited()).unwrap_err(), Error::Empty);
    assert_eq!(
        within_distance(&[1.0], 1.0, Metric::Euclidean, &Guard::unlimited()).unwrap_err(),
        Error::OddCoordinates { len: 1 }
    );
    assert!(matches!(
        within_distance(&[0.0, 0.0, f64::NAN, 0.0], 1.0, Metric::Euclidean, &Guard::unlimited()),
        Err(Error::NonFiniteCoordinate { unit: Unit(1), axis: 0, .. })
    ));
    assert_eq!(
        within_distance(&[0.0, 0.0, 0.0, 100.0], 1.0, Metric::GreatCircle, &Guard::unlimited()).unwrap_err(),
        Error::LatitudeOutOfRange { unit: Unit(1), value: 100.0 }
    );
    // a negative zero radius is zero
    assert!(within_distance(&xy, -0.0, Metric::Euclidean, &Guard::unlimited()).is_ok());
}

// ---------------------------------------------------------------------------
// input order: the search runs in Z-order inside, so any input order gives
// the same links and distances, after relabeling

/// The rows of `nb`, found on the points in order `perm` (point p of that
/// input is point perm[p] of the original), in the original labels.
fn relabeled(nb: &Neighbors, perm: &[usize]) -> Vec<Vec<(usize, f64)>> {
    let got = rows(nb);
    let mut out = vec![Vec::new(); perm.len()];
    for (p, row) in got.into_iter().enumerate() {
        let mut row: Vec<(usize, f64)> = row.into_iter().map(|(j, d)| (perm[j], d)).collect();
        row.sort_by_key(|&(j, _)| j);
        out[perm[p]] = row;
    }
    out
}

#[test]
fn shuffled_and_sorted_inputs_give_the_same_links() {
    let mut rng = SplitMix64(17);
    // random points with an integer grid (ties) and repeated locations; more
    // than a block of rows, so the parallel route runs
    let mut xy = random_points(&mut rng, 3000, 0.0, 60.0);
    xy.extend(grid(40, 40).iter().map(|v| v * 1.5));
    for i in 0..300 {
        let j = rng.below(xy.len() / 2);
        xy.extend([xy[2 * j], xy[2 * j + 1] + if i % 2 == 0 { 0.0 } else { -0.0 }]);
    }
    let n = xy.len() / 2;
    let mut perm: Vec<usize> = (0..n).collect();
    for i in (1..n).rev() {
        perm.swap(i, rng.below(i + 1));
    }
    // the same points in strips sorted by x, and shuffled
    let mut sorted: Vec<usize> = (0..n).collect();
    sorted.sort_by(|&a, &b| {
        let (pa, pb) = (pt(&xy, a), pt(&xy, b));
        ((pa[1] / 4.0) as i64).cmp(&((pb[1] / 4.0) as i64)).then(pa[0].total_cmp(&pb[0])).then(a.cmp(&b))
    });
    let take = |perm: &[usize]| -> Vec<f64> { perm.iter().flat_map(|&i| pt(&xy, i)).collect() };
    let g = Guard::unlimited();
    for k in [1usize, 8, 9] {
        for order in [&perm, &sorted] {
            // ties fall to the lower position of the input given, so the
            // oracle is brute force on that input
            let input = take(order);
            let nb = k_nearest(&input, k, Metric::Euclidean, &g).unwrap();
            assert_same(&rows(&nb), &brute_knn(&input, k, Metric::Euclidean), 0.0, &format!("k = {k}, reordered"));
        }
    }
    // without ties, the same links and distances (bit for bit) after relabeling
    let plain = &xy[..6000];
    let (p2, s2): (Vec<usize>, Vec<usize>) =
        (perm.iter().copied().filter(|&i| i < 3000).collect(), sorted.iter().copied().filter(|&i| i < 3000).collect());
    let take2 = |perm: &[usize]| -> Vec<f64> { perm.iter().flat_map(|&i| pt(plain, i)).collect() };
    let want = brute_knn(plain, 8, Metric::Euclidean);
    for order in [&p2, &s2] {
        let nb = k_nearest(&take2(order), 8, Metric::Euclidean, &g).unwrap();
        assert_same(&relabeled(&nb, order), &want, 0.0, "k = 8, reordered, no ties");
    }
    let want = brute_within(&xy, 1.5, Metric::Euclidean);
    for order in [&perm, &sorted] {
        let nb = within_distance(&take(order), 1.5, Metric::Euclidean, &g).unwrap();
        assert_same(&relabeled(&nb, order), &want, 0.0, "within 1.5, reordered");
    }
}

#[test]
fn results_do_not_depend_on_the_thread_count() {
    let mut rng = SplitMix64(23);
    let mut xy = random_points(&mut rng, 6000, -10.0, 10.0);
    xy.extend(grid(30, 30));
    let g = Guard::unlimited();
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap().install(|| {
            let knn = k_nearest(&xy, 8, Metric::Euclidean, &g).unwrap();
            let band = within_distance(&xy, 0.4, Metric::Euclidean, &g).unwrap();
            let lonlat: Vec<f64> = xy.chunks(2).flat_map(|p| [p[0] * 5.0, p[1] * 3.0]).collect();
            let gc = k_nearest(&lonlat, 5, Metric::GreatCircle, &g).unwrap();
            (knn.graph, band.graph, gc.graph)
        })
    };
    let one = run(1);
    assert_eq!(one, run(3));
    // and the single-threaded run agrees with brute force (the oracle)
    assert_same(
        &rows(&Neighbors { graph: one.0, duplicate_units: 0 }),
        &brute_knn(&xy, 8, Metric::Euclidean),
        0.0,
        "knn",
    );
}
