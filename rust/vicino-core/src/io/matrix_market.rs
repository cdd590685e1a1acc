//! Matrix Market exchange format (Boisvert, Pozo and Remington 1996, NIST
//! report NISTIR 5935): a banner line `%%MatrixMarket matrix coordinate
//! <field> <symmetry>`, comment lines starting with `%`, a size line
//! `rows columns entries`, then one entry `i j [value]` per line with
//! 1-based indices.
//!
//! Read: fields `real`, `integer` and `pattern` (a pattern file gives binary
//! weights: every stored entry weighs 1), symmetry `general` and
//! `symmetric` (the stored triangle is mirrored; either triangle is
//! accepted). Refused with a message naming the file and line: the `array`
//! (dense) layout, `complex` fields, `skew-symmetric` and `hermitian`
//! symmetry, non-square sizes, counts that differ from the entries found,
//! indices out of range or 0, duplicate entries, values that are not finite
//! positive numbers. Nothing is allocated from the declared count: memory
//! follows the entries actually present.
//!
//! Write: `real general`, or `real symmetric` with the lower triangle when
//! w_ij == w_ji for every pair; values in the shortest form that reads back
//! exactly. A comment line `%vicino <text>` carries what the caller wants
//! kept (ids, recipe). O(bytes), parallel over chunks of lines.

use super::text::{assemble, bad, chunks, parse_entries, push_f64, read_file, write_rows, Layout, RowPrefix};
use crate::csr::{Csr, CsrRef};
use crate::error::{Error, Result};
use crate::guard::Guard;

/// The prefix of the comment line that carries vicino's own record.
pub const RECORD: &str = "%vicino ";

/// What a weights file holds: the matrix, vicino's record if present, and
/// how the file stored it.
#[derive(Debug, Clone)]
pub struct WeightsFile {
    pub graph: Csr,
    pub record: Option<String>,
    pub symmetric: bool,
    pub pattern: bool,
}

/// The next line of `text` from byte `at`: (line without its end, offset after it).
fn next_line(text: &[u8], at: usize) -> Option<(&[u8], usize)> {
    if at >= text.len() {
        return None;
    }
    let end = text[at..].iter().position(|&b| b == b'\n').map_or(text.len(), |p| at + p);
    let line = &text[at..end];
    Some((line.strip_suffix(b"\r").unwrap_or(line), (end + 1).min(text.len() + 1)))
}

/// Read a Matrix Market file of a square weights matrix.
pub fn read(path: &str, guard: &Guard) -> Result<WeightsFile> {
    let text = read_file(path, guard)?;
    let Some((banner, mut at)) = next_line(&text, 0) else {
        return Err(bad(path, 1, "the file is empty; a Matrix Market file starts with %%MatrixMarket"));
    };
    let banner = String::from_utf8_lossy(banner).to_lowercase();
    let words: Vec<&str> = banner.split_whitespace().collect();
    if words.first() != Some(&"%%matrixmarket") {
        return Err(bad(
            path,
            1,
            "the first line is not a Matrix Market banner (%%MatrixMarket matrix coordinate ...)",
        ));
    }
    if words.len() != 5 || words[1] != "matrix" {
        return Err(bad(path, 1, "the banner must read %%MatrixMarket matrix <format> <field> <symmetry>"));
    }
    let (format, field, symmetry) = (words[2], words[3], words[4]);
    if format != "coordinate" {
        return Err(bad(
            path,
            1,
            format!("the {format:?} layout is not read (dense); write the matrix in coordinate layout"),
        ));
    }
    let pattern = match field {
        "real" | "integer" | "double" => false,
        "pattern" => true,
        other => {
            return Err(bad(
                path,
                1,
                format!("the field {other:?} is not read: weights are real numbers (real, integer or pattern)"),
            ))
        }
    };
    let symmetric = match symmetry {
        "general" => false,
        "symmetric" => true,
        other => {
            return Err(bad(
                path,
                1,
                format!("the symmetry {other:?} is not read: weights are general or symmetric (w_ij = w_ji)"),
            ))
        }
    };
    // comments, with vicino's record if present, then the size line
    let mut line_no = 1u64;
    let mut record = None;
    let size = loop {
        line_no += 1;
        let Some((line, next)) = next_line(&text, at) else {
            return Err(bad(path, line_no, "the file ends before the size line (rows columns entries)"));
        };
        at = next;
        let s = String::from_utf8_lossy(line);
        if let Some(rest) = s.strip_prefix(RECORD) {
            record = Some(rest.trim().to_string());
        } else if !s.starts_with('%') && !s.trim().is_empty() {
            break s.into_owned();
        }
    };
    let nums: Vec<u64> =
        size.split_whitespace().map(|t| t.parse::<u64>()).collect::<std::result::Result<_, _>>().map_err(|_| {
            bad(
                path,
                line_no,
                format!("the size line {:?} must be three whole numbers: rows columns entries", size.trim()),
            )
        })?;
    let [rows, cols, declared] = nums[..] else {
        return Err(bad(path, line_no, "the size line must hold three numbers: rows columns entries"));
    };
    if rows != cols {
        return Err(bad(path, line_no, format!("the matrix is {rows} x {cols}; weights need a square matrix")));
    }
    if rows == 0 {
        return Err(bad(path, line_no, "the matrix has no units"));
    }
    if rows >= u32::MAX as u64 {
        return Err(bad(path, line_no, format!("{rows} units is more than this reader handles (2^32 - 1)")));
    }
    guard.reserve(rows as f64 * 24.0, "the units this file declares", "check the size line of the file")?;
    let layout = Layout { n: rows, valued: !pattern, comments: true };
    let entries = parse_entries(path, chunks(&text, at.min(text.len()), line_no + 1), layout, guard)?;
    if entries.len() as u64 != declared {
        let last = entries.last_line(line_no);
        let why = if (entries.len() as u64) < declared { " (is it truncated?)" } else { "" };
        return Err(bad(
            path,
            last,
            format!("the size line declares {declared} entries but the file holds {}{why}", entries.len()),
        ));
    }
    let n = rows as usize;
    let (indptr, indices, data) = assemble(path, n, entries, symmetric, guard)?;
    Ok(WeightsFile { graph: Csr::from_parts(n, (indptr, indices, data)), record, symmetric, pattern })
}

/// Write `w` to `path` in Matrix Market coordinate real format, with the
/// `%vicino` record line; returns whether it was written as symmetric.
pub fn write(path: &str, w: CsrRef<'_>, record: &str, guard: &Guard) -> Result<bool> {
    if record.contains('\n') {
        return Err(Error::InvalidMatrix { reason: "the record of a Matrix Market file must be one line".into() });
    }
    let symmetric = w.is_symmetric();
    let nnz = if symmetric {
        (0..w.n()).map(|i| w.row(i).0.iter().filter(|&&j| j as usize <= i).count()).sum()
    } else {
        w.nnz()
    };
    let kind = if symmetric { "symmetric" } else { "general" };
    let header = format!("%%MatrixMarket matrix coordinate real {kind}\n{RECORD}{record}\n{n} {n} {nnz}\n", n = w.n());
    write_rows(path, &header, w, "", guard, |i, out| {
        let (cols, vals) = w.row(i);
        let row = RowPrefix::new(i);
        for (&j, &v) in cols.iter().zip(vals) {
            if symmetric && j as usize > i {
                break;
            }
            row.push_entry(out, j as usize);
            push_f64(out, v);
            out.push(b'\n');
        }
    })?;
    Ok(symmetric)
}
