//! Reading and writing line-oriented numeric text in parallel, shared by the
//! Matrix Market and triplet formats.
//!
//! Reading: the file is read whole (its size is checked against the memory
//! budget first) and cut into chunks at line boundaries; the newlines of each
//! chunk are counted (memchr), which gives every chunk its own stretch of the
//! output arrays, and the chunks are parsed in parallel straight into them:
//! rows, columns as CSR indices, values as CSR data. A line `i j [w]` is read
//! in one pass (eight digits at a time); anything unusual on a line is read
//! again field by field, which also words the error. Entries in canonical
//! order, as most writers write them, then are the matrix (only the row
//! pointers are counted); a symmetric file that stores one triangle in order
//! is completed by a transpose; any other order goes through a counting sort.
//! Line numbers are counted only for messages. Writing: blocks of rows are
//! formatted in parallel into their own buffers and written in order. Floats
//! are written in the shortest form that reads back to the same binary64 value
//! (exact round trips), and parsed with correct rounding: up to 15 digits by
//! one exact division (Clinger 1990), longer ones by the Eisel-Lemire
//! algorithm (Lemire 2021, `fast-float2`). O(bytes).

use crate::csr::{build_rows, Csr, CsrRef, Parts, PARALLEL_MIN_NNZ};
use crate::error::{Error, Result};
use crate::guard::Guard;
use rayon::prelude::*;
use std::io::Write;

/// One stored entry of a text file: 0-based row and column, and value.
/// (Line numbers are found again from the text only when a message needs
/// one: see [`Entries::line_of`].)
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Entry {
    pub row: u32,
    pub col: u32,
    pub value: f64,
}

/// Where a read failed: the file and line, for the message.
pub fn bad(path: &str, line: u64, reason: impl Into<String>) -> Error {
    Error::BadFile { path: path.to_string(), line, reason: reason.into() }
}

/// The whole file, after checking its size against the budget.
pub fn read_file(path: &str, guard: &Guard) -> Result<Vec<u8>> {
    let io = |e: std::io::Error| Error::FileAccess { path: path.to_string(), reason: e.to_string() };
    let size = std::fs::metadata(path).map_err(io)?.len();
    // the text, and about as much again for the parsed entries
    guard.reserve(2.0 * size as f64, "reading this file", "split the matrix, or read it on a larger machine")?;
    std::fs::read(path).map_err(io)
}
/// The lines of `text` from byte `from` on, as chunks of whole lines, and
/// the 1-based line number at `from`. Line numbers of later chunks are
/// counted only when a message needs one ([`Chunks::first_line`]).
pub struct Chunks<'t> {
    pieces: Vec<&'t [u8]>,
    first_line: u64,
}

impl Chunks<'_> {
    /// The 1-based number of the first line of chunk `c`.
    pub fn first_line(&self, c: usize) -> u64 {
        self.first_line + self.pieces[..c].iter().map(|p| memchr::memchr_iter(b'\n', p).count() as u64).sum::<u64>()
    }

    /// `parse(lines)` of every chunk, in parallel, in file order; `parse`
    /// numbers lines from 0 within its chunk, and a [`Error::BadFile`] it
    /// returns is renumbered to the line in the file.
    pub fn parse<T: Send>(
        &self,
        guard: &Guard,
        parse: impl Fn(&mut dyn Iterator<Item = &[u8]>) -> Result<Vec<T>> + Sync,
    ) -> Result<Vec<Vec<T>>> {
        let parsed: Vec<Result<Vec<T>>> = self
            .pieces
            .par_iter()
            .map(|bytes| {
                guard.check()?;
                parse(&mut lines(bytes))
            })
            .collect();
        let mut out = Vec::with_capacity(parsed.len());
        for (c, p) in parsed.into_iter().enumerate() {
            match p {
                Ok(v) => out.push(v),
                Err(Error::BadFile { path, line, reason }) => {
                    return Err(Error::BadFile { path, line: self.first_line(c) + line, reason })
                }
                Err(e) => return Err(e),
            }
        }
        Ok(out)
    }
}

/// Cut the lines of `text` from byte `from` on into chunks for parallel parsing.
pub fn chunks(text: &[u8], from: usize, first_line: u64) -> Chunks<'_> {
    let body = &text[from..];
    let target = (body.len() / (4 * rayon::current_num_threads().max(1))).max(1 << 16);
    let mut pieces = Vec::new();
    let mut at = 0;
    while at < body.len() {
        let end = (at + target).min(body.len());
        let end = match memchr::memchr(b'\n', &body[end - 1..]) {
            Some(p) => end + p,
            None => body.len(),
        };
        pieces.push(&body[at..end]);
        at = end;
    }
    Chunks { pieces, first_line }
}

/// The lines of a chunk (without their `\n`, nor a `\r` before it).
fn lines(bytes: &[u8]) -> impl Iterator<Item = &[u8]> {
    let mut at = 0;
    std::iter::from_fn(move || {
        if at >= bytes.len() {
            return None;
        }
        let end = memchr::memchr(b'\n', &bytes[at..]).map_or(bytes.len(), |p| at + p);
        let line = &bytes[at..end];
        at = end + 1;
        Some(line.strip_suffix(b"\r").unwrap_or(line))
    })
}

