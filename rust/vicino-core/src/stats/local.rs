//! Local statistics: local Moran's I (Anselin 1995) and the local Getis-Ord
//! G_i and G_i* (Getis and Ord 1992; Ord and Getis 1995), with analytic
//! moments, conditional permutation tests and multiple-testing adjustments.
//!
//! Local Moran, with z the centred values and m2 = sum z^2 / n (Anselin's
//! convention, divisor n): I_i = z_i sum_j w_ij z_j / m2, so that
//! sum_i I_i = S0 I for the global I = (n / S0) z'Wz / z'z.
//! Under randomization, with W_i = sum_j w_ij, w_i(2) = sum_j w_ij^2 and
//! b2 = m4 / m2^2 (m4 = sum z^4 / n): E[I_i] = -W_i / (n - 1) and
//! Var[I_i] = w_i(2) (n - b2) / (n - 1) + (W_i^2 - w_i(2)) (2 b2 - n) / ((n - 1)(n - 2))
//!            - W_i^2 / (n - 1)^2 (Anselin 1995, with 2 w_i(kh) = W_i^2 - w_i(2)).
//!
//! Local G (j != i), with xbar_i and s_i^2 the mean and variance (divisor n - 1)
//! of the other n - 1 values and S1_i = sum_j w_ij^2:
//! z(G_i) = (sum_j w_ij x_j - W_i xbar_i) / (s_i sqrt(((n - 1) S1_i - W_i^2) / (n - 2))).
//! G_i* sums over every j including i, with w_ii the stored self-weight or 1,
//! and the mean and variance (divisor n) of all n values:
//! z(G_i*) = (sum_j w_ij x_j - W_i* xbar) / (s sqrt((n S1_i* - W_i*^2) / (n - 1))).
//!
//! Conditional permutation (Anselin 1995): unit i keeps its value and its
//! k_i neighbours take k_i values drawn without replacement from the other
//! n - 1 units, R times. Unit i draws from its own generator, stream
//! (seed ^ LOCAL, i) of [`permutation::stream`], so the draws of every unit
//! are the same bit for bit for any number of threads and any order of
//! work. Each draw needs only the neighbour sum sum_m w_im v_(j_m), from
//! bounded integers (two from each 64-bit word, Lemire's method on 32-bit
//! halves). Up to 32 neighbours, when a repeat is rare (k (k - 1) / 2 at most
//! (n - 1) / 32), by whole-tuple rejection: the k positions are drawn at once
//! and compared in a fixed pattern without branches, and the rare tuple with a
//! repeat is drawn again (measured at n = 10^5, k = 8 on one thread of a loaded
//! machine: 5.7 ns of CPU per sampled neighbour, against 9.0 ns one at a time). Otherwise up to 48 neighbours by one-at-a-time
//! rejection (a repeated position is drawn again), in blocks of 64 draws whose
//! positions are drawn first and the values gathered after; more by a partial
//! Fisher-Yates shuffle of a per-thread table of positions that is put back
//! after each draw. Both rejections give each draw the same law: uniform over
//! the ordered k-tuples of distinct other units.
//! O(R sum_i k_i) time, O(n) memory; units run in parallel. The p-value is (M + 1) / (R + 1) (Hope 1968) with M the draws
//! at least as extreme as the observed statistic: `greater` at least as
//! large, `less` at least as small, `two-sided` at least as far from the
//! exact conditional mean; sums within a few rounding errors of the observed
//! one count as ties (at least as extreme).
//!
//! Adjustments: Bonferroni (p m, capped at 1) and the false discovery rate
//! of Benjamini and Hochberg (1995): p_(k) m / k made monotone from the
//! largest p down, capped at 1; m counts the finite p-values. O(m log m).

use super::global::centred;
use super::permutation::{below, stream};
use super::Alternative;
use crate::csr::CsrRef;
use crate::error::{Error, Result, Units};
use crate::frame::{moderate, pow2_exponent, times_pow2};
use crate::guard::Guard;
use rand_core::Rng;
use rand_xoshiro::Xoshiro256PlusPlus;
use rayon::prelude::*;

/// Tag mixed into the seed of local tests, so that their streams differ
/// from those of a global test with the same seed.
const LOCAL: u64 = 0x6C6F_6361_6C5F_7374;
/// Up to this many neighbours a draw is taken by rejection.
const REJECTION_MAX: usize = 48;
/// Units per parallel task.
const CHUNK: usize = 64;

/// The generator of unit `unit` in a local test under `seed`.
pub fn unit_stream(seed: u64, unit: usize) -> Xoshiro256PlusPlus {
    stream(seed ^ LOCAL, unit as u64)
}

/// Conditional permutation results of every unit (NaN for units not tested).
#[derive(Debug, Clone, PartialEq)]
pub struct LocalPermutation {
    pub permutations: usize,
    /// draws at least as extreme as the observed statistic
    pub extreme: Vec<u32>,
    pub p_value: Vec<f64>,
    /// mean and standard deviation (ddof = 1) of the statistic over the draws
    pub mean: Vec<f64>,
    pub std: Vec<f64>,
    /// (observed - mean) / std
    pub z: Vec<f64>,
}

