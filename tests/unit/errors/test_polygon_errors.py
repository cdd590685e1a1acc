"""Bad polygon inputs to contiguity and cliff_ord raise the right vicino error.

Every error is checked for its vicino class, for the built-in class it must
also derive from (ValueError or TypeError), and for a message that names
the problem (and the ids at fault, where there are some).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import shapely
from shapely import LineString, MultiPolygon, Point, Polygon, box

import vicino

BUILDERS = [
    pytest.param(lambda p, **kw: vicino.contiguity(p, "queen", **kw), id="queen"),
    pytest.param(lambda p, **kw: vicino.contiguity(p, "rook", **kw), id="rook"),
    pytest.param(lambda p, **kw: vicino.cliff_ord(p, **kw), id="cliff_ord"),
]
IDS = ["north", "middle", "south"]


def check(err: pytest.ExceptionInfo, vicino_cls, builtin_cls):
    assert isinstance(err.value, vicino.VicinoError)
    assert isinstance(err.value, vicino_cls)
    assert isinstance(err.value, builtin_cls)


def row_of_squares():
    return [box(0, 0, 1, 1), box(1, 0, 2, 1), box(2, 0, 3, 1)]


# ---------------------------------------------------------------------------
# coordinates
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
@pytest.mark.parametrize("axis", [0, 1])
def test_non_finite_coordinates_name_the_id(build, bad, axis):
    ring = [[1.0, 0.0], [2.0, 0.0], [2.0, 1.0], [1.0, 1.0]]
    ring[2][axis] = bad
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # shapely warns on NaN in rings
        geoms = [box(0, 0, 1, 1), Polygon(ring), box(2, 0, 3, 1)]
    with pytest.raises(vicino.InvalidInputError, match=r"(?i)'middle'.*finite") as err:
        build(geoms, ids=IDS)
    check(err, vicino.InvalidInputError, ValueError)
    assert "nan" in str(err.value).lower() or "inf" in str(err.value).lower()


@pytest.mark.parametrize("build", BUILDERS)
def test_non_finite_in_a_hole_names_the_id(build):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        holed = Polygon([(0, 0), (9, 0), (9, 9), (0, 9)], [[(2, 2), (3, np.nan), (3, 3), (2, 3)]])
    with pytest.raises(vicino.InvalidInputError, match=r"(?i)'south'.*NaN") as err:
        build([box(10, 0, 11, 1), box(11, 0, 12, 1), holed], ids=IDS)
    check(err, vicino.InvalidInputError, ValueError)


# ---------------------------------------------------------------------------
# geometry types
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize(
    "wrong",
    [
        Point(0, 0),
        LineString([(0, 0), (1, 1)]),
        shapely.MultiPoint([(0, 0), (1, 1)]),
        shapely.GeometryCollection([box(0, 0, 1, 1)]),
    ],
)
def test_non_polygon_geometries_name_the_ids(build, wrong):
    geoms = [box(0, 0, 1, 1), wrong, box(2, 0, 3, 1)]
    with pytest.raises(vicino.InvalidInputError, match=r"not polygons.*'middle'") as err:
        build(geoms, ids=IDS)
    check(err, vicino.InvalidInputError, ValueError)
    assert "'north'" not in str(err.value) and "'south'" not in str(err.value)


@pytest.mark.parametrize("build", BUILDERS)
def test_several_non_polygons_are_all_named(build):
    geoms = [Point(0, 0), box(1, 0, 2, 1), LineString([(0, 0), (1, 1)])]
    with pytest.raises(vicino.InvalidInputError, match=r"2 geometries are not polygons.*'north', 'south'") as err:
        build(geoms, ids=IDS)
    check(err, vicino.InvalidInputError, ValueError)


@pytest.mark.parametrize("build", BUILDERS)
def test_none_geometries_name_the_id(build):
    with pytest.raises(vicino.InvalidInputError, match=r"no geometry \(None\).*'middle'") as err:
        build([box(0, 0, 1, 1), None, box(2, 0, 3, 1)], ids=IDS)
    check(err, vicino.InvalidInputError, ValueError)


def test_none_in_a_geoseries_names_the_index():
    gpd = pytest.importorskip("geopandas")
    s = gpd.GeoSeries([box(0, 0, 1, 1), None, box(2, 0, 3, 1)], index=["a", "b", "c"])
    with pytest.raises(vicino.InvalidInputError, match=r"None.*'b'") as err:
        vicino.contiguity(s)
    check(err, vicino.InvalidInputError, ValueError)


@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize("thing", ["POLYGON ((0 0, 1 0, 1 1, 0 0))", 3.5, [(0, 0), (1, 0), (1, 1)], {"x": 1}])
def test_non_geometry_objects(build, thing):
    values = np.empty(3, dtype=object)
    values[:] = [box(0, 0, 1, 1), thing, box(2, 0, 3, 1)]
    with pytest.raises(vicino.InvalidTypeError, match=r"not shapely geometries.*'middle'") as err:
        build(values, ids=IDS)
    check(err, vicino.InvalidTypeError, TypeError)


@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize("thing", ["abc", 5, None, np.zeros((2, 2), dtype=object)])
def test_not_a_collection_of_polygons(build, thing):
    with pytest.raises(vicino.InvalidTypeError, match="GeoDataFrame, GeoSeries, shapely array or list") as err:
        build(thing)
    check(err, vicino.InvalidTypeError, TypeError)


def test_dataframe_without_geometry_column():
    with pytest.raises(vicino.InvalidTypeError, match="'geometry' column") as err:
        vicino.contiguity(pd.DataFrame({"a": [1, 2]}))
    check(err, vicino.InvalidTypeError, TypeError)


@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize("empty", [[], np.array([], dtype=object), pd.Series([], dtype=object)])
def test_empty_input(build, empty):
    with pytest.raises(vicino.InvalidInputError, match="no polygons were given") as err:
        build(empty)
    check(err, vicino.InvalidInputError, ValueError)


# ---------------------------------------------------------------------------
# empty geometries: islands with a warning
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("build", BUILDERS)
def test_empty_geometries_become_islands_with_warning(build):
    geoms = [box(0, 0, 1, 1), Polygon(), box(1, 0, 2, 1), MultiPolygon()]
    ids = ["a", "gone", "b", "lost"]
    with pytest.warns(UserWarning, match=r"2 unit\(s\) have empty geometry and become islands: ids 'gone', 'lost'"):
        w = build(geoms, ids=ids)
    assert list(w.islands) == ["gone", "lost"]  # reference: shapely.is_empty; empty units touch nothing
    assert set(w.neighbors_of("a").index) == {"b"}  # reference: shapely intersects(box a, box b)
    np.testing.assert_array_equal(w.perimeter.to_numpy(), shapely.length(geoms))  # reference: shapely.length


def test_empty_geometry_perimeter_is_positive_zero():
    with pytest.warns(UserWarning):
        w = vicino.contiguity([box(0, 0, 1, 1), Polygon()], ids=["a", "gone"])
    assert not np.signbit(w.perimeter["gone"])  # reference: shapely.length(Polygon()) == +0.0
    assert not np.signbit(shapely.length(Polygon()))


def test_no_warning_without_empty_geometries():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        w = vicino.contiguity(row_of_squares())
    assert w.nnz == 4  # reference: shapely intersects for a row of three squares


# ---------------------------------------------------------------------------
# parameters
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("rule", ["bishop", "Queen", "", None, 1])
def test_unknown_rule(rule):
    with pytest.raises(vicino.InvalidParameterError, match=r"unknown contiguity rule.*'queen', 'rook'") as err:
        vicino.contiguity(row_of_squares(), rule)
    check(err, vicino.InvalidParameterError, ValueError)


def test_unknown_weight():
    with pytest.raises(vicino.InvalidParameterError, match=r"unknown contiguity weight 'area'") as err:
        vicino.contiguity(row_of_squares(), "rook", weight="area")
    check(err, vicino.InvalidParameterError, ValueError)


def test_border_length_needs_rook():
    with pytest.raises(vicino.InvalidParameterError, match=r'needs rule="rook"') as err:
        vicino.contiguity(row_of_squares(), "queen", weight="border_length")
    check(err, vicino.InvalidParameterError, ValueError)


def test_unknown_metric():
    with pytest.raises(vicino.InvalidParameterError, match=r"unknown metric 'manhattan'") as err:
        vicino.cliff_ord(row_of_squares(), metric="manhattan")
    check(err, vicino.InvalidParameterError, ValueError)


@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize(
    "tol,shown", [(-1e-9, r"-(1e-0?9|0\.000000001)"), (-1, "-1"), (np.nan, "NaN"), (np.inf, "inf")]
)
def test_bad_tolerance(build, tol, shown):
    with pytest.raises(vicino.InvalidParameterError, match=rf"tolerance = {shown} is not usable.*>= 0") as err:
        build(row_of_squares(), tolerance=tol)
    check(err, vicino.InvalidParameterError, ValueError)


@pytest.mark.parametrize("tol", ["0.1", True, None])
def test_tolerance_of_wrong_type(tol):
    with pytest.raises(vicino.InvalidParameterTypeError, match="tolerance must be a number") as err:
        vicino.contiguity(row_of_squares(), tolerance=tol)
    check(err, vicino.InvalidParameterTypeError, TypeError)
    check(err, vicino.InvalidParameterError, ValueError)


@pytest.mark.parametrize("name", ["border_power", "distance_power"])
def test_cliff_ord_powers_of_wrong_type(name):
    with pytest.raises(vicino.InvalidParameterTypeError, match=f"{name} must be a number") as err:
        vicino.cliff_ord(row_of_squares(), **{name: "2"})
    check(err, vicino.InvalidParameterTypeError, TypeError)


# ---------------------------------------------------------------------------
# ids
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize("ids", [["a", "b"], ["a", "b", "c", "d"], []])
def test_ids_of_wrong_length(build, ids):
    with pytest.raises(vicino.IdError, match=rf"ids has {len(ids)} entries but there are 3 units") as err:
        build(row_of_squares(), ids=ids)
    check(err, vicino.IdError, ValueError)


@pytest.mark.parametrize("build", BUILDERS)
def test_duplicate_ids(build):
    with pytest.raises(vicino.IdError, match=r"must be unique.*'x'") as err:
        build(row_of_squares(), ids=["x", "y", "x"])
    check(err, vicino.IdError, ValueError)


def test_duplicate_index_of_a_geoseries():
    gpd = pytest.importorskip("geopandas")
    s = gpd.GeoSeries(row_of_squares(), index=[5, 5, 6])
    with pytest.raises(vicino.IdError, match=r"index of the input must be unique.*5") as err:
        vicino.contiguity(s)
    check(err, vicino.IdError, ValueError)


def test_ids_not_one_dimensional():
    with pytest.raises(vicino.IdError, match="one-dimensional") as err:
        vicino.contiguity(row_of_squares(), ids="abc")
    check(err, vicino.IdError, ValueError)