/// The whitespace-separated fields of a line, one at a time.
struct Fields<'a> {
    line: &'a [u8],
    at: usize,
}

impl<'a> Iterator for Fields<'a> {
    type Item = &'a [u8];
    #[inline]
    fn next(&mut self) -> Option<&'a [u8]> {
        let l = self.line;
        while self.at < l.len() && l[self.at].is_ascii_whitespace() {
            self.at += 1;
        }
        if self.at == l.len() {
            return None;
        }
        let start = self.at;
        while self.at < l.len() && !l[self.at].is_ascii_whitespace() {
            self.at += 1;
        }
        Some(&l[start..self.at])
    }
}

fn fields(line: &[u8]) -> Fields<'_> {
    Fields { line, at: 0 }
}

/// Digits as a whole number (None when not all digits, or too long).
#[inline]
fn digits(field: &[u8]) -> Option<u64> {
    if field.is_empty() || field.len() > 19 {
        return None;
    }
    let mut v = 0u64;
    for &b in field {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            return None;
        }
        v = v * 10 + d as u64;
    }
    Some(v)
}

/// A 1-based index field.
#[inline]
fn index(field: &[u8], path: &str, line: u64, n: u64, what: &str) -> Result<u32> {
    let text = || String::from_utf8_lossy(field).into_owned();
    let v =
        digits(field).ok_or_else(|| bad(path, line, format!("the {what} index {:?} is not a whole number", text())))?;
    if v == 0 {
        return Err(bad(path, line, format!("the {what} index is 0, but indices in this format start at 1")));
    }
    if v > n {
        return Err(bad(path, line, format!("the {what} index {v} is beyond the {n} units the file declares")));
    }
    Ok((v - 1) as u32)
}

/// Powers of ten that are exact in binary64.
const EXACT_TENS: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20,
    1e21, 1e22,
];

/// A plain decimal `digits.digits` whose digits, without the point, form a
/// whole number below 2^53: then m / 10^f is one correctly rounded division
/// of two exact numbers, so it equals the correctly rounded value of the
/// text (Clinger 1990, the fast path). None for anything else.
#[inline]
fn short_decimal(field: &[u8]) -> Option<f64> {
    let dot = field.iter().position(|&b| b == b'.')?;
    let (whole, frac) = (&field[..dot], &field[dot + 1..]);
    if frac.is_empty() || whole.len() + frac.len() > 15 {
        return None; // 15 digits: always below 2^53
    }
    let mut m = 0u64;
    for &b in whole.iter().chain(frac) {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            return None;
        }
        m = m * 10 + d as u64;
    }
    Some(m as f64 / EXACT_TENS[frac.len()])
}

/// A value field: a finite float, correctly rounded: whole numbers and
/// short decimals exactly by the paths above, anything else (17-digit
/// decimals, exponents, subnormals) by the Eisel-Lemire algorithm with its
/// big-number fallback (`fast-float2`, the algorithm of Rust's own parser,
/// without the UTF-8 check and on bytes).
#[inline]
fn value(field: &[u8], path: &str, line: u64) -> Result<f64> {
    if let Some(v) = digits(field) {
        if v < (1 << 53) {
            return Ok(v as f64); // whole numbers (binary weights) are exact
        }
    }
    if let Some(v) = short_decimal(field) {
        return Ok(v);
    }
    let text = || String::from_utf8_lossy(field).into_owned();
    let v: f64 =
        fast_float2::parse(field).map_err(|_| bad(path, line, format!("the weight {:?} is not a number", text())))?;
    if !v.is_finite() {
        return Err(bad(path, line, format!("the weight is {}; weights must be finite", text())));
    }
    Ok(v)
}

/// How entry lines look.
#[derive(Debug, Clone, Copy)]
pub struct Layout {
    /// units (rows and columns); indices beyond it are errors
    pub n: u64,
    /// whether each line carries a value after the two indices
    pub valued: bool,
    /// whether lines starting with `%` (or `#`) are comments to skip
    pub comments: bool,
}

/// The entries of a file in file order, parsed straight into the arrays the
/// matrix is made of (the columns as CSR indices, the values as CSR data),
/// beside the chunks of text they came from (kept to find the line of an
/// entry when a message needs it).
pub struct Entries<'t> {
    parts: Chunks<'t>,
    /// entries of each chunk
    counts: Vec<usize>,
    rows: Vec<u32>,
    cols: Vec<i64>,
    vals: Vec<f64>,
    /// whether (row, column) strictly increases and every value is > 0
    ordered: bool,
    comments: bool,
}

