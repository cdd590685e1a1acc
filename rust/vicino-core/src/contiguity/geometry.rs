//! Polygons as flat buffers, the layout of shapely's ragged arrays (and of
//! GeoArrow): interleaved coordinates, ring offsets into coordinates,
//! polygon offsets into rings, unit offsets into polygons. A unit is a
//! multipolygon; its first ring in each polygon is the exterior, the others
//! are holes. Nothing is copied; checks are O(coordinates).

use crate::error::{Error, Result, Unit};

/// Borrowed polygons of n units.
#[derive(Debug, Clone, Copy)]
pub struct Polygons<'a> {
    xy: &'a [[f64; 2]],
    rings: &'a [i64],
    polys: &'a [i64],
    units: &'a [i64],
}

/// A bounding box: [xmin, ymin, xmax, ymax].
pub type BBox = [f64; 4];

fn offsets_ok(off: &[i64], end: usize) -> bool {
    !off.is_empty() && off[0] == 0 && off[off.len() - 1] as usize == end && off.windows(2).all(|w| w[0] <= w[1])
}

impl<'a> Polygons<'a> {
    /// Check and borrow the buffers. Errors name the unit at fault.
    pub fn new(coords: &'a [f64], rings: &'a [i64], polys: &'a [i64], units: &'a [i64]) -> Result<Self> {
        let bad = |reason: &str| Error::InvalidMatrix { reason: format!("polygon buffers: {reason}") };
        if !coords.len().is_multiple_of(2) {
            return Err(Error::OddCoordinates { len: coords.len() });
        }
        let (xy, _) = coords.as_chunks::<2>();
        if !offsets_ok(rings, xy.len()) {
            return Err(bad("ring offsets must rise from 0 to the number of coordinates"));
        }
        if !offsets_ok(polys, rings.len() - 1) {
            return Err(bad("polygon offsets must rise from 0 to the number of rings"));
        }
        if !offsets_ok(units, polys.len() - 1) {
            return Err(bad("unit offsets must rise from 0 to the number of polygons"));
        }
        if units.len() < 2 {
            return Err(Error::Empty);
        }
        let this = Self { xy, rings, polys, units };
        for u in 0..this.n() {
            for (_, ring) in this.rings_of(u) {
                for p in ring {
                    for (axis, &value) in p.iter().enumerate() {
                        if !value.is_finite() {
                            return Err(Error::NonFiniteCoordinate { unit: Unit(u), axis, value });
                        }
                        if value.abs() > 1e150 {
                            return Err(Error::CoordinateTooLarge { unit: Unit(u), axis, value });
                        }
                    }
                }
                if !ring.is_empty() && ring.len() < 3 {
                    return Err(Error::InvalidGeometry {
                        unit: Unit(u),
                        reason: format!("a ring has only {} points", ring.len()),
                    });
                }
            }
        }
        Ok(this)
    }