/// Local Moran's I of every unit.
#[derive(Debug, Clone, PartialEq)]
pub struct LocalMoran {
    pub statistic: Vec<f64>,
    pub expected: Vec<f64>,
    pub variance: Vec<f64>,
    pub z: Vec<f64>,
    /// standardized values z_i / sqrt(m2) and their spatial lag
    pub standardized: Vec<f64>,
    pub lag: Vec<f64>,
    /// 0 high-high, 1 low-low, 2 high-low, 3 low-high, -1 island
    pub quadrant: Vec<i8>,
    pub islands: Vec<usize>,
    pub kurtosis: f64,
    pub permutation: Option<LocalPermutation>,
}

/// Local Getis-Ord G_i or G_i* of every unit.
#[derive(Debug, Clone, PartialEq)]
pub struct LocalGetisOrd {
    pub star: bool,
    /// the ratio G_i = sum_j w_ij x_j / sum_j x_j
    pub statistic: Vec<f64>,
    pub expected: Vec<f64>,
    pub z: Vec<f64>,
    pub islands: Vec<usize>,
    pub permutation: Option<LocalPermutation>,
}

/// Sums of one unit's links to other units (a self-link is kept apart).
#[derive(Debug, Clone, Copy, Default)]
struct RowFacts {
    /// links to other units
    k: usize,
    /// W_i = sum_j w_ij and S1_i = sum_j w_ij^2 over j != i
    w_sum: f64,
    w2_sum: f64,
    /// sum_j w_ij v_j over j != i
    lag: f64,
    /// the stored w_ii, if any
    own: Option<f64>,
}

fn row_facts(w: CsrRef<'_>, v: &[f64]) -> Vec<RowFacts> {
    (0..w.n())
        .into_par_iter()
        .with_min_len(1 << 12)
        .map(|i| {
            let (cols, vals) = w.row(i);
            let mut f = RowFacts::default();
            for (&j, &x) in cols.iter().zip(vals) {
                if j as usize == i {
                    f.own = Some(x);
                } else {
                    f.k += 1;
                    f.w_sum += x;
                    f.w2_sum += x * x;
                    f.lag += x * v[j as usize];
                }
            }
            f
        })
        .collect()
}

/// What one unit's conditional test compares, in terms of its neighbour sum.
#[derive(Debug, Clone, Copy)]
struct UnitTest {
    /// sum_j w_ij v_j over the actual neighbours
    observed: f64,
    /// its exact mean under conditional permutation
    centre: f64,
    /// sign of d statistic / d sum: +1, -1, or 0 (the statistic cannot vary)
    sign: f64,
    /// statistic = scale * sum + offset, for the mean and spread of the draws
    scale: f64,
    offset: f64,
}

/// Per-thread scratch: the row's weights, drawn positions and, for many
/// neighbours, a table of all positions with the swaps to undo.
#[derive(Default)]
struct Scratch {
    wts: Vec<f64>,
    drawn: Vec<u32>,
    /// the positions of a block of draws, gathered after they are all drawn
    block: Vec<u32>,
    sums: Vec<f64>,
    swaps: Vec<u32>,
    table: Vec<u32>,
}

/// A unit's generator, handing out its 64-bit words whole or as two 32-bit halves.
struct Words {
    rng: Xoshiro256PlusPlus,
    word: u64,
    left: u8,
}

impl Words {
    fn new(rng: Xoshiro256PlusPlus) -> Self {
        Words { rng, word: 0, left: 0 }
    }

    #[inline]
    fn next32(&mut self) -> u32 {
        if self.left == 0 {
            self.word = self.rng.next_u64();
            self.left = 2;
        }
        self.left -= 1;
        let x = self.word as u32;
        self.word >>= 32;
        x
    }

    /// Unbiased integer in [0, bound), Lemire (2019) on 32-bit halves: one
    /// generator step gives two bounded integers.
    #[inline]
    fn below32(&mut self, bound: u32) -> u32 {
        let mut m = u64::from(self.next32()) * u64::from(bound);
        if (m as u32) < bound {
            let threshold = bound.wrapping_neg() % bound;
            while (m as u32) < threshold {
                m = u64::from(self.next32()) * u64::from(bound);
            }
        }
        (m >> 32) as u32
    }
}

/// One conditional draw for unit i: sum_m wts[m] v[j_m], the j_m distinct and != i.
#[inline]
fn draw_sum(words: &mut Words, i: usize, v: &[f64], s: &mut Scratch) -> f64 {
    let n = v.len();
    let others = (n - 1) as u64;
    let Scratch { wts, drawn, swaps, table, .. } = s;
    let mut sum = 0.0;
    if wts.len() <= REJECTION_MAX && others <= u64::from(u32::MAX) {
        drawn.clear();
        for &wm in wts.iter() {
            let j = loop {
                let u = words.below32(others as u32) as usize;
                let j = (u + usize::from(u >= i)) as u32;
                if !drawn.contains(&j) {
                    break j;
                }
            };
            drawn.push(j);
            sum += wm * v[j as usize];
        }
    } else {
        // partial Fisher-Yates over the other units (unit i moved to the end), then undone
        if table.len() != n {
            *table = (0..n as u32).collect();
        }
        swaps.clear();
        table.swap(i, n - 1);
        for (m, &wm) in wts.iter().enumerate() {
            let t = m + below(&mut words.rng, others - m as u64) as usize;
            table.swap(m, t);
            swaps.push(t as u32);
            sum += wm * v[table[m] as usize];
        }
        for m in (0..wts.len()).rev() {
            table.swap(m, swaps[m] as usize);
        }
        table.swap(i, n - 1);
    }
    sum
}

