//! 1-based triplet text for MATLAB and GNU Octave: one line `i j w` per
//! link, read there with `spconvert(load(path))`. `spconvert` takes the size
//! of the matrix from the largest indices, so the file ends with the line
//! `n n 0`: it adds nothing, but keeps trailing empty rows and columns
//! (islands at the end) in the matrix. Lines starting with `%` are comments
//! for `load`; the first one, `% vicino <text>`, carries vicino's record.
//!
//! Read: entries as written above; the number of units is the largest index
//! (the closing `n n 0` line included); a zero weight is allowed only on the
//! last line (the closing line), anything else is refused with the file
//! and line named, as in [`super::matrix_market`]. O(bytes), parallel.

use super::matrix_market::WeightsFile;
use super::text::{assemble, bad, chunks, parse_entries, push_f64, read_file, write_rows, Layout, RowPrefix};
use crate::csr::{Csr, CsrRef};
use crate::error::{Error, Result};
use crate::guard::Guard;

/// The prefix of the comment line that carries vicino's own record.
pub const RECORD: &str = "% vicino ";

/// Read a triplet file.
pub fn read(path: &str, guard: &Guard) -> Result<WeightsFile> {
    let text = read_file(path, guard)?;
    if text.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(bad(path, 1, "the file is empty; a triplet file holds lines \"i j w\""));
    }
    // the record, from the leading comment lines
    let mut record = None;
    for line in text.split(|&b| b == b'\n') {
        let s = String::from_utf8_lossy(line);
        let s = s.trim_end();
        if let Some(rest) = s.strip_prefix(RECORD) {
            record = Some(rest.trim().to_string());
            break;
        }
        if !(s.starts_with('%') || s.starts_with('#') || s.is_empty()) {
            break;
        }
    }
    let layout = Layout { n: u32::MAX as u64 - 1, valued: true, comments: true };
    let mut entries = parse_entries(path, chunks(&text, 0, 1), layout, guard)?;
    let Some(last) = entries.last() else {
        return Err(bad(path, 1, "the file holds no entries \"i j w\""));
    };
    let n = entries.iter().map(|e| e.row.max(e.col) as usize + 1).max().unwrap_or(0);
    if last.value == 0.0 {
        if last.row != last.col {
            return Err(bad(
                path,
                entries.last_line(1),
                format!(
                    "the closing line {} {} 0 must name the same row and column (n n 0)",
                    last.row + 1,
                    last.col + 1
                ),
            ));
        }
        entries.pop();
    }
    guard.reserve(n as f64 * 24.0, "the units this file names", "check the indices of the file")?;
    let (indptr, indices, data) = assemble(path, n, entries, false, guard)?;
    Ok(WeightsFile { graph: Csr::from_parts(n, (indptr, indices, data)), record, symmetric: false, pattern: false })
}

/// Write `w` as triplet text with the closing `n n 0` line.
pub fn write(path: &str, w: CsrRef<'_>, record: &str, guard: &Guard) -> Result<()> {
    if record.contains('\n') {
        return Err(Error::InvalidMatrix { reason: "the record of a triplet file must be one line".into() });
    }
    let header = format!("{RECORD}{record}\n");
    let footer = format!("{n} {n} 0\n", n = w.n());
    write_rows(path, &header, w, &footer, guard, |i, out| {
        let (cols, vals) = w.row(i);
        let row = RowPrefix::new(i);
        for (&j, &v) in cols.iter().zip(vals) {
            row.push_entry(out, j as usize);
            push_f64(out, v);
            out.push(b'\n');
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn temp(name: &str) -> String {
        std::env::temp_dir().join(format!("vicino-core-{}-{name}", std::process::id())).to_string_lossy().into_owned()
    }

    #[test]
    fn round_trip_keeps_trailing_islands() {
        // units 2 and 3 are islands at the end: only the closing line keeps them
        let w = Csr::from_rows(vec![vec![(1, 0.1)], vec![(0, 1.0 / 3.0)], vec![], vec![]]);
        let g = Guard::unlimited();
        let (p, q) = (temp("t.txt"), temp("m.mtx"));
        write(&p, w.view(), "{}", &g).unwrap();
        let text = std::fs::read_to_string(&p).unwrap();
        // by hand: the closing line of a 4-unit matrix
        assert!(text.ends_with("4 4 0\n"), "{text}");
        let back = read(&p, &g).unwrap();
        assert_eq!(back.graph, w);
        assert_eq!(back.record.as_deref(), Some("{}"));
        assert!(!super::super::matrix_market::write(&q, w.view(), "x", &g).unwrap());
        let mm = super::super::matrix_market::read(&q, &g).unwrap();
        assert_eq!(mm.graph, w);
        let _ = (std::fs::remove_file(p), std::fs::remove_file(q));
    }

    #[test]
    fn bad_lines_name_the_line() {
        let g = Guard::unlimited();
        let p = temp("bad.txt");
        for (text, line) in [("1 2 1\n2 1 x\n", 2), ("1 2 1\n0 1 1\n", 2), ("1 2 1\n1 2 3\n", 2), ("1 2 0\n2 1 1\n", 1)]
        {
            std::fs::write(&p, text).unwrap();
            match read(&p, &g) {
                Err(Error::BadFile { line: l, .. }) => assert_eq!(l, line, "{text:?}"),
                other => panic!("{text:?}: {other:?}"),
            }
        }
        let _ = std::fs::remove_file(p);
    }
}
