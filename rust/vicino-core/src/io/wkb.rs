//! Well-Known Binary (OGC Simple Features; also the extended flavour with
//! Z / M / SRID flags) for Polygon and MultiPolygon units, decoded into the
//! flat buffers of [`crate::contiguity::Polygons`]: interleaved x, y, ring
//! offsets, polygon offsets, unit offsets. Z and M values are skipped.
//! Units are decoded in parallel; O(bytes).

use crate::error::{Error, Result, Unit};
use rayon::prelude::*;

/// Flat polygon buffers owned.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct PolygonBuffers {
    pub coords: Vec<f64>,
    pub rings: Vec<i64>,
    pub polys: Vec<i64>,
    pub units: Vec<i64>,
}

impl PolygonBuffers {
    /// Borrow as checked [`Polygons`](crate::contiguity::Polygons).
    pub fn polygons(&self) -> Result<crate::contiguity::Polygons<'_>> {
        crate::contiguity::Polygons::new(&self.coords, &self.rings, &self.polys, &self.units)
    }
}

struct Reader<'a> {
    buf: &'a [u8],
    pos: usize,
    unit: usize,
}

impl<'a> Reader<'a> {
    fn fail(&self, what: &str) -> Error {
        Error::InvalidGeometry { unit: Unit(self.unit), reason: format!("malformed WKB ({what} at byte {})", self.pos) }
    }
    fn take(&mut self, k: usize) -> Result<&'a [u8]> {
        let end = self.pos.checked_add(k).filter(|&e| e <= self.buf.len()).ok_or_else(|| self.fail("truncated"))?;
        let s = &self.buf[self.pos..end];
        self.pos = end;
        Ok(s)
    }
    fn u8(&mut self) -> Result<u8> {
        Ok(self.take(1)?[0])
    }
    fn u32(&mut self, little: bool) -> Result<u32> {
        let b: [u8; 4] = self.take(4)?.try_into().expect("4 bytes");
        Ok(if little { u32::from_le_bytes(b) } else { u32::from_be_bytes(b) })
    }
    fn f64(&mut self, little: bool) -> Result<f64> {
        let b: [u8; 8] = self.take(8)?.try_into().expect("8 bytes");
        Ok(if little { f64::from_le_bytes(b) } else { f64::from_be_bytes(b) })
    }

    /// Byte order, base type and the number of extra ordinates per point.
    fn header(&mut self) -> Result<(bool, u32, usize)> {
        let little = match self.u8()? {
            0 => false,
            1 => true,
            _ => return Err(self.fail("unknown byte order")),
        };
        let raw = self.u32(little)?;
        let (mut extra, mut kind) = (0, raw & 0x0FFF_FFFF);
        if raw & 0x8000_0000 != 0 {
            extra += 1;
        }
        if raw & 0x4000_0000 != 0 {
            extra += 1;
        }
        if raw & 0x2000_0000 != 0 {
            self.u32(little)?; // SRID
        }
        // ISO flavour: 1000s for Z, 2000s for M, 3000s for ZM
        match kind / 1000 {
            1 | 2 => extra += 1,
            3 => extra += 2,
            _ => {}
        }
        kind %= 1000;
        Ok((little, kind, extra))
    }

    fn polygon_body(&mut self, little: bool, extra: usize, out: &mut PolygonBuffers) -> Result<()> {
        let rings = self.u32(little)? as usize;
        for _ in 0..rings {
            let points = self.u32(little)? as usize;
            if points.saturating_mul(16 + 8 * extra) > self.buf.len() - self.pos {
                return Err(self.fail("truncated ring"));
            }
            for _ in 0..points {
                out.coords.push(self.f64(little)?);
                out.coords.push(self.f64(little)?);
                for _ in 0..extra {
                    self.f64(little)?;
                }
            }
            out.rings.push((out.coords.len() / 2) as i64);
        }
        out.polys.push((out.rings.len() - 1) as i64);
        Ok(())
    }

    /// One unit: a Polygon or a MultiPolygon.
    fn unit(&mut self, out: &mut PolygonBuffers) -> Result<()> {
        let (little, kind, extra) = self.header()?;
        match kind {
            3 => self.polygon_body(little, extra, out),
            6 => {
                let parts = self.u32(little)?;
                for _ in 0..parts {
                    let (l, k, e) = self.header()?;
                    if k != 3 {
                        return Err(self.fail("a MultiPolygon part that is not a Polygon"));
                    }
                    self.polygon_body(l, e, out)?;
                }
                Ok(())
            }
            other => Err(Error::InvalidGeometry {
                unit: Unit(self.unit),
                reason: format!("WKB geometry type {other} is not a Polygon (3) or MultiPolygon (6)"),
            }),
        }
    }
}