/// Draws per block: their positions are drawn first and the values gathered
/// after, in a loop without branches, so that many loads are in flight at once.
const BLOCK: usize = 64;

/// How one unit's draws are taken, fixed by its number of neighbours k and n.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Path {
    /// whole tuples of k positions, padded to 8, 16 or 32 lanes
    Tuple8,
    Tuple16,
    Tuple32,
    /// one position at a time, a repeated one drawn again
    Sequential,
    /// partial Fisher-Yates shuffle of a table of positions
    Shuffle,
}

impl Path {
    fn of(k: usize, n: usize) -> Self {
        let others = n as u64 - 1;
        if k > REJECTION_MAX || others > u64::from(u32::MAX) {
            return Path::Shuffle;
        }
        // a tuple is drawn again with probability about k (k - 1) / (2 (n - 1)): keep it below 1/32,
        // and leave room above the positions for the padding lanes
        let pairs = (k * k.saturating_sub(1) / 2) as u64;
        if 32 * pairs > others || others > u64::from(u32::MAX - 64) {
            return Path::Sequential;
        }
        match k {
            0..=8 => Path::Tuple8,
            9..=16 => Path::Tuple16,
            17..=32 => Path::Tuple32,
            _ => Path::Sequential,
        }
    }
}

/// True when two lanes of `a` hold the same position: every lane against the
/// lanes 1 to K / 2 further along (cyclically) covers every pair, in a fixed
/// number of comparisons without branches.
#[inline]
fn has_repeat<const K: usize>(a: &[u32; K]) -> bool {
    let mut repeat = false;
    for r in 1..=K / 2 {
        for l in 0..K {
            repeat |= a[l] == a[(l + r) % K];
        }
    }
    repeat
}

/// The neighbour sums of `b` draws of unit i by whole-tuple rejection, into
/// `s.sums`: the k positions of a draw come from k bounded integers (two from
/// each 64-bit word, Lemire's method on 32-bit halves), and the whole tuple is
/// drawn again when one integer falls in Lemire's rejection zone or two
/// positions coincide. Each accepted tuple is uniform over the ordered
/// k-tuples of distinct other units, the same law as one-at-a-time rejection.
fn tuple_sums<const K: usize>(rng: &mut Xoshiro256PlusPlus, i: usize, v: &[f64], b: usize, s: &mut Scratch) {
    let k = s.wts.len();
    debug_assert!(k <= K && K.is_multiple_of(2));
    let bound = (v.len() - 1) as u32;
    // 2^32 mod bound: a low half below it is rejected (Lemire 2019)
    let threshold = bound.wrapping_neg() % bound;
    let unit = i as u32;
    // lanes past k hold distinct values above every position, so they never match
    let mut a: [u32; K] = std::array::from_fn(|m| u32::MAX - m as u32);
    let place = |half: u32, bad: &mut bool| {
        let m = u64::from(half) * u64::from(bound);
        *bad |= (m as u32) < threshold;
        let j = (m >> 32) as u32;
        j + u32::from(j >= unit)
    };
    s.sums.clear();
    for _ in 0..b {
        loop {
            let mut bad = false;
            let mut m = 0;
            while m < k {
                let word = rng.next_u64();
                a[m] = place(word as u32, &mut bad);
                if m + 1 < k {
                    a[m + 1] = place((word >> 32) as u32, &mut bad);
                }
                m += 2;
            }
            if !(bad | has_repeat(&a)) {
                break;
            }
        }
        let mut sum = 0.0;
        for (&wm, &j) in s.wts.iter().zip(&a[..k]) {
            sum += wm * v[j as usize];
        }
        s.sums.push(sum);
    }
}

/// The neighbour sums of the draws whose positions are in `s.block`, into `s.sums`.
fn gather(v: &[f64], s: &mut Scratch) {
    s.sums.clear();
    for draw in s.block.chunks_exact(s.wts.len()) {
        let mut sum = 0.0;
        for (&wm, &j) in s.wts.iter().zip(draw) {
            sum += wm * v[j as usize];
        }
        s.sums.push(sum);
    }
}

/// The neighbour sums of the next `b` draws of unit i into `s.sums`: by
/// whole tuples when `path` says so, else the same bit for bit as `b` calls
/// of [`draw_sum`].
fn draw_block(words: &mut Words, path: Path, i: usize, v: &[f64], s: &mut Scratch, b: usize) {
    match path {
        Path::Tuple8 => return tuple_sums::<8>(&mut words.rng, i, v, b, s),
        Path::Tuple16 => return tuple_sums::<16>(&mut words.rng, i, v, b, s),
        Path::Tuple32 => return tuple_sums::<32>(&mut words.rng, i, v, b, s),
        Path::Sequential | Path::Shuffle => {}
    }
    let k = s.wts.len();
    let others = (v.len() - 1) as u64;
    s.sums.clear();
    if path == Path::Shuffle {
        for _ in 0..b {
            let x = draw_sum(words, i, v, s);
            s.sums.push(x);
        }
        return;
    }
    s.block.clear();
    for _ in 0..b {
        let start = s.block.len();
        for _ in 0..k {
            let j = loop {
                let u = words.below32(others as u32) as usize;
                let j = (u + usize::from(u >= i)) as u32;
                if !s.block[start..].contains(&j) {
                    break j;
                }
            };
            s.block.push(j);
        }
    }
    gather(v, s);
}