impl Entries<'_> {
    /// The number of entries.
    #[allow(clippy::len_without_is_empty)]
    pub fn len(&self) -> usize {
        self.vals.len()
    }

    /// The last entry.
    pub fn last(&self) -> Option<Entry> {
        self.len().checked_sub(1).map(|k| self.get(k))
    }

    /// Entry `k` (0-based, in file order).
    pub fn get(&self, k: usize) -> Entry {
        Entry { row: self.rows[k], col: self.cols[k] as u32, value: self.vals[k] }
    }

    /// Remove the last entry.
    pub fn pop(&mut self) {
        if self.vals.pop().is_some() {
            self.rows.pop();
            self.cols.pop();
            if let Some(c) = self.counts.iter_mut().rev().find(|c| **c > 0) {
                *c -= 1;
            }
            // dropping the last entry keeps the order, and may restore positivity
            self.ordered = self.ordered || self.in_order();
        }
    }

    /// Every entry, in file order.
    pub fn iter(&self) -> impl Iterator<Item = Entry> + '_ {
        (0..self.len()).map(|k| self.get(k))
    }

    /// Whether (row, column) strictly increases and every value is > 0 (a full pass).
    fn in_order(&self) -> bool {
        let key = |k: usize| (self.rows[k] as u64) << 32 | self.cols[k] as u64;
        (1..self.len()).into_par_iter().all(|k| key(k - 1) < key(k)) && self.vals.par_iter().all(|&v| v > 0.0)
    }

    /// The 1-based line of entry `k` (0-based, in file order), found by
    /// scanning its chunk again: O(chunk), for messages only.
    pub fn line_of(&self, mut k: usize) -> u64 {
        for (c, (&count, bytes)) in self.counts.iter().zip(&self.parts.pieces).enumerate() {
            if k >= count {
                k -= count;
                continue;
            }
            for (l, raw) in lines(bytes).enumerate() {
                match fields(raw).next() {
                    None => continue,
                    Some(a) if self.comments && (a[0] == b'%' || a[0] == b'#') => continue,
                    Some(_) if k == 0 => return self.parts.first_line(c) + l as u64,
                    Some(_) => k -= 1,
                }
            }
        }
        self.parts.first_line(self.parts.pieces.len())
    }

    /// The line of the last entry (or `otherwise` when there are none).
    pub fn last_line(&self, otherwise: u64) -> u64 {
        match self.len() {
            0 => otherwise,
            len => self.line_of(len - 1),
        }
    }
}

/// What parsing one chunk found: its entries, whether they are in strictly
/// increasing (row, column) order with positive values, and the first and
/// last (row, column) keys.
struct ChunkFacts {
    count: usize,
    ordered: bool,
    first: u64,
    last: u64,
}

/// Spaces and tabs from `at` on: the offset after them.
#[inline]
fn blanks(b: &[u8], mut at: usize) -> usize {
    while at < b.len() && (b[at] == b' ' || b[at] == b'\t') {
        at += 1;
    }
    at
}

/// Eight decimal digits at `at`, as a number (None unless all eight are
/// digits), by the SWAR method of Lemire's fast_float: one load, one check,
/// three multiplications.
#[inline]
fn eight_digits(b: &[u8], at: usize) -> Option<u64> {
    let v = u64::from_le_bytes(b.get(at..at + 8)?.try_into().ok()?);
    if (v.wrapping_add(0x4646_4646_4646_4646) | v.wrapping_sub(0x3030_3030_3030_3030)) & 0x8080_8080_8080_8080 != 0 {
        return None;
    }
    const MASK: u64 = 0x0000_00FF_0000_00FF;
    let v = v - 0x3030_3030_3030_3030;
    let v = v.wrapping_mul(10) + (v >> 8);
    Some(
        ((v & MASK)
            .wrapping_mul(100 + (1_000_000 << 32))
            .wrapping_add(((v >> 16) & MASK).wrapping_mul(1 + (10_000 << 32))))
            >> 32,
    )
}

/// Decimal digits from `at` on, appended to `v`: the value (wrapping past
/// 19 digits) and the offset after them.
#[inline]
fn run_of_digits(b: &[u8], mut at: usize, mut v: u64) -> (u64, usize) {
    while let Some(e) = eight_digits(b, at) {
        v = v.wrapping_mul(100_000_000).wrapping_add(e);
        at += 8;
    }
    while at < b.len() {
        let d = b[at].wrapping_sub(b'0');
        if d > 9 {
            break;
        }
        v = v.wrapping_mul(10).wrapping_add(d as u64);
        at += 1;
    }
    (v, at)
}