/// Decode n units from one byte buffer; unit u occupies bytes
/// `offsets[u]..offsets[u + 1]`.
pub fn decode_polygons(bytes: &[u8], offsets: &[i64]) -> Result<PolygonBuffers> {
    if offsets.is_empty()
        || offsets[0] != 0
        || offsets[offsets.len() - 1] as usize != bytes.len()
        || offsets.windows(2).any(|w| w[0] > w[1])
    {
        return Err(Error::InvalidMatrix { reason: "WKB offsets must rise from 0 to the number of bytes".into() });
    }
    let n = offsets.len() - 1;
    // blocks of units into their own buffers (offsets local), then stitched
    const BLOCK: usize = 4096;
    let blocks: Vec<PolygonBuffers> = (0..n.div_ceil(BLOCK))
        .into_par_iter()
        .map(|blk| {
            let mut local = PolygonBuffers { rings: vec![0], polys: vec![0], units: vec![0], ..Default::default() };
            for u in blk * BLOCK..((blk + 1) * BLOCK).min(n) {
                let mut r = Reader { buf: &bytes[offsets[u] as usize..offsets[u + 1] as usize], pos: 0, unit: u };
                r.unit(&mut local)?;
                local.units.push((local.polys.len() - 1) as i64);
            }
            Ok(local)
        })
        .collect::<Result<_>>()?;
    let mut out = PolygonBuffers { rings: vec![0], polys: vec![0], units: vec![0], ..Default::default() };
    for part in blocks {
        let (c0, r0, p0) = ((out.coords.len() / 2) as i64, (out.rings.len() - 1) as i64, (out.polys.len() - 1) as i64);
        out.coords.extend_from_slice(&part.coords);
        out.rings.extend(part.rings[1..].iter().map(|&v| v + c0));
        out.polys.extend(part.polys[1..].iter().map(|&v| v + r0));
        out.units.extend(part.units[1..].iter().map(|&v| v + p0));
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn le_polygon(rings: &[&[[f64; 2]]]) -> Vec<u8> {
        let mut b = vec![1u8];
        b.extend(3u32.to_le_bytes());
        b.extend((rings.len() as u32).to_le_bytes());
        for r in rings {
            b.extend((r.len() as u32).to_le_bytes());
            for p in *r {
                b.extend(p[0].to_le_bytes());
                b.extend(p[1].to_le_bytes());
            }
        }
        b
    }

    #[test]
    fn polygon_and_multipolygon() {
        // layout by hand from the OGC WKB definition
        let sq: &[[f64; 2]] = &[[0., 0.], [1., 0.], [1., 1.], [0., 0.]];
        let a = le_polygon(&[sq]);
        let mut m = vec![0u8]; // big-endian multipolygon of two little-endian polygons
        m.extend(6u32.to_be_bytes());
        m.extend(2u32.to_be_bytes());
        m.extend(&a);
        m.extend(&a);
        let empty = le_polygon(&[]);
        let bytes = [a.clone(), m.clone(), empty.clone()].concat();
        let offsets = [0, a.len() as i64, (a.len() + m.len()) as i64, bytes.len() as i64];
        let out = decode_polygons(&bytes, &offsets).unwrap();
        assert_eq!(out.units, vec![0, 1, 3, 4]);
        assert_eq!(out.polys, vec![0, 1, 2, 3, 3]);
        assert_eq!(out.rings, vec![0, 4, 8, 12]);
        assert_eq!(out.coords.len(), 24);
        let mut point = vec![1u8];
        point.extend(1u32.to_le_bytes());
        point.extend(0f64.to_le_bytes());
        point.extend(0f64.to_le_bytes());
        assert!(matches!(
            decode_polygons(&point, &[0, point.len() as i64]),
            Err(Error::InvalidGeometry { unit: Unit(0), .. })
        ));
        assert!(decode_polygons(&a[..10], &[0, 10]).is_err());
    }
}