/// Settings of one permutation run.
#[derive(Debug, Clone, Copy)]
struct Run {
    permutations: usize,
    seed: u64,
    alt: Alternative,
    /// largest |v|, for the tolerance of ties
    vmax: f64,
}

/// Running count of extreme draws and sums of their deviations from the observed sum.
#[derive(Default)]
struct Tally {
    extreme: u32,
    sum_d: f64,
    sum_d2: f64,
}

impl Tally {
    /// Add the draws `sums`; `hit` says which are at least as extreme as the observed sum.
    #[inline]
    fn add(&mut self, sums: &[f64], observed: f64, hit: impl Fn(f64) -> bool) {
        for &x in sums {
            self.extreme += u32::from(hit(x));
            let d = x - observed;
            self.sum_d += d;
            self.sum_d2 += d * d;
        }
    }
}

/// R conditional draws of unit i: (extreme count, mean and std of the statistic, z).
fn unit_draws(i: usize, v: &[f64], t: UnitTest, run: Run, s: &mut Scratch) -> (u32, f64, f64, f64) {
    let mut words = Words::new(unit_stream(run.seed, i));
    let path = Path::of(s.wts.len(), v.len());
    let total: f64 = s.wts.iter().sum();
    // rounding of a sum of k products, with room to spare
    let tol = 4.0 * (s.wts.len() as f64 + 1.0) * f64::EPSILON * total * run.vmax;
    let far = (t.observed - t.centre).abs() - tol;
    let (obs, centre, sign) = (t.observed, t.centre, t.sign);
    let mut tally = Tally::default();
    let mut done = 0;
    while done < run.permutations {
        let b = BLOCK.min(run.permutations - done);
        done += b;
        draw_block(&mut words, path, i, v, s, b);
        // the statistic grows with the sum when sign > 0; with sign 0 it cannot vary
        match (run.alt, sign == 0.0) {
            (_, true) => tally.add(&s.sums, obs, |_| true),
            (Alternative::TwoSided, false) => tally.add(&s.sums, obs, |x| (x - centre).abs() >= far),
            (Alternative::Greater, false) => tally.add(&s.sums, obs, |x| sign * (x - obs) >= -tol),
            (Alternative::Less, false) => tally.add(&s.sums, obs, |x| sign * (x - obs) <= tol),
        }
    }
    let Tally { extreme, sum_d, sum_d2 } = tally;
    let r = run.permutations as f64;
    let mean_sum = t.observed + sum_d / r;
    let var_sum = ((sum_d2 - sum_d * sum_d / r) / (r - 1.0)).max(0.0);
    let mean = t.scale * mean_sum + t.offset;
    let std = t.scale.abs() * var_sum.sqrt();
    let observed = t.scale * t.observed + t.offset;
    let z = if std > 0.0 { (observed - mean) / std } else { f64::NAN };
    (extreme, mean, std, z)
}

