//! Weights from a list of edges (source, target, weight): edge tables read
//! from files, and networks that are not spatial (trade flows, commuting,
//! contacts).
//!
//! Each edge i -> j becomes the link from row i to column j. Repeated edges
//! are summed, averaged, kept at their largest, or refused; self-loops
//! (i -> i) are kept, dropped, or refused. Weights must be finite and
//! positive (a zero weight is no link: callers drop such edges first if
//! they want). Errors name the edges by their index in the input, so that
//! the caller can name the table row or file line. O(n + edges): a
//! counting sort by row, then each row sorted by column.

use crate::csr::{build_rows, Csr, PARALLEL_MIN_NNZ};
use crate::error::{Edge, Error, Link, Result, Unit};
use crate::guard::Guard;

/// What to do with edges that repeat a (source, target) pair.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Duplicates {
    Sum,
    Mean,
    Max,
    Error,
}

/// What to do with edges from a unit to itself.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SelfLoops {
    Keep,
    Drop,
    Error,
}

impl Duplicates {
    pub fn parse(name: &str) -> Result<Self> {
        Ok(match name {
            "sum" => Self::Sum,
            "mean" => Self::Mean,
            "max" => Self::Max,
            "error" => Self::Error,
            _ => {
                return Err(Error::UnknownOption {
                    what: "duplicates policy",
                    name: name.into(),
                    options: "\"sum\", \"mean\", \"max\", \"error\"",
                })
            }
        })
    }
}

impl SelfLoops {
    pub fn parse(name: &str) -> Result<Self> {
        Ok(match name {
            "keep" => Self::Keep,
            "drop" => Self::Drop,
            "error" => Self::Error,
            _ => {
                return Err(Error::UnknownOption {
                    what: "self-loops policy",
                    name: name.into(),
                    options: "\"keep\", \"drop\", \"error\"",
                })
            }
        })
    }
}

/// Weights built from edges, with, for each stored entry, the index of the
/// first edge that made it, and how many self-loops were dropped.
#[derive(Debug, Clone)]
pub struct FromEdges {
    pub graph: Csr,
    pub first_edge: Vec<i64>,
    pub dropped_self_loops: usize,
    pub merged_duplicates: usize,
}

