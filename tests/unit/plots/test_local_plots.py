"""The Moran scatterplot and the cluster map.

Drawn with matplotlib's Agg backend. References: numpy.polyfit (the slope of
the fitted line), vicino.moran (checked against Cliff and Ord 1981),
Anselin (1996) (the slope equals Moran's I for row-standardized weights),
matplotlib.image (the saved file reads back as an image), and a simulation
of deuteranopia (Machado, Oliveira and Fernandes 2009) with CIE76 colour
differences in CIELAB.
"""

from __future__ import annotations

import numpy as np
import pytest

matplotlib = pytest.importorskip("matplotlib")
matplotlib.use("Agg")
import matplotlib.image as mpimg  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.colors import to_rgb  # noqa: E402
from matplotlib.patches import PathPatch  # noqa: E402

import vicino  # noqa: E402
from vicino import plots  # noqa: E402

shapely = pytest.importorskip("shapely")


@pytest.fixture(autouse=True)
def close_figures():
    yield
    plt.close("all")


def clustered(n=150, seed=4):
    rng = np.random.default_rng(seed)
    xy = rng.random((n, 2)) * 10
    return xy, xy[:, 0] + rng.normal(scale=1.5, size=n)


def fitted_slope(ax):
    line = ax.get_lines()[-1]
    x, y = line.get_data()
    return (y[1] - y[0]) / (x[1] - x[0])


def test_moran_plot_slope_is_moran_i_and_polyfit(tmp_path):
    xy, x = clustered()
    w = vicino.k_nearest(xy, 5).standardize("row")
    ax = vicino.moran_plot(x, w)
    slope = fitted_slope(ax)
    sx = (x - x.mean()) / x.std()
    b, _ = np.polyfit(sx, w.to_dense() @ sx, 1)  # reference: numpy least squares
    assert slope == pytest.approx(b, rel=1e-10)
    # reference: Anselin (1996): with row-standardized weights the slope is Moran's I
    assert slope == pytest.approx(vicino.moran(x, w, permutations=0).statistic, rel=1e-10)
    texts = {t.get_text() for t in ax.texts}
    assert {"high-high", "low-low", "high-low", "low-high"} <= texts
    # the points are the standardized values and their lags
    pts = np.vstack([c.get_offsets() for c in ax.collections])
    np.testing.assert_allclose(np.sort(pts[:, 0]), np.sort(sx), rtol=1e-10, atol=1e-12)
    path = tmp_path / "moran.png"
    ax.figure.savefig(path, dpi=60)
    assert mpimg.imread(path).shape[2] in (3, 4)  # matplotlib reads it back as an image


def test_moran_plot_binary_weights_slope_is_scaled_i():
    xy, x = clustered(seed=5)
    w = vicino.within_distance(xy, 1.5)
    ax = vicino.moran_plot(x, w)
    r = vicino.moran(x, w, permutations=0)
    # z'Wz / z'z = I S0 / n (Moran 1950, rearranged)
    assert fitted_slope(ax) == pytest.approx(r.statistic * r.s0 / w.n, rel=1e-10)
    assert "S0" in ax.get_legend().get_texts()[-1].get_text()


def test_moran_plot_refuses_bad_values():
    xy, _ = clustered()
    w = vicino.k_nearest(xy, 4)
    with pytest.raises(vicino.InvalidValuesError, match="constant"):
        vicino.moran_plot(np.ones(len(xy)), w)
    with pytest.raises(vicino.InvalidTypeError):
        vicino.moran_plot(np.ones(len(xy)), w.to_scipy())


def grid_polygons(rows, cols):
    boxes = [shapely.box(c, r, c + 1, r + 1) for r in range(rows) for c in range(cols)]
    return np.array(boxes, dtype=object)


def test_cluster_map_on_polygons_colours_by_quadrant(tmp_path):
    rows, cols = 12, 12
    geoms = grid_polygons(rows, cols)
    w = vicino.contiguity(geoms, "rook").standardize("row")
    cx = shapely.get_x(shapely.centroid(geoms))
    rng = np.random.default_rng(2)
    x = np.where(cx < 4, 5.0, 0.0) + rng.normal(scale=0.5, size=len(geoms))
    r = vicino.local_moran(x, w, permutations=199, seed=1)
    ax = vicino.cluster_map(r, geoms)
    patches = [p for p in ax.patches if isinstance(p, PathPatch)]
    want = {plots.QUADRANT_COLOURS[q] for q in set(r.quadrant[r.significant])}
    if (~r.significant).any():
        want.add(plots.RECEDE)
    got = {matplotlib.colors.to_hex(p.get_facecolor()) for p in patches}
    assert {c.lower() for c in want} == got
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    n_hh = int((r.significant & (r.quadrant == "high-high")).sum())
    assert f"high-high ({n_hh})" in labels
    assert "not a cause" in " ".join(t.get_text() for t in ax.texts)
    path = tmp_path / "clusters.png"
    ax.figure.savefig(path, dpi=60)
    assert mpimg.imread(path).ndim == 3