/// The common entry line `i j [w]` read in one pass from byte `at`: the
/// 1-based row and column, the value, and the offset after the line; None
/// for anything else (a blank, a comment, an unusual or bad line), which
/// [`slow_entry`] then reads and words the error for. Values: as [`value`]
/// reads them (up to 15 digits by Clinger's fast path, longer ones and
/// exponents by `fast-float2`).
#[inline]
fn quick_entry(b: &[u8], at: usize, valued: bool, n: u64) -> Option<(u32, u32, f64, usize)> {
    let a = blanks(b, at);
    let (r, p) = run_of_digits(b, a, 0);
    let c0 = blanks(b, p);
    if p == a || p - a > 10 || c0 == p {
        return None;
    }
    let (c, mut end) = run_of_digits(b, c0, 0);
    if end == c0 || end - c0 > 10 || r == 0 || c == 0 || r > n || c > n {
        return None;
    }
    let mut v = 1.0;
    if valued {
        let w = blanks(b, end);
        if w == end {
            return None;
        }
        let (m, q) = run_of_digits(b, w, 0);
        let (m, e, frac) = match b.get(q) {
            Some(b'.') => {
                let (m, e) = run_of_digits(b, q + 1, m);
                (m, e, e - q - 1)
            }
            _ => (m, q, 0),
        };
        let digits = q - w + frac;
        let ends = e == b.len() || matches!(b[e], b' ' | b'\t' | b'\r' | b'\n');
        if ends && (1..=15).contains(&digits) && (frac > 0 || b.get(q) != Some(&b'.')) {
            v = m as f64 / EXACT_TENS[frac]; // both exact: one correctly rounded division
            end = e;
        } else {
            let f = e + b[e..].iter().position(|x| x.is_ascii_whitespace()).unwrap_or(b.len() - e);
            v = fast_float2::parse(&b[w..f]).ok().filter(|v: &f64| v.is_finite())?;
            end = f;
        }
    }
    let mut p = blanks(b, end);
    if p < b.len() && b[p] == b'\r' {
        p += 1;
    }
    match b.get(p) {
        None => Some((r as u32, c as u32, v, p)),
        Some(b'\n') => Some((r as u32, c as u32, v, p + 1)),
        Some(_) => None,
    }
}

/// One entry line read field by field, with the reason when it is bad:
/// None for a blank or comment line, else the 0-based row and column and
/// the value.
fn slow_entry(raw: &[u8], path: &str, line: u64, layout: Layout) -> Result<Option<(u32, u32, f64)>> {
    let mut f = fields(raw);
    let Some(a) = f.next() else { return Ok(None) };
    if layout.comments && (a[0] == b'%' || a[0] == b'#') {
        return Ok(None);
    }
    let b = f.next().ok_or_else(|| bad(path, line, "the line has one field; an entry needs a row and a column"))?;
    let row = index(a, path, line, layout.n, "row")?;
    let col = index(b, path, line, layout.n, "column")?;
    let v = if layout.valued {
        let c = f.next().ok_or_else(|| bad(path, line, "the line has no weight after the row and column"))?;
        value(c, path, line)?
    } else {
        1.0
    };
    if f.next().is_some() {
        return Err(bad(path, line, "the line has more fields than a row, a column and a weight"));
    }
    Ok(Some((row, col, v)))
}

/// Parse the entry lines of one chunk into the slots given (one per line
/// at most), numbering lines from 0 within the chunk. Blank lines (and
/// comments) are skipped.
fn parse_chunk(
    path: &str,
    bytes: &[u8],
    layout: Layout,
    rows: &mut [u32],
    cols: &mut [i64],
    vals: &mut [f64],
) -> Result<ChunkFacts> {
    let mut facts = ChunkFacts { count: 0, ordered: true, first: 0, last: 0 };
    let (mut at, mut line) = (0, 0u64);
    while at < bytes.len() {
        let (row, col, v) = match quick_entry(bytes, at, layout.valued, layout.n) {
            Some((r, c, v, next)) => {
                at = next;
                (r - 1, c - 1, v)
            }
            None => {
                let end = memchr::memchr(b'\n', &bytes[at..]).map_or(bytes.len(), |p| at + p);
                let raw = &bytes[at..end];
                at = end + 1;
                match slow_entry(raw.strip_suffix(b"\r").unwrap_or(raw), path, line, layout)? {
                    Some(e) => e,
                    None => {
                        line += 1;
                        continue;
                    }
                }
            }
        };
        line += 1;
        let k = facts.count;
        let key = (row as u64) << 32 | col as u64;
        if k == 0 {
            facts.first = key;
        }
        facts.ordered &= (k == 0 || facts.last < key) & (v > 0.0);
        facts.last = key;
        rows[k] = row;
        cols[k] = col as i64;
        vals[k] = v;
        facts.count += 1;
    }
    Ok(facts)
}