/// Conditional permutation tests of every unit for which `test` gives one.
fn conditional<F>(w: CsrRef<'_>, v: &[f64], run: Run, guard: &Guard, test: F) -> Result<LocalPermutation>
where
    F: Fn(usize) -> Option<UnitTest> + Sync,
{
    let n = w.n();
    guard.reserve(n as f64 * 40.0, "keeping the local permutation results", "test fewer units at a time")?;
    let rows: Vec<Option<(u32, f64, f64, f64)>> = (0..n)
        .into_par_iter()
        .with_min_len(CHUNK)
        .map_init(Scratch::default, |s, i| {
            guard.check()?;
            Ok(test(i).map(|t| {
                let (cols, vals) = w.row(i);
                s.wts.clear();
                s.wts.extend(cols.iter().zip(vals).filter(|(&j, _)| j as usize != i).map(|(_, &x)| x));
                unit_draws(i, v, t, run, s)
            }))
        })
        .collect::<Result<_>>()?;
    let r = run.permutations as f64;
    let mut out = LocalPermutation {
        permutations: run.permutations,
        extreme: Vec::with_capacity(n),
        p_value: Vec::with_capacity(n),
        mean: Vec::with_capacity(n),
        std: Vec::with_capacity(n),
        z: Vec::with_capacity(n),
    };
    for row in rows {
        let (m, p, mean, std, z) = match row {
            Some((m, mean, std, z)) => (m, (m as f64 + 1.0) / (r + 1.0), mean, std, z),
            None => (0, f64::NAN, f64::NAN, f64::NAN, f64::NAN),
        };
        out.extreme.push(m);
        out.p_value.push(p);
        out.mean.push(mean);
        out.std.push(std);
        out.z.push(z);
    }
    Ok(out)
}

/// Common checks: enough units, permutations other than 1, no self-links where refused.
/// `what` names the statistic in a refusal of too few units, `self_what` in a refusal of self-links.
fn check(
    w: CsrRef<'_>,
    what: &'static str,
    self_what: &'static str,
    permutations: usize,
    self_links: bool,
) -> Result<()> {
    let n = w.n();
    if n < 3 {
        return Err(Error::TooFewUnits { what, need: 3, n });
    }
    if permutations == 1 {
        return Err(Error::UnknownOption {
            what: "number of permutations",
            name: "1".into(),
            options: "0 (no permutation test) or at least 2 (999 is usual)",
        });
    }
    if !self_links {
        let units = Units::find(n, |i| w.row(i).0.iter().any(|&j| j as usize == i));
        if !units.is_empty() {
            return Err(Error::SelfLinks { what: self_what, units });
        }
    }
    Ok(())
}

/// Local Moran's I of `x` under `w`, with a conditional permutation test
/// of `permutations` draws (none when 0).
///
/// ```
/// use vicino_core::{Csr, Guard, stats::{local::local_moran, Alternative}};
/// // a path 0-1-2-3 with alternating values: every unit is unlike its neighbours
/// let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0), (3, 1.0)], vec![(2, 1.0)]]);
/// let m = local_moran(w.view(), &[1.0, 0.0, 1.0, 0.0], 99, 1, Alternative::TwoSided, &Guard::unlimited()).unwrap();
/// assert!(m.statistic.iter().all(|&v| v < 0.0));
/// // sum_i I_i = S0 I, and I = -1 here with S0 = 6
/// assert!((m.statistic.iter().sum::<f64>() + 6.0).abs() < 1e-12);
/// ```
pub fn local_moran(
    w: CsrRef<'_>,
    x: &[f64],
    permutations: usize,
    seed: u64,
    alt: Alternative,
    guard: &Guard,
) -> Result<LocalMoran> {
    check(w, "local Moran's I with its variance", "local Moran's I", permutations, false)?;
    let n = w.n();
    let z = centred(w, x)?;
    let (moderated, e) = moderate(w);
    let w = moderated.as_ref().map_or(w, |m| m.view());
    let nf = n as f64;
    let m2 = z.iter().map(|v| v * v).sum::<f64>() / nf;
    let m4 = z.iter().map(|v| v.powi(4)).sum::<f64>() / nf;
    let b2 = m4 / (m2 * m2);
    let sd = m2.sqrt();
    let sum_z: f64 = z.iter().sum();
    let facts = row_facts(w, &z);
    let islands: Vec<usize> = (0..n).filter(|&i| facts[i].k == 0).collect();
    let nan = |f: &RowFacts, v: f64| if f.k == 0 { f64::NAN } else { v };
    let mut out = LocalMoran {
        statistic: Vec::with_capacity(n),
        expected: Vec::with_capacity(n),
        variance: Vec::with_capacity(n),
        z: Vec::with_capacity(n),
        standardized: z.iter().map(|v| v / sd).collect(),
        lag: Vec::with_capacity(n),
        quadrant: Vec::with_capacity(n),
        islands,
        kurtosis: b2,
        permutation: None,
    };
    for (i, f) in facts.iter().enumerate() {
        let (wi, w2) = (f.w_sum, f.w2_sum);
        let stat = z[i] * f.lag / m2;
        let expected = -wi / (nf - 1.0);
        let var = w2 * (nf - b2) / (nf - 1.0) + (wi * wi - w2) * (2.0 * b2 - nf) / ((nf - 1.0) * (nf - 2.0))
            - wi * wi / ((nf - 1.0) * (nf - 1.0));
        // a variance that is 0 up to rounding: the statistic cannot vary
        let zscore = if var > 1e-12 * (w2 + wi * wi) { (stat - expected) / var.sqrt() } else { f64::NAN };
        out.statistic.push(nan(f, times_pow2(stat, e)));
        out.expected.push(nan(f, times_pow2(expected, e)));
        out.variance.push(nan(f, times_pow2(var, 2 * e)));
        out.z.push(nan(f, zscore));
        out.lag.push(nan(f, times_pow2(f.lag / sd, e)));
        out.quadrant.push(if f.k == 0 { -1 } else { quadrant(z[i], f.lag) });
    }
    if permutations > 0 {
        let run = Run { permutations, seed, alt, vmax: z.iter().fold(0.0f64, |m, v| m.max(v.abs())) };
        out.permutation = Some(conditional(w, &z, run, guard, |i| {
            let f = &facts[i];
            (f.k > 0).then(|| UnitTest {
                observed: f.lag,
                centre: f.w_sum * (sum_z - z[i]) / (nf - 1.0),
                sign: if z[i] > 0.0 {
                    1.0
                } else if z[i] < 0.0 {
                    -1.0
                } else {
                    0.0
                },
                scale: times_pow2(z[i] / m2, e),
                offset: 0.0,
            })
        })?);
    }
    Ok(out)
}

/// 0 high-high, 1 low-low, 2 high-low, 3 low-high; a value at the mean (or
/// a lag of 0) counts as low.
fn quadrant(z: f64, lag: f64) -> i8 {
    match (z > 0.0, lag > 0.0) {
        (true, true) => 0,
        (false, false) => 1,
        (true, false) => 2,
        (false, true) => 3,
    }
}

/// Local Getis-Ord G_i (or G_i* when `star`) of `x` under `w`, with a
/// conditional permutation test of `permutations` draws (none when 0).
///
/// G_i refuses self-links; G_i* uses a stored w_ii and w_ii = 1 where none
/// is stored. The ratio G needs non-negative values (callers check); the
/// z-scores do not depend on the location or scale of the values.
///
/// ```
/// use vicino_core::{Csr, Guard, stats::{local::local_getis_ord, Alternative}};
/// // a path 0-1-2-3-4 with the high values at one end
/// let w = Csr::from_rows(vec![
///     vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0), (3, 1.0)], vec![(2, 1.0), (4, 1.0)], vec![(3, 1.0)],
/// ]);
/// let g = local_getis_ord(w.view(), &[9.0, 8.0, 1.0, 1.0, 0.0], false, 0, 1, Alternative::TwoSided, &Guard::unlimited()).unwrap();
/// assert!(g.z[0] > 0.0 && g.z[4] < 0.0);
/// assert!((g.statistic[0] - 8.0 / 10.0).abs() < 1e-15);
/// ```
pub fn local_getis_ord(
    w: CsrRef<'_>,
    x: &[f64],
    star: bool,
    permutations: usize,
    seed: u64,
    alt: Alternative,
    guard: &Guard,
) -> Result<LocalGetisOrd> {
    let what = if star { "G_i* with its variance" } else { "G_i with its variance" };
    check(w, what, "G_i (star=True counts each unit's own value)", permutations, star)?;
    let n = w.n();
    let z = centred(w, x)?;
    let (moderated, e) = moderate(w);
    let w = moderated.as_ref().map_or(w, |m| m.view());
    // the ratio from the values scaled by a power of two (exact), so that sums cannot overflow
    let ex = pow2_exponent(x.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(f64::MIN_POSITIVE));
    let xs: Vec<f64> = x.iter().map(|&v| times_pow2(v, -ex)).collect();
    let sum_x: f64 = xs.iter().sum();
    let nf = n as f64;
    let zbar = z.iter().sum::<f64>() / nf;
    let total_ss: f64 = z.iter().map(|v| (v - zbar) * (v - zbar)).sum();
    let facts = row_facts(w, &z);
    let lag_x = row_facts(w, &xs);
    let islands: Vec<usize> = (0..n).filter(|&i| facts[i].k == 0).collect();
    let default_own = times_pow2(1.0, -e);
    let mut out = LocalGetisOrd {
        star,
        statistic: Vec::with_capacity(n),
        expected: Vec::with_capacity(n),
        z: Vec::with_capacity(n),
        islands,
        permutation: None,
    };
    for (i, f) in facts.iter().enumerate() {
        if f.k == 0 {
            out.statistic.push(f64::NAN);
            out.expected.push(f64::NAN);
            out.z.push(f64::NAN);
            continue;
        }
        let d = z[i] - zbar;
        let (g, expected, num, var) = if star {
            let own = f.own.unwrap_or(default_own);
            let (wi, s1) = (f.w_sum + own, f.w2_sum + own * own);
            let g = (lag_x[i].lag + own * xs[i]) / sum_x;
            let num = f.lag + own * z[i] - wi * zbar;
            let var = total_ss / nf * (nf * s1 - wi * wi) / (nf - 1.0);
            (g, wi / nf, num, var)
        } else {
            let (wi, s1) = (f.w_sum, f.w2_sum);
            let g = lag_x[i].lag / (sum_x - xs[i]);
            // mean of the other values, and their variance from the total sum of squares
            let mean_i = zbar - d / (nf - 1.0);
            let s2_i = (total_ss - nf * d * d / (nf - 1.0)) / (nf - 1.0);
            let num = f.lag - wi * mean_i;
            let var = s2_i * ((nf - 1.0) * s1 - wi * wi) / (nf - 2.0);
            (g, wi / (nf - 1.0), num, var)
        };
        let scale2 = f.w2_sum * total_ss / nf;
        out.statistic.push(times_pow2(g, e));
        out.expected.push(times_pow2(expected, e));
        out.z.push(if var > 1e-12 * scale2 { num / var.sqrt() } else { f64::NAN });
    }
    if permutations > 0 {
        let run = Run { permutations, seed, alt, vmax: z.iter().fold(0.0f64, |m, v| m.max(v.abs())) };
        out.permutation = Some(conditional(w, &z, run, guard, |i| {
            let f = &facts[i];
            (f.k > 0).then(|| UnitTest {
                observed: f.lag,
                centre: f.w_sum * (zbar * nf - z[i]) / (nf - 1.0),
                sign: 1.0,
                // the permutation mean and spread are reported for the sum over the
                // neighbours (on the scale of z); only their z is used
                scale: 1.0,
                offset: 0.0,
            })
        })?);
    }
    Ok(out)
}

/// A multiple-testing adjustment of p-values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Adjustment {
    None,
    /// false discovery rate, Benjamini and Hochberg (1995)
    Fdr,
    Bonferroni,
}

