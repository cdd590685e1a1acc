//! Repairs of the link structure: give islands neighbours, join the pieces
//! of a map that falls apart. Both find the nearest units by location
//! (points, or polygon centroids) and only add links.

use crate::csr::CsrRef;
use crate::error::{Error, Result, Units};
use crate::graph::components;
use crate::guard::Guard;
use crate::neighbors::{nearest_among, prepare, Metric, Prepared};

/// Locations of all units, interleaved; a unit whose coordinates are not
/// both finite (an empty polygon's centroid) has no location. Returns the
/// filled coordinates (0, 0 where unlocated) and which units are located;
/// other coordinates are checked as the metric requires.
fn locations(xy: &[f64], n: usize) -> Result<(Vec<f64>, Vec<bool>)> {
    if n == 0 {
        return Err(Error::Empty);
    }
    if xy.len() != 2 * n {
        return Err(Error::LengthMismatch { what: "the locations (as x, y pairs)", expected: n, got: xy.len() / 2 });
    }
    let located: Vec<bool> = xy.chunks_exact(2).map(|p| p[0].is_finite() && p[1].is_finite()).collect();
    let filled: Vec<f64> =
        xy.chunks_exact(2).zip(&located).flat_map(|(p, &ok)| if ok { [p[0], p[1]] } else { [0.0, 0.0] }).collect();
    Ok((filled, located))
}

fn unlocated(what: &'static str, units: &[usize], located: &[bool]) -> Result<()> {
    let missing: Vec<usize> = units.iter().copied().filter(|&u| !located[u]).collect();
    if !missing.is_empty() {
        return Err(Error::Unlocated { what, units: Units::of(&missing) });
    }
    Ok(())
}

/// Links (i, j, distance) from each island i to its `k` nearest located
/// units, and back (j, i) when the links of `w` are symmetric (so they
/// stay symmetric). Sorted, without repeats.
pub fn island_links(
    w: CsrRef<'_>,
    xy: &[f64],
    metric: Metric,
    k: usize,
    guard: &Guard,
) -> Result<Vec<(usize, usize, f64)>> {
    let n = w.n();
    let both_ways = w.is_structurally_symmetric();
    let (filled, located) = locations(xy, n)?;
    let p = prepare(&filled, metric)?;
    let islands = w.islands();
    unlocated("islands", &islands, &located)?;
    let targets: Vec<usize> = (0..n).filter(|&u| located[u]).collect();
    if k == 0 || k + 1 > targets.len() {
        return Err(Error::InvalidK { k, n: targets.len() });
    }
    let found = nearest_among(&p, &targets, &islands, k, guard)?;
    let mut links = Vec::new();
    for (&i, near) in islands.iter().zip(&found) {
        for &(d, j) in near {
            links.push((i, j, d));
            if both_ways {
                links.push((j, i, d));
            }
        }
    }
    links.sort_unstable_by_key(|l| (l.0, l.1));
    links.dedup_by_key(|l| (l.0, l.1));
    Ok(links)
}

/// One link (i, j, distance) from each component other than the largest to
/// the largest: between the closest pair of located units, i in the
/// smaller component and j in the largest (ties to the lower i, then j);
/// and back (j, i) when the links of `w` are symmetric. Empty when the map
/// is in one piece.
pub fn component_links(w: CsrRef<'_>, xy: &[f64], metric: Metric, guard: &Guard) -> Result<Vec<(usize, usize, f64)>> {
    let n = w.n();
    let both_ways = w.is_structurally_symmetric();
    let (filled, located) = locations(xy, n)?;
    let p: Prepared<'_> = prepare(&filled, metric)?;
    let comps = components(w);
    if comps.count() <= 1 {
        return Ok(Vec::new());
    }
    let targets: Vec<usize> = (0..n).filter(|&u| located[u] && comps.labels[u] == 0).collect();
    if targets.is_empty() {
        let largest: Vec<usize> = (0..n).filter(|&u| comps.labels[u] == 0).collect();
        return Err(Error::Unlocated { what: "units of the largest component", units: Units::of(&largest) });
    }
    let queries: Vec<usize> = (0..n).filter(|&u| located[u] && comps.labels[u] != 0).collect();
    let found = nearest_among(&p, &targets, &queries, 1, guard)?;
    // the closest pair of each smaller component
    let mut best: Vec<Option<(f64, usize, usize)>> = vec![None; comps.count()];
    for (&q, near) in queries.iter().zip(&found) {
        let (d, t) = near[0];
        let slot = &mut best[comps.labels[q] as usize];
        // queries come in increasing position, so a tie keeps the lower i
        if slot.is_none_or(|b| d < b.0) {
            *slot = Some((d, q, t));
        }
    }
    let missing: Vec<usize> = (1..comps.count()).filter(|&c| best[c].is_none()).collect();
    if !missing.is_empty() {
        let units: Vec<usize> =
            (0..n).filter(|&u| missing.binary_search(&(comps.labels[u] as usize)).is_ok()).collect();
        return Err(Error::Unlocated { what: "smaller components", units: Units::of(&units) });
    }
    let mut links = Vec::new();
    for &(d, i, j) in best[1..].iter().flatten() {
        links.push((i, j, d));
        if both_ways {
            links.push((j, i, d));
        }
    }
    links.sort_unstable_by_key(|l| (l.0, l.1));
    Ok(links)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::csr::Csr;

    #[test]
    fn islands_get_their_nearest() {
        // four units on a line at x = 0, 1, 2, 10; 0 - 1 linked, 2 and 3 islands.
        // By hand: 2's nearest is 1 (distance 1), 3's nearest is 2 (distance 8).
        let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0)], vec![], vec![]]);
        let xy = [0.0, 0.0, 1.0, 0.0, 2.0, 0.0, 10.0, 0.0];
        let links = island_links(w.view(), &xy, Metric::Euclidean, 1, &Guard::unlimited()).unwrap();
        assert_eq!(links, vec![(1, 2, 1.0), (2, 1, 1.0), (2, 3, 8.0), (3, 2, 8.0)]);
        let comps = component_links(w.view(), &xy, Metric::Euclidean, &Guard::unlimited()).unwrap();
        // components {0,1}, {2}, {3}: 2 joins via 1; 3's closest unit of the largest is 1 (distance 9);
        // the links of w are symmetric, so each goes both ways
        assert_eq!(comps, vec![(1, 2, 1.0), (1, 3, 9.0), (2, 1, 1.0), (3, 1, 9.0)]);
        // a one-way matrix gets one-way links
        let one_way = Csr::from_rows(vec![vec![(1, 1.0)], vec![], vec![], vec![]]);
        let links = island_links(one_way.view(), &xy, Metric::Euclidean, 1, &Guard::unlimited()).unwrap();
        assert_eq!(links, vec![(1, 0, 1.0), (2, 1, 1.0), (3, 2, 8.0)]);
        let nan = [0.0, 0.0, 1.0, 0.0, f64::NAN, 0.0, 10.0, 0.0];
        assert!(matches!(
            island_links(w.view(), &nan, Metric::Euclidean, 1, &Guard::unlimited()),
            Err(Error::Unlocated { units: Units { count: 1, .. }, .. })
        ));
    }
}