    /// The interleaved coordinates.
    pub fn coords(&self) -> &'a [f64] {
        self.xy.as_flattened()
    }

    /// The same units with other coordinates of the same length (a
    /// rescaled copy; checked already through `self`).
    pub fn with_coords<'b>(&'b self, coords: &'b [f64]) -> Polygons<'b> {
        assert_eq!(coords.len(), 2 * self.xy.len(), "a copy of the coordinates has their length");
        Polygons { xy: coords.as_chunks::<2>().0, rings: self.rings, polys: self.polys, units: self.units }
    }

    /// Push the segments of the exterior rings of unit u onto `out`, each
    /// with the number of its ring (closed, zero-length segments skipped).
    pub fn exterior_segments(&self, u: usize, out: &mut Vec<([f64; 2], [f64; 2], usize)>) {
        for (r, (ext, ring)) in self.rings_of(u).enumerate() {
            let m = ring.len();
            if !ext || m < 2 {
                continue;
            }
            let count = if ring[0] == ring[m - 1] { m - 1 } else { m };
            out.extend((0..count).map(|k| (ring[k], ring[(k + 1) % m], r)).filter(|(a, b, _)| a != b));
        }
    }

    /// Number of units.
    pub fn n(&self) -> usize {
        self.units.len() - 1
    }

    /// The rings of unit u: (is exterior ring, its points).
    pub fn rings_of(&self, u: usize) -> impl Iterator<Item = (bool, &'a [[f64; 2]])> + '_ {
        let (p0, p1) = (self.units[u] as usize, self.units[u + 1] as usize);
        (p0..p1).flat_map(move |p| {
            let (r0, r1) = (self.polys[p] as usize, self.polys[p + 1] as usize);
            (r0..r1).map(move |r| (r == r0, &self.xy[self.rings[r] as usize..self.rings[r + 1] as usize]))
        })
    }

    /// The boundary segments of unit u (each ring closed, zero-length
    /// segments skipped).
    pub fn segments_of(&self, u: usize) -> impl Iterator<Item = ([f64; 2], [f64; 2])> + '_ {
        self.rings_of(u).flat_map(|(_, ring)| {
            let closed = ring.first() == ring.last();
            let m = ring.len();
            let count = if m < 2 {
                0
            } else if closed {
                m - 1
            } else {
                m
            };
            (0..count).map(move |k| (ring[k], ring[(k + 1) % m])).filter(|(a, b)| a != b)
        })
    }

    /// Push the segments of unit u that meet the box `bx` onto `out`
    /// (explicit loops: this runs for every candidate pair).
    pub fn segments_meeting(&self, u: usize, bx: &BBox, out: &mut Vec<([f64; 2], [f64; 2])>) {
        let (p0, p1) = (self.units[u] as usize, self.units[u + 1] as usize);
        let (r0, r1) = (self.polys[p0] as usize, self.polys[p1] as usize);
        for r in r0..r1 {
            let ring = &self.xy[self.rings[r] as usize..self.rings[r + 1] as usize];
            let m = ring.len();
            if m < 2 {
                continue;
            }
            let closed = ring[0] == ring[m - 1];
            let count = if closed { m - 1 } else { m };
            for k in 0..count {
                let (a, b) = (ring[k], ring[if k + 1 == m { 0 } else { k + 1 }]);
                if a != b
                    && a[0].max(b[0]) >= bx[0]
                    && a[0].min(b[0]) <= bx[2]
                    && a[1].max(b[1]) >= bx[1]
                    && a[1].min(b[1]) <= bx[3]
                {
                    out.push((a, b));
                }
            }
        }
    }

    /// Whether unit u has no points.
    pub fn is_empty(&self, u: usize) -> bool {
        self.rings_of(u).all(|(_, r)| r.is_empty())
    }

    /// Bounding box of unit u, or None when it is empty.
    pub fn bbox(&self, u: usize) -> Option<BBox> {
        let mut b = [f64::INFINITY, f64::INFINITY, f64::NEG_INFINITY, f64::NEG_INFINITY];
        for (_, ring) in self.rings_of(u) {
            for p in ring {
                b = [b[0].min(p[0]), b[1].min(p[1]), b[2].max(p[0]), b[3].max(p[1])];
            }
        }
        (b[0] <= b[2]).then_some(b)
    }

    /// Whether point p lies inside (or on) any exterior ring of unit u:
    /// holes are ignored, so a unit inside another's hole counts as inside
    /// it. Crossing-number test.
    pub fn inside_exterior(&self, u: usize, p: [f64; 2]) -> bool {
        self.rings_of(u).filter(|(ext, _)| *ext).any(|(_, ring)| {
            let mut inside = false;
            let m = ring.len();
            for k in 0..m {
                let (a, b) = (ring[k], ring[(k + 1) % m]);
                if (a[1] > p[1]) != (b[1] > p[1]) {
                    let x = a[0] + (p[1] - a[1]) / (b[1] - a[1]) * (b[0] - a[0]);
                    if p[0] < x {
                        inside = !inside;
                    }
                }
            }
            inside
        })
    }

    /// A point of unit u (its first coordinate), if any.
    pub fn first_point(&self, u: usize) -> Option<[f64; 2]> {
        self.rings_of(u).find_map(|(_, r)| r.first().copied())
    }
}
