//! The ids file beside a text weights file, when the ids are whole numbers:
//! a header line `id:int64`, then one id per line in row order. (Text ids,
//! which need CSV quoting, are written and read by the Python side.)
//!
//! Written in parallel by blocks of ids; read whole, cut into chunks at line
//! boundaries and parsed in parallel, each bad line named. O(bytes).

use super::text::{bad, chunks, push_u64, read_file};
use crate::error::{Error, Result};
use crate::guard::Guard;
use rayon::prelude::*;
use std::io::Write;

/// The header of an ids file of whole numbers.
pub const INT_HEADER: &str = "id:int64";

fn push_i64(out: &mut Vec<u8>, v: i64) {
    if v < 0 {
        out.push(b'-');
    }
    push_u64(out, v.unsigned_abs());
}

/// Write `ids` to `path`: the header, then one id per line.
pub fn write_int(path: &str, ids: &[i64], guard: &Guard) -> Result<()> {
    let io = |e: std::io::Error| Error::FileAccess { path: path.to_string(), reason: e.to_string() };
    let mut sink = std::io::BufWriter::with_capacity(1 << 20, std::fs::File::create(path).map_err(io)?);
    writeln!(sink, "{INT_HEADER}").map_err(io)?;
    const BLOCK: usize = 1 << 16;
    const WAVE: usize = 64;
    for wave in ids.chunks(BLOCK * WAVE) {
        guard.check()?;
        let texts: Vec<Vec<u8>> = wave
            .par_chunks(BLOCK)
            .map(|block| {
                let mut out = Vec::with_capacity(block.len() * 12);
                for &v in block {
                    push_i64(&mut out, v);
                    out.push(b'\n');
                }
                out
            })
            .collect();
        for t in texts {
            sink.write_all(&t).map_err(io)?;
        }
    }
    sink.flush().map_err(io)
}

/// What an ids file holds: whole-number ids, or another header (text ids,
/// read by the caller).
#[derive(Debug, Clone, PartialEq)]
pub enum IdsFile {
    Ints(Vec<i64>),
    Other(String),
}

fn parse_i64(field: &[u8]) -> Option<i64> {
    let (neg, digits) = match field.first() {
        Some(b'-') => (true, &field[1..]),
        Some(b'+') => (false, &field[1..]),
        _ => (false, field),
    };
    if digits.is_empty() || digits.len() > 19 {
        return None;
    }
    let mut v: u64 = 0;
    for &b in digits {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            return None;
        }
        v = v.checked_mul(10)?.checked_add(d as u64)?;
    }
    if neg {
        if v <= i64::MAX as u64 + 1 {
            Some((v as i64).wrapping_neg())
        } else {
            None
        }
    } else {
        i64::try_from(v).ok()
    }
}

/// Read an ids file: whole-number ids when its header is `id:int64`,
/// otherwise the header it has.
pub fn read(path: &str, guard: &Guard) -> Result<IdsFile> {
    let text = read_file(path, guard)?;
    let end = text.iter().position(|&b| b == b'\n').unwrap_or(text.len());
    let header = String::from_utf8_lossy(&text[..end]).trim_end_matches('\r').to_string();
    if header.trim() != INT_HEADER {
        return Ok(IdsFile::Other(header));
    }
    let from = (end + 1).min(text.len());
    // blank lines at the very end (an editor's habit) are not ids
    let used = text.len() - text.iter().rev().take_while(|b| b.is_ascii_whitespace()).count();
    let parts = chunks(&text[..used.max(from)], from, 2);
    let per = parts.parse(guard, |lines| {
        let mut out = Vec::new();
        for (line, raw) in lines.enumerate() {
            let field = raw.trim_ascii();
            match parse_i64(field) {
                Some(v) => out.push(v),
                None if field.is_empty() => {
                    return Err(bad(path, line as u64, "the line is empty; every unit needs an id (one per line)"))
                }
                None => {
                    return Err(bad(
                        path,
                        line as u64,
                        format!(
                            "the id {:?} is not a whole number, but the header declares id:int64",
                            String::from_utf8_lossy(field)
                        ),
                    ))
                }
            }
        }
        Ok(out)
    })?;
    Ok(IdsFile::Ints(per.concat()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn int_ids_round_trip() {
        let dir = std::env::temp_dir().join(format!("vicino-ids-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("w.ids.csv");
        let path = path.to_str().unwrap();
        let ids: Vec<i64> = (0..200_000).map(|i| i * 7919 - 500_000).chain([i64::MIN, i64::MAX, 0]).collect();
        let g = Guard::unlimited();
        write_int(path, &ids, &g).unwrap();
        assert_eq!(read(path, &g).unwrap(), IdsFile::Ints(ids));
        std::fs::write(path, "id:int64\n1\n2x\n").unwrap();
        let err = read(path, &g).unwrap_err().to_string();
        assert!(err.contains("line 3") && err.contains("2x"), "{err}");
        std::fs::write(path, "id:int64\n1\n\n2\n").unwrap();
        let err = read(path, &g).unwrap_err().to_string();
        assert!(err.contains("line 3") && err.contains("empty"), "{err}");
        std::fs::write(path, "id:int64\r\n-4\r\n5\r\n\r\n\n").unwrap();
        assert_eq!(read(path, &g).unwrap(), IdsFile::Ints(vec![-4, 5]));
        std::fs::write(path, "id:str\na\n").unwrap();
        assert_eq!(read(path, &g).unwrap(), IdsFile::Other("id:str".into()));
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