/// Parse the entry lines of all chunks in parallel, each straight into its
/// own stretch of the output arrays (as many slots as the chunk has lines),
/// then close the gaps that blank and comment lines left.
pub fn parse_entries<'t>(path: &str, parts: Chunks<'t>, layout: Layout, guard: &Guard) -> Result<Entries<'t>> {
    let caps: Vec<usize> = parts
        .pieces
        .par_iter()
        .map(|p| memchr::memchr_iter(b'\n', p).count() + usize::from(!p.ends_with(b"\n")))
        .collect();
    let slots: usize = caps.iter().sum();
    guard.reserve(
        slots as f64 * 20.0,
        "the entries of this file",
        "split the matrix, or read it on a larger machine",
    )?;
    let (mut rows, mut cols, mut vals) = (vec![0u32; slots], vec![0i64; slots], vec![0f64; slots]);
    let mut work = Vec::with_capacity(caps.len());
    let (mut r, mut c, mut v) = (rows.as_mut_slice(), cols.as_mut_slice(), vals.as_mut_slice());
    for (&bytes, &cap) in parts.pieces.iter().zip(&caps) {
        let (r0, r1) = r.split_at_mut(cap);
        let (c0, c1) = c.split_at_mut(cap);
        let (v0, v1) = v.split_at_mut(cap);
        work.push((bytes, r0, c0, v0));
        (r, c, v) = (r1, c1, v1);
    }
    let parsed: Vec<Result<ChunkFacts>> = work
        .into_par_iter()
        .map(|(bytes, r, c, v)| {
            guard.check()?;
            parse_chunk(path, bytes, layout, r, c, v)
        })
        .collect();
    let mut facts = Vec::with_capacity(parsed.len());
    for (k, p) in parsed.into_iter().enumerate() {
        match p {
            Ok(f) => facts.push(f),
            Err(Error::BadFile { path, line, reason }) => {
                return Err(Error::BadFile { path, line: parts.first_line(k) + line, reason })
            }
            Err(e) => return Err(e),
        }
    }
    // close the gaps (none in files without blank or comment lines among the entries)
    let mut at = 0;
    let mut start = 0;
    for (f, &cap) in facts.iter().zip(&caps) {
        if at != start {
            rows.copy_within(start..start + f.count, at);
            cols.copy_within(start..start + f.count, at);
            vals.copy_within(start..start + f.count, at);
        }
        at += f.count;
        start += cap;
    }
    rows.truncate(at);
    cols.truncate(at);
    vals.truncate(at);
    let filled: Vec<&ChunkFacts> = facts.iter().filter(|f| f.count > 0).collect();
    let ordered = filled.iter().all(|f| f.ordered) && filled.windows(2).all(|p| p[0].last < p[1].first);
    let counts = facts.iter().map(|f| f.count).collect();
    Ok(Entries { parts, counts, rows, cols, vals, ordered, comments: layout.comments })
}

/// The row pointers of entries sorted by row.
fn row_pointers(n: usize, rows: &[u32]) -> Vec<i64> {
    let mut indptr = vec![0i64; n + 1];
    for &r in rows {
        indptr[r as usize + 1] += 1;
    }
    for r in 0..n {
        indptr[r + 1] += indptr[r];
    }
    indptr
}

/// Which triangle every entry of ordered entries lies in: Some(true) for
/// the lower one (column <= row), Some(false) for the upper one, None when
/// both are used.
fn triangle(entries: &Entries<'_>) -> Option<bool> {
    let lower = entries.rows.par_iter().zip(&entries.cols).all(|(&r, &c)| c <= r as i64);
    let upper = || entries.rows.par_iter().zip(&entries.cols).all(|(&r, &c)| c >= r as i64);
    if lower {
        Some(true)
    } else if upper() {
        Some(false)
    } else {
        None
    }
}

/// Canonical CSR of n units from entries, refusing duplicate entries (both
/// lines named) and weights that are not positive. With `mirror`, each
/// off-diagonal entry (i, j) also stands for (j, i) (a symmetric file that
/// stores one triangle). Entries already in canonical order (as vicino and
/// most writers write them) become the matrix without a copy; a symmetric
/// file that stores one triangle in order is completed by a transpose, its
/// rows joined (no sort, no search for duplicates: the order rules them out).
pub fn assemble(path: &str, n: usize, entries: Entries<'_>, mirror: bool, guard: &Guard) -> Result<Parts<f64>> {
    if entries.ordered && !mirror {
        guard.reserve(n as f64 * 8.0, "the matrix in this file", "split the matrix")?;
        let indptr = row_pointers(n, &entries.rows);
        return Ok((indptr, entries.cols, entries.vals));
    }
    if entries.ordered {
        if let Some(lower) = triangle(&entries) {
            return mirrored(n, entries, lower, guard);
        }
    }
    scattered(path, n, &entries, mirror, guard)
}

/// The full matrix of ordered entries that all lie in one triangle (`lower`
/// or upper): row i is its stored row joined with row i of the transpose,
/// the diagonal taken once.
fn mirrored(n: usize, entries: Entries<'_>, lower: bool, guard: &Guard) -> Result<Parts<f64>> {
    guard.reserve(entries.len() as f64 * 48.0, "the matrix in this file", "split the matrix")?;
    let indptr = row_pointers(n, &entries.rows);
    let stored = Csr::from_parts(n, (indptr, entries.cols, entries.vals));
    let s = stored.view();
    let t = s.transpose();
    let tv = t.view();
    guard.check()?;
    build_rows(
        n,
        None,
        s.nnz() >= PARALLEL_MIN_NNZ,
        || (),
        |_, i, cols, vals| {
            let (stored, mirror) = (s.row(i), tv.row(i));
            let mut push = |(c, v): (&[i64], &[f64]), skip_diagonal: bool| {
                for (&c, &v) in c.iter().zip(v) {
                    if !(skip_diagonal && c == i as i64) {
                        cols.push(c);
                        vals.push(v);
                    }
                }
            };
            // lower: the stored row ends at the diagonal and the mirrored one starts there; upper: the other way round
            if lower {
                push(stored, false);
                push(mirror, true);
            } else {
                push(mirror, true);
                push(stored, false);
            }
            Ok(())
        },
    )
}