impl Adjustment {
    /// Parse the public name.
    pub fn parse(name: &str) -> Result<Self> {
        match name {
            "none" => Ok(Self::None),
            "fdr" => Ok(Self::Fdr),
            "bonferroni" => Ok(Self::Bonferroni),
            _ => Err(Error::UnknownOption {
                what: "adjustment",
                name: name.to_string(),
                options: "\"none\", \"fdr\" (Benjamini-Hochberg) or \"bonferroni\"",
            }),
        }
    }
}

/// Adjusted p-values; NaN entries stay NaN and are not counted among the m tests.
///
/// ```
/// use vicino_core::stats::local::{adjust, Adjustment};
/// // Benjamini-Hochberg by hand: 0.01*4/1, 0.02*4/2, 0.03*4/3, 0.5*4/4
/// let p = adjust(&[0.03, 0.5, f64::NAN, 0.01, 0.02], Adjustment::Fdr);
/// assert_eq!(&p[..2], &[0.04, 0.5]);
/// assert!(p[2].is_nan());
/// assert_eq!(&p[3..], &[0.04, 0.04]);
/// ```
pub fn adjust(p: &[f64], how: Adjustment) -> Vec<f64> {
    let mut order: Vec<usize> = (0..p.len()).filter(|&i| p[i].is_finite()).collect();
    let m = order.len() as f64;
    match how {
        Adjustment::None => p.iter().map(|&v| if v.is_finite() { v } else { f64::NAN }).collect(),
        Adjustment::Bonferroni => p.iter().map(|&v| if v.is_finite() { (v * m).min(1.0) } else { f64::NAN }).collect(),
        Adjustment::Fdr => {
            order.sort_by(|&a, &b| p[a].total_cmp(&p[b]).then(a.cmp(&b)));
            let mut out = vec![f64::NAN; p.len()];
            let mut running = 1.0f64;
            for (rank, &i) in order.iter().enumerate().rev() {
                running = running.min(p[i] * m / (rank as f64 + 1.0));
                out[i] = running;
            }
            out
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Csr;

    /// A ring of n units, each linked to the next `k / 2` on either side.
    fn ring(n: usize, k: usize) -> Csr {
        Csr::from_rows(
            (0..n)
                .map(|i| {
                    let mut r: Vec<(usize, f64)> = (1..=k / 2)
                        .flat_map(|d| [((i + d) % n, 1.0 + d as f64), ((i + n - d) % n, 1.0 + d as f64)])
                        .collect();
                    r.sort_by_key(|e| e.0);
                    r
                })
                .collect(),
        )
    }

    fn values(n: usize) -> Vec<f64> {
        (0..n).map(|i| ((i * 37 % 101) as f64 * 0.61).sin() + (i as f64 / 9.0).cos()).collect()
    }

    #[test]
    fn thread_count_does_not_change_results() {
        // 60 neighbours take the Fisher-Yates path, 8 of 300 one-at-a-time rejection,
        // 8 of 2,000 whole tuples
        for (n, k) in [(300, 8), (300, 60), (2000, 8)] {
            let w = ring(n, k);
            let x = values(n);
            let run = |threads: usize| {
                let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
                pool.install(|| {
                    let m = local_moran(w.view(), &x, 199, 11, Alternative::TwoSided, &Guard::unlimited()).unwrap();
                    let g = local_getis_ord(w.view(), &x, true, 199, 11, Alternative::Greater, &Guard::unlimited())
                        .unwrap();
                    (m.permutation.unwrap(), g.permutation.unwrap())
                })
            };
            assert_eq!(run(1), run(3));
        }
    }

    #[test]
    fn halves_are_uniform() {
        // 60,000 integers below 3 (two per generator step): about 20,000 each, sd about 115
        let mut words = Words::new(unit_stream(1, 2));
        let mut counts = [0i64; 3];
        for _ in 0..60_000 {
            counts[words.below32(3) as usize] += 1;
        }
        assert!(counts.iter().all(|&c| (c - 20_000).abs() < 600), "{counts:?}");
    }

    #[test]
    fn rejection_draws_are_distinct_and_exclude_the_unit() {
        let v = vec![0.0; 12];
        let mut s = Scratch { wts: vec![1.0; 5], ..Scratch::default() };
        let mut words = Words::new(unit_stream(3, 7));
        for _ in 0..500 {
            draw_sum(&mut words, 7, &v, &mut s);
            let mut p = s.drawn.clone();
            p.sort_unstable();
            p.dedup();
            assert_eq!(p.len(), 5);
            assert!(!p.contains(&7) && p.iter().all(|&j| j < 12));
        }
    }

    #[test]
    fn paths_by_neighbours_and_units() {
        assert_eq!(Path::of(8, 100_000), Path::Tuple8);
        assert_eq!(Path::of(12, 100_000), Path::Tuple16);
        assert_eq!(Path::of(30, 100_000), Path::Tuple32);
        assert_eq!(Path::of(40, 100_000), Path::Sequential);
        assert_eq!(Path::of(8, 300), Path::Sequential);
        assert_eq!(Path::of(49, 100_000), Path::Shuffle);
    }

    #[test]
    fn tuple_draws_are_distinct_exclude_the_unit_and_are_uniform() {
        // distinct powers of two as values and unit weights: the sum identifies the
        // set drawn, exactly (every sum is below 2^53)
        fn check<const K: usize>(k: usize) {
            let (n, unit) = (40, 11);
            let v: Vec<f64> = (0..n).map(|j| 2f64.powi(j)).collect();
            let mut s = Scratch { wts: vec![1.0; k], ..Scratch::default() };
            let mut words = Words::new(unit_stream(5, unit));
            let mut seen = vec![0u32; n as usize];
            let draws = 2000;
            for _ in 0..draws / BLOCK {
                tuple_sums::<K>(&mut words.rng, unit, &v, BLOCK, &mut s);
                for &x in &s.sums {
                    let bits = x as u64;
                    assert_eq!(bits.count_ones() as usize, k);
                    assert_eq!(bits & (1 << unit), 0);
                    (0..n as usize).filter(|&j| bits >> j & 1 == 1).for_each(|j| seen[j] += 1);
                }
            }
            // each other unit is drawn with probability k / (n - 1) (sampling without
            // replacement, common practice): a binomial count, within 5 standard deviations
            let total = (draws / BLOCK * BLOCK) as f64;
            let p = k as f64 / (n - 1) as f64;
            let (mean, sd) = (total * p, (total * p * (1.0 - p)).sqrt());
            for (j, &c) in seen.iter().enumerate().filter(|&(j, _)| j != unit) {
                assert!((c as f64 - mean).abs() < 5.0 * sd, "unit {j}: {c} vs {mean}");
            }
        }
        check::<8>(1);
        check::<8>(7);
        check::<16>(12);
        check::<32>(25);
    }

    #[test]
    fn repeats_are_found_in_any_lanes() {
        let mut a: [u32; 8] = std::array::from_fn(|m| m as u32 * 3);
        assert!(!has_repeat(&a));
        for x in 0..8 {
            for y in 0..8 {
                if x != y {
                    let mut b = a;
                    b[x] = b[y];
                    assert!(has_repeat(&b), "{x} {y}");
                }
            }
        }
        a[7] = u32::MAX;
        assert!(!has_repeat(&a));
    }

    #[test]
    fn fisher_yates_draws_are_distinct() {
        // with distinct powers of two as values and unit weights, the sum
        // identifies the set drawn (exactly: every sum is below 2^53):
        // 50 distinct units other than unit 5
        let n = 52;
        let v: Vec<f64> = (0..n).map(|j| 2f64.powi(j)).collect();
        let mut s = Scratch { wts: vec![1.0; 50], ..Scratch::default() };
        let mut words = Words::new(unit_stream(9, 5));
        for _ in 0..100 {
            let sum = draw_sum(&mut words, 5, &v, &mut s);
            let bits = sum as u64;
            assert_eq!(bits.count_ones(), 50);
            assert_eq!(bits & (1 << 5), 0);
            // the table is put back after each draw
            assert!(s.table.iter().enumerate().all(|(a, &b)| a as u32 == b));
        }
    }

    #[test]
    fn adjustments_by_hand() {
        let p = [0.01, 0.04, 0.03, 0.2];
        // Bonferroni: p m capped at 1 (common practice)
        assert_eq!(adjust(&p, Adjustment::Bonferroni), vec![0.04, 0.16, 0.12, 0.8]);
        // Benjamini and Hochberg (1995): sorted 0.01, 0.03, 0.04, 0.2 -> 0.04, 0.06, 0.0533, 0.2,
        // made monotone from the top: 0.04, 0.0533, 0.0533, 0.2
        let b = adjust(&p, Adjustment::Fdr);
        let want = [0.04, 0.04 * 4.0 / 3.0, 0.04 * 4.0 / 3.0, 0.2];
        for (a, w) in b.iter().zip(want) {
            assert!((a - w).abs() < 1e-15, "{b:?}");
        }
        assert!(Adjustment::parse("holm").is_err());
    }

    #[test]
    fn islands_are_nan_and_refusals() {
        let w = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0)], vec![], vec![(4, 1.0)], vec![(3, 1.0)]]);
        let x = [1.0, 2.0, 3.0, 4.0, 6.0];
        let m = local_moran(w.view(), &x, 9, 0, Alternative::TwoSided, &Guard::unlimited()).unwrap();
        assert_eq!(m.islands, vec![2]);
        assert!(m.statistic[2].is_nan() && m.quadrant[2] == -1);
        assert!(m.permutation.unwrap().p_value[2].is_nan());
        let selfish = Csr::from_rows(vec![vec![(0, 1.0), (1, 1.0)], vec![(0, 1.0)], vec![(1, 1.0)]]);
        assert!(matches!(
            local_moran(selfish.view(), &[1.0, 2.0, 4.0], 0, 0, Alternative::TwoSided, &Guard::unlimited()),
            Err(Error::SelfLinks { .. })
        ));
        assert!(local_getis_ord(
            selfish.view(),
            &[1.0, 2.0, 4.0],
            true,
            0,
            0,
            Alternative::TwoSided,
            &Guard::unlimited()
        )
        .is_ok());
        let two = Csr::from_rows(vec![vec![(1, 1.0)], vec![(0, 1.0)]]);
        assert!(matches!(
            local_moran(two.view(), &[1.0, 2.0], 0, 0, Alternative::TwoSided, &Guard::unlimited()),
            Err(Error::TooFewUnits { .. })
        ));
    }
}
