//! Reading and writing line-oriented numeric text in parallel, shared by the
//! Matrix Market and triplet formats.
//!
//! Reading: the file is read whole (its size is checked against the memory
//! budget first), cut into chunks at line boundaries, the lines of each chunk
//! are counted, so that every entry knows its line number, and the chunks
//! are parsed in parallel into (row, column, value, line) entries. Writing:
//! blocks of rows are formatted in parallel into their own buffers and
//! written in order. Floats are written in the shortest form that reads back
//! to the same binary64 value (exact round trips), and parsed with correct
//! rounding (Rust's `str::parse`). O(bytes).

use crate::csr::{build_rows, CsrRef, Parts, PARALLEL_MIN_NNZ};
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

impl Entry {
    #[inline]
    fn key(&self) -> u64 {
        (self.row as u64) << 32 | self.col as u64
    }
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

/// A value field: a finite float.
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
    let text = std::str::from_utf8(field).unwrap_or("?");
    let v: f64 = text.parse().map_err(|_| bad(path, line, format!("the weight {text:?} is not a number")))?;
    if !v.is_finite() {
        return Err(bad(path, line, format!("the weight is {text}; weights must be finite")));
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

/// The entries of a file, chunk by chunk, beside the chunks of text they
/// came from (kept to find the line of an entry when a message needs it).
pub struct Entries<'t> {
    parts: Chunks<'t>,
    chunks: Vec<Vec<Entry>>,
    comments: bool,
}

impl Entries<'_> {
    /// The number of entries.
    #[allow(clippy::len_without_is_empty)]
    pub fn len(&self) -> usize {
        self.chunks.iter().map(Vec::len).sum()
    }

    /// The last entry.
    pub fn last(&self) -> Option<Entry> {
        self.chunks.iter().rev().find_map(|c| c.last().copied())
    }

    /// Remove the last entry.
    pub fn pop(&mut self) {
        if let Some(c) = self.chunks.iter_mut().rev().find(|c| !c.is_empty()) {
            c.pop();
        }
    }

    /// Every entry, in file order.
    pub fn iter(&self) -> impl Iterator<Item = &Entry> {
        self.chunks.iter().flatten()
    }

    /// The 1-based line of entry `k` (0-based, in file order), found by
    /// scanning its chunk again: O(chunk), for messages only.
    pub fn line_of(&self, mut k: usize) -> u64 {
        for (c, (entries, bytes)) in self.chunks.iter().zip(&self.parts.pieces).enumerate() {
            if k >= entries.len() {
                k -= entries.len();
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

/// Parse the entry lines of all chunks in parallel, in file order. Blank
/// lines are skipped.
pub fn parse_entries<'t>(path: &str, parts: Chunks<'t>, layout: Layout, guard: &Guard) -> Result<Entries<'t>> {
    let chunks = parts.parse(guard, |lines| {
        let mut out = Vec::new();
        for (k, raw) in lines.enumerate() {
            let mut f = fields(raw);
            let Some(a) = f.next() else { continue };
            if layout.comments && (a[0] == b'%' || a[0] == b'#') {
                continue;
            }
            let line = k as u64;
            let b =
                f.next().ok_or_else(|| bad(path, line, "the line has one field; an entry needs a row and a column"))?;
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
            out.push(Entry { row, col, value: v });
        }
        Ok(out)
    })?;
    Ok(Entries { parts, chunks, comments: layout.comments })
}

/// Whether the entries come in strictly increasing (row, column) order
/// with positive weights: then they are already canonical CSR.
fn canonical(entries: &Entries<'_>) -> bool {
    let inside = entries
        .chunks
        .par_iter()
        .all(|c| c.windows(2).all(|p| p[0].key() < p[1].key()) && c.iter().all(|e| e.value > 0.0));
    let firsts: Vec<(u64, u64)> =
        entries.chunks.iter().filter(|c| !c.is_empty()).map(|c| (c[0].key(), c[c.len() - 1].key())).collect();
    inside && firsts.windows(2).all(|p| p[0].1 < p[1].0)
}

/// Canonical CSR of n units from entries, refusing duplicate entries (both
/// lines named) and weights that are not positive. With `mirror`, each
/// off-diagonal entry (i, j) also stands for (j, i) (a symmetric file that
/// stores one triangle). Entries already in canonical order (as vicino and
/// most writers write them) are copied straight into place, in parallel.
pub fn assemble(path: &str, n: usize, entries: &Entries<'_>, mirror: bool, guard: &Guard) -> Result<Parts<f64>> {
    let total = entries.len();
    if !mirror && canonical(entries) {
        guard.reserve(total as f64 * 16.0 + n as f64 * 8.0, "the matrix in this file", "split the matrix")?;
        let mut indptr = vec![0i64; n + 1];
        for e in entries.iter() {
            indptr[e.row as usize + 1] += 1;
        }
        for r in 0..n {
            indptr[r + 1] += indptr[r];
        }
        let mut indices = vec![0i64; total];
        let mut data = vec![0f64; total];
        let mut slots = Vec::with_capacity(entries.chunks.len());
        let (mut ri, mut rd) = (indices.as_mut_slice(), data.as_mut_slice());
        for c in &entries.chunks {
            let (a, rest_i) = ri.split_at_mut(c.len());
            let (b, rest_d) = rd.split_at_mut(c.len());
            slots.push((c, a, b));
            (ri, rd) = (rest_i, rest_d);
        }
        slots.into_par_iter().for_each(|(c, a, b)| {
            for ((e, i), d) in c.iter().zip(a.iter_mut()).zip(b.iter_mut()) {
                *i = e.col as i64;
                *d = e.value;
            }
        });
        return Ok((indptr, indices, data));
    }
    let flat: Vec<Entry> = entries.iter().copied().collect();
    // bucket the entries by row (counting sort), then sort each row
    let mut count = vec![0usize; n + 1];
    let each = |e: &Entry, f: &mut dyn FnMut(u32, u32)| {
        f(e.row, e.col);
        if mirror && e.row != e.col {
            f(e.col, e.row);
        }
    };
    for e in &flat {
        each(e, &mut |r, _| count[r as usize + 1] += 1);
    }
    for r in 0..n {
        count[r + 1] += count[r];
    }
    guard.reserve(count[n] as f64 * 40.0, "the matrix in this file", "split the matrix")?;
    let mut slot = count.clone();
    let mut bucket = vec![(0u32, 0u32); count[n]]; // (column, entry index)
    for (k, e) in flat.iter().enumerate() {
        each(e, &mut |r, c| {
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
                let e = &flat[k as usize];
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
                if !(e.value > 0.0) {
                    return Err(bad(
                        path,
                        entries.line_of(k as usize),
                        format!(
                            "the weight is {}; stored weights must be > 0 (a zero is no link: leave the line out)",
                            e.value
                        ),
                    ));
                }
                cols.push(c as i64);
                vals.push(e.value);
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