/// Canonical CSR of entries in any order: a counting sort by row, then each
/// row sorted and checked for duplicates and weights that are not positive.
fn scattered(path: &str, n: usize, entries: &Entries<'_>, mirror: bool, guard: &Guard) -> Result<Parts<f64>> {
    let (rows, cols) = (&entries.rows, &entries.cols);
    // bucket the entries by row (counting sort), then sort each row
    let mut count = vec![0usize; n + 1];
    let each = |k: usize, f: &mut dyn FnMut(u32, u32)| {
        let (r, c) = (rows[k], cols[k] as u32);
        f(r, c);
        if mirror && r != c {
            f(c, r);
        }
    };
    for k in 0..entries.len() {
        each(k, &mut |r, _| count[r as usize + 1] += 1);
    }
    for r in 0..n {
        count[r + 1] += count[r];
    }
    guard.reserve(count[n] as f64 * 40.0, "the matrix in this file", "split the matrix")?;
    let mut slot = count.clone();
    let mut bucket = vec![(0u32, 0u32); count[n]]; // (column, entry index)
    for k in 0..entries.len() {
        each(k, &mut |r, c| {
            bucket[slot[r as usize]] = (c, k as u32);
            slot[r as usize] += 1;
        });
    }
    guard.check()?;
    build_rows(
        n,
        None,
        count[n] >= PARALLEL_MIN_NNZ,
        Vec::new,
        |row: &mut Vec<(u32, u32)>, i, cols, vals: &mut Vec<f64>| {
            row.clear();
            row.extend_from_slice(&bucket[count[i]..count[i + 1]]);
            row.sort_unstable();
            for (p, &(c, k)) in row.iter().enumerate() {
                let value = entries.vals[k as usize];
                if p > 0 && row[p - 1].0 == c {
                    let (a, b) = (entries.line_of(row[p - 1].1 as usize), entries.line_of(k as usize));
                    return Err(bad(
                        path,
                        a.max(b),
                        format!(
                            "a second entry for row {}, column {} (the first is on line {}); each link must appear once",
                            i + 1,
                            c + 1,
                            a.min(b)
                        ),
                    ));
                }
                if !(value > 0.0) {
                    return Err(bad(
                        path,
                        entries.line_of(k as usize),
                        format!(
                            "the weight is {value}; stored weights must be > 0 (a zero is no link: leave the line out)"
                        ),
                    ));
                }
                cols.push(c as i64);
                vals.push(value);
            }
            Ok(())
        },
    )
}

/// Append a whole number in decimal.
#[inline]
pub fn push_u64(out: &mut Vec<u8>, mut v: u64) {
    let mut buf = [0u8; 20];
    let mut at = buf.len();
    loop {
        at -= 1;
        buf[at] = b'0' + (v % 10) as u8;
        v /= 10;
        if v == 0 {
            break;
        }
    }
    out.extend_from_slice(&buf[at..]);
}

/// The text "i " (1-based) of row i, formatted once for all its entries.
pub struct RowPrefix {
    buf: [u8; 21],
    len: usize,
}

impl RowPrefix {
    #[inline]
    pub fn new(i: usize) -> Self {
        let mut digits = [0u8; 20];
        let (mut at, mut v) = (digits.len(), i as u64 + 1);
        loop {
            at -= 1;
            digits[at] = b'0' + (v % 10) as u8;
            v /= 10;
            if v == 0 {
                break;
            }
        }
        let len = digits.len() - at;
        let mut buf = [b' '; 21];
        buf[..len].copy_from_slice(&digits[at..]);
        RowPrefix { buf, len: len + 1 }
    }

    /// Append "i j " for the entry at column j (0-based).
    #[inline]
    pub fn push_entry(&self, out: &mut Vec<u8>, j: usize) {
        out.extend_from_slice(&self.buf[..self.len]);
        push_u64(out, j as u64 + 1);
        out.push(b' ');
    }
}

/// Append a float in the shortest form that reads back exactly (Ryu;
/// whole numbers without a trailing ".0").
#[inline]
pub fn push_f64(out: &mut Vec<u8>, v: f64) {
    if v == v.trunc() && v.abs() < 1e15 {
        push_u64_signed(out, v);
        return;
    }
    let mut buf = ryu::Buffer::new();
    out.extend_from_slice(buf.format_finite(v).as_bytes());
}

fn push_u64_signed(out: &mut Vec<u8>, v: f64) {
    if v < 0.0 {
        out.push(b'-');
    }
    push_u64(out, v.abs() as u64);
}