/// Weights of `n` units from edges `source[e] -> target[e]` weighing `weight[e]`.
///
/// ```
/// use vicino_core::{Guard, edges::{from_edges, Duplicates, SelfLoops}};
/// let out = from_edges(3, &[0, 2, 0], &[1, 0, 1], &[1.0, 2.0, 3.0], Duplicates::Sum, SelfLoops::Keep, &Guard::unlimited()).unwrap();
/// assert_eq!(out.graph.view().indices(), &[1, 0]);
/// assert_eq!(out.graph.view().data(), &[4.0, 2.0]); // edges 0 and 2 summed
/// assert_eq!(out.first_edge, vec![0, 1]);
/// ```
pub fn from_edges(
    n: usize,
    source: &[i64],
    target: &[i64],
    weight: &[f64],
    duplicates: Duplicates,
    self_loops: SelfLoops,
    guard: &Guard,
) -> Result<FromEdges> {
    let m = source.len();
    if target.len() != m || weight.len() != m {
        return Err(Error::LengthMismatch {
            what: "the edge columns",
            expected: m,
            got: target.len().min(weight.len()),
        });
    }
    guard.reserve(m as f64 * 40.0 + n as f64 * 16.0, "the weights of these edges", "use fewer edges")?;
    let pos = |p: i64| usize::try_from(p).ok().filter(|&p| p < n);
    let mut count = vec![0usize; n + 1];
    let mut dropped = 0;
    for e in 0..m {
        let (Some(i), Some(j)) = (pos(source[e]), pos(target[e])) else {
            return Err(Error::EdgeOutOfRange { edge: Edge(e), n });
        };
        let v = weight[e];
        if !(v.is_finite() && v > 0.0) {
            return Err(Error::EdgeWeight { edge: Edge(e), link: Link(i, j), value: v });
        }
        if i == j {
            match self_loops {
                SelfLoops::Drop => {
                    dropped += 1;
                    continue;
                }
                SelfLoops::Error => return Err(Error::SelfLoop { edge: Edge(e), unit: Unit(i) }),
                SelfLoops::Keep => {}
            }
        }
        count[i + 1] += 1;
    }
    for r in 0..n {
        count[r + 1] += count[r];
    }
    let mut slot = count.clone();
    let mut bucket = vec![(0i64, 0u64); count[n]]; // (column, edge)
    for e in 0..m {
        let (i, j) = (source[e] as usize, target[e] as usize);
        if i == j && self_loops == SelfLoops::Drop {
            continue;
        }
        bucket[slot[i]] = (j as i64, e as u64);
        slot[i] += 1;
    }
    guard.check()?;
    let merged = std::sync::atomic::AtomicUsize::new(0);
    let (indptr, indices, entries) = build_rows(
        n,
        None,
        count[n] >= PARALLEL_MIN_NNZ,
        Vec::new,
        |row: &mut Vec<(i64, u64)>, i, cols, out: &mut Vec<(f64, i64)>| {
            row.clear();
            row.extend_from_slice(&bucket[count[i]..count[i + 1]]);
            row.sort_unstable();
            let mut p = 0;
            while p < row.len() {
                let (c, e) = row[p];
                let mut q = p + 1;
                let (mut total, mut top) = (weight[e as usize], weight[e as usize]);
                while q < row.len() && row[q].0 == c {
                    if duplicates == Duplicates::Error {
                        return Err(Error::DuplicateEdge {
                            first: Edge(e as usize),
                            second: Edge(row[q].1 as usize),
                            link: Link(i, c as usize),
                        });
                    }
                    total += weight[row[q].1 as usize];
                    top = top.max(weight[row[q].1 as usize]);
                    q += 1;
                }
                let k = (q - p) as f64;
                if q - p > 1 {
                    merged.fetch_add(q - p - 1, std::sync::atomic::Ordering::Relaxed);
                }
                let v = match duplicates {
                    Duplicates::Sum | Duplicates::Error => total,
                    Duplicates::Mean => total / k,
                    Duplicates::Max => top,
                };
                if !v.is_finite() {
                    return Err(Error::EdgeWeight {
                        edge: Edge(row[q - 1].1 as usize),
                        link: Link(i, c as usize),
                        value: v,
                    });
                }
                cols.push(c);
                out.push((v, e as i64));
                p = q;
            }
            Ok(())
        },
    )?;
    let (data, first_edge) = entries.into_iter().unzip();
    Ok(FromEdges {
        graph: Csr::new(n, indptr, indices, data)?,
        first_edge,
        dropped_self_loops: dropped,
        merged_duplicates: merged.into_inner(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn policies() {
        let g = Guard::unlimited();
        let (s, t, w) = ([0, 0, 1, 1], [1, 1, 1, 0], [1.0, 3.0, 5.0, 2.0]);
        let run = |d, l| from_edges(2, &s, &t, &w, d, l, &g);
        // by hand: edges 0 and 1 repeat 0 -> 1; edge 2 is a self-loop
        assert_eq!(run(Duplicates::Sum, SelfLoops::Drop).unwrap().graph.view().data(), &[4.0, 2.0]);
        assert_eq!(run(Duplicates::Mean, SelfLoops::Drop).unwrap().graph.view().data(), &[2.0, 2.0]);
        assert_eq!(run(Duplicates::Max, SelfLoops::Keep).unwrap().graph.view().data(), &[3.0, 2.0, 5.0]);
        assert!(matches!(
            run(Duplicates::Error, SelfLoops::Drop),
            Err(Error::DuplicateEdge { first: Edge(0), second: Edge(1), .. })
        ));
        assert!(matches!(run(Duplicates::Sum, SelfLoops::Error), Err(Error::SelfLoop { edge: Edge(2), .. })));
        assert!(matches!(
            from_edges(2, &[0], &[2], &[1.0], Duplicates::Sum, SelfLoops::Keep, &g),
            Err(Error::EdgeOutOfRange { edge: Edge(0), .. })
        ));
        assert!(matches!(
            from_edges(2, &[0], &[1], &[0.0], Duplicates::Sum, SelfLoops::Keep, &g),
            Err(Error::EdgeWeight { edge: Edge(0), .. })
        ));
    }
}