def test_cluster_map_points_islands_and_holes():
    xy, x = clustered(seed=7)
    xy = np.vstack([xy, [[40.0, 40.0]]])
    x = np.r_[x, 3.0]
    w = vicino.within_distance(xy, 2.0)
    r = vicino.local_getis_ord(x - x.min(), w, star=True, permutations=99, seed=2)
    ax = vicino.cluster_map(r, xy)
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "island (1)" in labels and any(s.startswith("hot spot") for s in labels)
    # a polygon with a hole keeps the hole open when drawn: render it and read the pixels
    ring = shapely.Polygon([(0, 0), (4, 0), (4, 4), (0, 4)], holes=[[(1, 1), (2, 1), (2, 2), (1, 2)]])
    fig, ax2 = plt.subplots(figsize=(2, 2), dpi=50)
    ax2.add_patch(PathPatch(plots._compound_path(np.array([ring], dtype=object)), facecolor="k", edgecolor="none"))
    ax2.set_xlim(0, 4)
    ax2.set_ylim(0, 4)
    ax2.axis("off")
    fig.subplots_adjust(0, 0, 1, 1)
    fig.canvas.draw()
    img = np.asarray(fig.canvas.buffer_rgba())
    h, wd = img.shape[:2]
    assert img[int(h * (1 - 1.5 / 4)), int(wd * 1.5 / 4), 0] == 255  # inside the hole: blank
    assert img[int(h * (1 - 3 / 4)), int(wd * 3 / 4), 0] == 0  # inside the polygon: filled
    with pytest.raises(vicino.InvalidTypeError):
        vicino.cluster_map(vicino.moran(x, w, permutations=0), xy)


# ---- colour-blind check -------------------------------------------------------
# Machado, Oliveira and Fernandes (2009), IEEE TVCG 15(6), the matrix for
# deuteranopia at severity 1.0, applied to linear RGB  # from memory
DEUTERANOPIA = np.array(
    [
        [0.367322, 0.860646, -0.227968],
        [0.280085, 0.672501, 0.047413],
        [-0.011820, 0.042940, 0.968881],
    ]
)


def _linear(rgb):
    # sRGB transfer function, IEC 61966-2-1  # from memory
    rgb = np.asarray(rgb)
    return np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)


def _lab(linear):
    # linear sRGB to XYZ (D65) to CIELAB, CIE 15:2004  # from memory
    m = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
    xyz = m @ np.clip(linear, 0, 1) / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def test_lab_conversion_of_known_colours():
    # setup check of the conversion: white is L* = 100 and mid grey #777777 is L* about 50 (CIE 15)
    assert _lab(_linear(to_rgb("#ffffff")))[0] == pytest.approx(100, abs=0.05)
    assert _lab(_linear(to_rgb("#777777")))[0] == pytest.approx(50.0, abs=0.5)  # from memory


def test_quadrant_colours_stay_distinct_under_deuteranopia():
    names = [*plots.QUADRANT_COLOURS, "not significant"]
    colours = [*plots.QUADRANT_COLOURS.values(), plots.RECEDE]
    seen = [_lab(DEUTERANOPIA @ _linear(to_rgb(c))) for c in colours]
    for a in range(len(seen)):
        for b in range(a + 1, len(seen)):
            delta = float(np.linalg.norm(seen[a] - seen[b]))  # CIE76 colour difference
            # about 2.3 is a just noticeable difference; 15 is plainly different (common practice)
            assert delta > 15, (names[a], names[b], delta)
    # and the palette is not the conventional red / blue one: no quadrant is pure red or blue
    for c in plots.QUADRANT_COLOURS.values():
        r, g, b = to_rgb(c)
        assert not (r > 0.8 and g < 0.2 and b < 0.2) and not (b > 0.8 and r < 0.2 and g < 0.2)