/// Write `header`, then the lines that `line(i, w, out)` makes for each row
/// i of `w` (formatted in parallel by blocks of rows), then `footer`, to
/// `path`.
pub fn write_rows(
    path: &str,
    header: &str,
    w: CsrRef<'_>,
    footer: &str,
    guard: &Guard,
    line: impl Fn(usize, &mut Vec<u8>) + Sync,
) -> Result<()> {
    let io = |e: std::io::Error| Error::FileAccess { path: path.to_string(), reason: e.to_string() };
    let file = std::fs::File::create(path).map_err(io)?;
    let mut sink = std::io::BufWriter::with_capacity(1 << 20, file);
    sink.write_all(header.as_bytes()).map_err(io)?;
    const ROWS: usize = 1 << 14; // rows per block
    const WAVE: usize = 64; // blocks formatted at once, bounding the memory held
    let blocks = w.n().div_ceil(ROWS);
    for wave in (0..blocks).step_by(WAVE) {
        guard.check()?;
        let texts: Vec<Vec<u8>> = (wave..(wave + WAVE).min(blocks))
            .into_par_iter()
            .map(|b| {
                let mut out =
                    Vec::with_capacity(32 * (w.indptr()[((b + 1) * ROWS).min(w.n())] - w.indptr()[b * ROWS]) as usize);
                for i in b * ROWS..((b + 1) * ROWS).min(w.n()) {
                    line(i, &mut out);
                }
                out
            })
            .collect();
        for t in texts {
            sink.write_all(&t).map_err(io)?;
        }
    }
    sink.write_all(footer.as_bytes()).map_err(io)?;
    // (no fsync: the caller renames a complete file into place, which is what
    // protects the target from an interrupted write)
    sink.flush().map_err(io)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shortest_round_trip_floats() {
        for v in [1.0, 0.1, 1.0 / 3.0, 1e-300, 5e-324, 1.7976931348623157e308, 123456789.0, 2.5e-5] {
            let mut out = Vec::new();
            push_f64(&mut out, v);
            let back: f64 = std::str::from_utf8(&out).unwrap().parse().unwrap();
            assert_eq!(back.to_bits(), v.to_bits(), "{v}");
        }
        let mut out = Vec::new();
        push_f64(&mut out, 0.25);
        assert_eq!(out, b"0.25");
    }

    #[test]
    fn short_decimals_read_as_the_standard_parser_reads_them() {
        // Rust's str::parse (correctly rounded) as the reference
        let mut s = 7u64;
        for _ in 0..200_000 {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            let digits = (s >> 60) as usize % 15 + 1;
            let frac = 1 + (s >> 40) as usize % digits.max(1);
            let m = (s >> 11) % 10u64.pow(digits as u32);
            let text = format!("{m:0digits$}");
            let (w, f) = text.split_at(digits - frac.min(digits));
            let field = format!("{w}.{f}");
            let want: f64 = field.parse().unwrap();
            assert_eq!(short_decimal(field.as_bytes()).map(f64::to_bits), Some(want.to_bits()), "{field}");
        }
        for no in ["1e5", "-0.5", "1.", "12345678901234.56", "0.1234567890123456", "1.2.3", "nan"] {
            assert_eq!(short_decimal(no.as_bytes()), None, "{no}");
        }
    }

    /// Entries of `text` (one chunk per 64 KiB) read by the parser, as (row, column, value bits).
    fn read_back(text: &str, valued: bool) -> Result<Vec<(u32, u32, u64)>> {
        let parts = chunks(text.as_bytes(), 0, 1);
        let layout = Layout { n: 1000, valued, comments: true };
        let e = parse_entries("t", parts, layout, &Guard::unlimited())?;
        Ok(e.iter().map(|e| (e.row, e.col, e.value.to_bits())).collect())
    }

    #[test]
    fn long_decimals_subnormals_and_exponents_round_trip_exactly() {
        // Rust's str::parse (correctly rounded) as the reference, on 17 significant digits,
        // the shortest form (ryu), subnormals and exponents near both ends of the range
        let mut s = 11u64;
        let mut texts = Vec::new();
        for _ in 0..100_000 {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            let v = f64::from_bits(s >> 2); // positive, any exponent, subnormals included
            if !v.is_finite() || v == 0.0 {
                continue;
            }
            texts.push(format!("{v:.16e}"));
            texts.push(ryu::Buffer::new().format_finite(v).to_string());
            let u = (s >> 11) as f64 / (1u64 << 53) as f64; // [0, 1): 16 to 17 digit plain decimals
            texts.push(format!("{u:.17}"));
            texts.push(format!("{u}"));
        }
        texts.extend(
            ["5e-324", "2.2250738585072014e-308", "2.2250738585072011e-308", "1.7976931348623157e308", "1e-400"]
                .map(String::from),
        );
        texts.extend(
            ["9007199254740993", "0.1000000000000000055511151231257827", "1e22", "1.", ".5", "+0.5"].map(String::from),
        );
        let text: String =
            texts.iter().enumerate().map(|(k, t)| format!("{} {} {t}\n", k % 1000 + 1, k % 7 + 1)).collect();
        let got = read_back(&text, true).unwrap();
        assert_eq!(got.len(), texts.len());
        for ((r, c, bits), (k, t)) in got.iter().zip(texts.iter().enumerate()) {
            let want: f64 = t.parse().unwrap();
            assert_eq!((*r, *c, *bits), ((k % 1000) as u32, (k % 7) as u32, want.to_bits()), "{t}");
        }
    }

    #[test]
    fn eight_digits_at_once_match_digit_by_digit() {
        // digit-by-digit accumulation as the reference
        let mut s = 3u64;
        for _ in 0..100_000 {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            let mut b: Vec<u8> = (0..8).map(|k| b'0' + ((s >> (8 * k)) % 10) as u8).collect();
            let want = b.iter().fold(0u64, |v, &d| v * 10 + (d - b'0') as u64);
            assert_eq!(eight_digits(&b, 0), Some(want));
            b[(s >> 60) as usize % 8] = [b'/', b':', b' ', b'.', b'e', 0, 0xff, b'a'][(s >> 56) as usize % 8];
            assert_eq!(eight_digits(&b, 0), None, "{b:?}");
        }
        assert_eq!(eight_digits(b"1234567", 0), None);
    }

    #[test]
    fn unusual_lines_read_as_the_field_parser_reads_them() {
        // blanks, comments, tabs, CRLF, a missing final newline: the same entries either way
        let text = "% comment\n1 2 0.5\n\n  3\t4   1e-3  \r\n# other\n5 6 7\n\n\n8 9 0.25";
        let want = vec![
            (0, 1, 0.5f64.to_bits()),
            (2, 3, 1e-3f64.to_bits()),
            (4, 5, 7f64.to_bits()),
            (7, 8, 0.25f64.to_bits()),
        ];
        assert_eq!(read_back(text, true).unwrap(), want);
        assert_eq!(read_back("1 2\n3 4\n", false).unwrap(), vec![(0, 1, 1f64.to_bits()), (2, 3, 1f64.to_bits())]);
        // comments among many lines: the chunks' gaps are closed in order
        let many: String = (0..200_000)
            .map(|k| if k % 3 == 0 { "%\n".to_string() } else { format!("{} 1 {k}\n", k % 1000 + 1) })
            .collect();
        let got = read_back(&many, true).unwrap();
        let want: Vec<(u32, u32, u64)> =
            (0..200_000).filter(|k| k % 3 != 0).map(|k| ((k % 1000) as u32, 0, (k as f64).to_bits())).collect();
        assert_eq!(got, want);
        // bad lines keep their messages and line numbers
        for (bad_text, line, words) in [
            ("1 2 0.5\n1 x 0.5\n", 2, "not a whole number"),
            ("1 2 0.5\n\n1 2 0.5 9\n", 3, "more fields"),
            ("1 2 inf\n", 1, "finite"),
            ("1 2 1e999\n", 1, "finite"),
            ("1 2 0.5.5\n", 1, "not a number"),
            ("1 0 0.5\n", 1, "start at 1"),
            ("1 1001 0.5\n", 1, "beyond"),
            ("1 2\n", 1, "no weight"),
        ] {
            match read_back(bad_text, true) {
                Err(Error::BadFile { line: l, reason, .. }) => {
                    assert_eq!(l, line, "{bad_text:?}");
                    assert!(reason.contains(words), "{reason}");
                }
                other => panic!("{bad_text:?}: {other:?}"),
            }
        }
    }

    #[test]
    fn one_stored_triangle_is_mirrored_as_the_general_route_does() {
        // the counting-sort route (any order) as the reference for the ordered triangles
        let mut s = 5u64;
        let n = 300;
        let mut lower = Vec::new();
        for i in 0..n {
            for j in 0..=i {
                s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                if (s >> 59) < 3 {
                    lower.push((i, j, 1.0 + (s >> 40) as f64 / 64.0));
                }
            }
        }
        let text = |es: &[(usize, usize, f64)]| -> String {
            es.iter().map(|(i, j, v)| format!("{} {} {v}\n", i + 1, j + 1)).collect()
        };
        let mut upper: Vec<_> = lower.iter().map(|&(i, j, v)| (j, i, v)).collect();
        upper.sort_by_key(|e| (e.0, e.1));
        let mut shuffled = lower.clone();
        shuffled.reverse();
        let g = Guard::unlimited();
        let layout = Layout { n: n as u64, valued: true, comments: true };
        let read = |t: &str| {
            let e = parse_entries("t", chunks(t.as_bytes(), 0, 1), layout, &g).unwrap();
            (e.ordered, assemble("t", n, e, true, &g).unwrap())
        };
        let (o1, a) = read(&text(&lower));
        let (o2, b) = read(&text(&upper));
        let (o3, c) = read(&text(&shuffled));
        assert!(o1 && o2 && !o3);
        assert_eq!(a, c);
        assert_eq!(b, c);
        // and the full matrix is symmetric with each diagonal entry once
        let diag = lower.iter().filter(|e| e.0 == e.1).count();
        assert_eq!(c.1.len(), 2 * lower.len() - diag);
    }

    #[test]
    fn chunks_keep_line_numbers() {
        let text = b"a\nb\nc\n".repeat(50_000);
        let parts = chunks(&text, 0, 1);
        assert!(parts.pieces.len() > 1);
        // every chunk is whole lines, and starts on a line that is 1 more than the lines before it
        let mut expect = 1;
        for (c, bytes) in parts.pieces.iter().enumerate() {
            assert_eq!(parts.first_line(c), expect);
            assert!(bytes.ends_with(b"\n"));
            expect += bytes.iter().filter(|&&b| b == b'\n').count() as u64;
        }
        assert_eq!(expect, 150_001);
        assert_eq!(parts.pieces.concat(), text);
    }
}
