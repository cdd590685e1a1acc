"""Shared test data and references for polygon tests: seeded Voronoi
tessellations (built with shapely / GEOS) and queen pairs found with
shapely's STRtree, independent of vicino."""

from __future__ import annotations

import numpy as np
import shapely
from shapely import box


def voronoi(n: int, seed: int, bounds=(0.0, 0.0, 1.0, 1.0)) -> np.ndarray:
    """Voronoi cells of n seeded uniform points, clipped to a box (shapely / GEOS)."""
    rng = np.random.default_rng(seed)
    x0, y0, x1, y1 = bounds
    pts = np.column_stack([rng.uniform(x0, x1, n), rng.uniform(y0, y1, n)])
    frame = box(*bounds)
    cells = shapely.get_parts(shapely.voronoi_polygons(shapely.multipoints(pts), extend_to=frame))
    cells = shapely.intersection(cells, frame)
    assert len(cells) == n and (shapely.get_type_id(cells) == 3).all() and shapely.is_valid(cells).all()
    return cells


def shapely_queen(geoms) -> set[tuple[int, int]]:
    """Ordered pairs i != j whose geometries intersect (shapely STRtree)."""
    geoms = np.asarray(geoms, dtype=object)
    a, b = shapely.STRtree(geoms).query(geoms, predicate="intersects")
    keep = a != b
    return set(zip(a[keep].tolist(), b[keep].tolist()))
