"""Bad input to the algebra and repairs of Weights gets a clear exception.

Every error is checked for its vicino class, for the built-in class it must
also derive from (ValueError or TypeError), and for a message that names the
offending values or ids and says what to do instead.

References: hand calculation on the small matrices and point sets below;
Python's data model for binary operators (NotImplemented -> TypeError).
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest

import vicino
from oracles import check_error

IDS = ["Amberly", "Brisk", "Corvane", "Dunmire"]


@pytest.fixture
def w():
    """Amberly - Brisk linked both ways; Corvane and Dunmire are islands."""
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 0] = 1.0
    return vicino.from_matrix(m, ids=IDS)


@pytest.fixture
def xy():
    """Locations on a line: 0, 1, 2.5 and 10."""
    return np.array([[0, 0], [1, 0], [2.5, 0], [10, 0]], dtype=float)


# ---------------------------------------------------------------------------
# order and symmetrize
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("k", [0, -2])
def test_order_below_one(w, k):
    with pytest.raises(vicino.InvalidParameterError, match="at least 1") as err:
        w.order(k)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert str(k) in str(err.value)  # names the value given


def test_order_not_whole(w):
    with pytest.raises(vicino.InvalidParameterError, match="whole number") as err:
        w.order(1.5)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert "1.5" in str(err.value)


@pytest.mark.parametrize("k", ["2", True, None])
def test_order_of_wrong_type(w, k):
    with pytest.raises(vicino.InvalidParameterTypeError, match="whole number") as err:
        w.order(k)
    check_error(err, vicino.InvalidParameterTypeError, TypeError)
    assert isinstance(err.value, ValueError)  # documented: both a ValueError and a TypeError
    assert type(k).__name__ in str(err.value)  # names the type given


@pytest.mark.parametrize("cumulative", ["yes", 1, None])
def test_order_cumulative_must_be_a_bool(w, cumulative):
    with pytest.raises(vicino.InvalidParameterTypeError, match="True or False") as err:
        w.order(2, cumulative=cumulative)
    check_error(err, vicino.InvalidParameterTypeError, TypeError)
    assert repr(cumulative) in str(err.value)


def test_order_accepts_numpy_integers(w):
    # a numpy integer is a whole number (common practice: numbers.Integral)
    np.testing.assert_array_equal(w.order(np.int64(1)).to_dense(), w.to_dense())  # by hand: binary already


@pytest.mark.parametrize("how", ["both", "Union", "", None])
def test_symmetrize_unknown_rule(w, how):
    with pytest.raises(vicino.InvalidParameterError, match="symmetrize rule") as err:
        w.symmetrize(how)
    check_error(err, vicino.InvalidParameterError, ValueError)
    for option in ("'union'", "'intersection'", "'mean'"):
        assert option in str(err.value)  # lists what to use


# ---------------------------------------------------------------------------
# set operations
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("op", ["|", "&", "-"])
@pytest.mark.parametrize("other", [3, 1.0, "Brisk", np.eye(4)[0].tolist()])
def test_set_operation_with_non_weights_is_a_type_error(w, op, other):
    # a VicinoError that is also a TypeError, as Python's own refusal would be (common practice)
    with pytest.raises(vicino.InvalidTypeError, match=r"only with other vicino\.Weights") as err:
        eval(f"w {op} other", {"w": w, "other": other})
    check_error(err, vicino.InvalidTypeError, TypeError)


@pytest.mark.parametrize("op", ["|", "&", "-"])
def test_set_operation_with_other_ids(w, op):
    other = vicino.from_matrix(w.to_dense(), ids=["Amberly", "Brisk", "Corvane", "Elsworth"])
    with pytest.raises(vicino.IdError) as err:
        eval(f"w {op} other", {"w": w, "other": other})
    check_error(err, vicino.IdError, ValueError)
    message = str(err.value)
    assert op in message and "same ids in the same order" in message
    assert "align" in message  # says what to do


def test_set_operation_with_reordered_ids_names_align(w):
    other = w.align(list(reversed(IDS)))
    with pytest.raises(vicino.IdError, match=r"align\(") as err:
        w | other
    check_error(err, vicino.IdError, ValueError)
    # the advice works: after aligning, the union is the original links (by hand: same links)
    np.testing.assert_array_equal((w | other.align(w.ids)).to_dense(), w.to_dense())


def test_set_operation_with_different_sizes(w):
    other = w.subset(["Amberly", "Brisk"])
    with pytest.raises(vicino.IdError, match="4 and 2 units") as err:
        w & other
    check_error(err, vicino.IdError, ValueError)


# ---------------------------------------------------------------------------
# subset, drop, align
# ---------------------------------------------------------------------------
def test_subset_with_unknown_ids_lists_them(w):
    with pytest.raises(vicino.IdError) as err:
        w.subset(["Amberly", "Zellow", "Yarrowby"])
    check_error(err, vicino.IdError, ValueError)
    message = str(err.value)
    assert "2 id(s)" in message  # by hand: two unknown
    assert "'Zellow'" in message and "'Yarrowby'" in message
    assert "'Amberly'" not in message  # only the offending ids


def test_subset_with_many_unknown_ids_shows_examples(w):
    unknown = [f"Nowhere{i}" for i in range(8)]
    with pytest.raises(vicino.IdError, match="and 3 more") as err:
        w.subset(unknown)
    assert "8 id(s)" in str(err.value)  # by hand: 8 unknown, five shown


def test_subset_with_repeated_ids(w):
    with pytest.raises(vicino.IdError, match="more than once") as err:
        w.subset(["Brisk", "Amberly", "Brisk"])
    check_error(err, vicino.IdError, ValueError)
    assert "'Brisk'" in str(err.value) and "once" in str(err.value)


@pytest.mark.parametrize("bad", ["Amberly", 3, [["Amberly", "Brisk"]], {"Amberly", "Brisk"}])
def test_subset_needs_a_flat_sequence(w, bad):
    with pytest.raises(vicino.IdError, match="one-dimensional") as err:
        w.subset(bad)
    check_error(err, vicino.IdError, ValueError)


def test_subset_and_drop_to_nothing(w):
    with pytest.raises(vicino.IdError, match="no unit would remain") as err:
        w.drop(IDS)
    check_error(err, vicino.IdError, ValueError)
    with pytest.raises(vicino.IdError, match="no unit would remain"):
        w.subset([])


def test_drop_unknown_ids(w):
    with pytest.raises(vicino.IdError) as err:
        w.drop(["Brisk", "Zellow"])
    check_error(err, vicino.IdError, ValueError)
    assert "'Zellow'" in str(err.value) and "drop" in str(err.value)
    assert "'Brisk'" not in str(err.value)


def test_drop_single_string_is_refused(w):
    # a string is a sequence of characters: refusing it avoids dropping 'B', 'r', ...
    with pytest.raises(vicino.IdError, match="one-dimensional"):
        w.drop("Brisk")


def test_align_with_missing_ids(w):
    with pytest.raises(vicino.IdError) as err:
        w.align(["Amberly", "Brisk", "Corvane"])
    check_error(err, vicino.IdError, ValueError)
    message = str(err.value)
    assert "'Dunmire'" in message and "not in the index" in message
    assert "subset" in message and "drop" in message  # says what to do


def test_align_with_extra_ids(w):
    with pytest.raises(vicino.IdError) as err:
        w.align(IDS + ["Elsworth"])
    check_error(err, vicino.IdError, ValueError)
    message = str(err.value)
    assert "'Elsworth'" in message and "not in the weights" in message
    assert "subset" in message or "drop" in message


def test_align_with_missing_and_extra_ids_names_both(w):
    with pytest.raises(vicino.IdError) as err:
        w.align(["Amberly", "Brisk", "Corvane", "Elsworth"])
    message = str(err.value)
    assert "'Dunmire'" in message and "'Elsworth'" in message


def test_align_with_repeated_ids(w):
    with pytest.raises(vicino.IdError, match="repeats") as err:
        w.align(IDS + ["Brisk"])
    check_error(err, vicino.IdError, ValueError)
    assert "'Brisk'" in str(err.value) and "unique" in str(err.value)


def test_align_to_a_dataframe_uses_its_index(w):
    df = pd.DataFrame({"rain": [3.0, 1.0, 4.0, 1.5]}, index=["Dunmire", "Corvane", "Brisk", "Amberly"])
    aligned = w.align(df)
    assert list(aligned.ids) == list(df.index)
    np.testing.assert_array_equal(aligned.to_dense(), w.to_dense()[::-1, ::-1])  # by hand: reversed order
    np.testing.assert_array_equal(aligned.lag(df["rain"]).to_numpy(), [0.0, 0.0, 1.5, 4.0])  # by hand
    with pytest.raises(vicino.IdError, match="'Dunmire'"):
        w.align(df.iloc[1:])  # a DataFrame missing a unit names it


def test_align_needs_a_flat_sequence(w):
    with pytest.raises(vicino.IdError, match="one-dimensional") as err:
        w.align("Amberly")
    check_error(err, vicino.IdError, ValueError)


# ---------------------------------------------------------------------------
# connect_islands / connect_components: locations
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("repair", ["connect_islands", "connect_components"])
def test_repair_with_wrong_number_of_locations(w, xy, repair):
    with pytest.raises(vicino.InvalidInputError) as err:
        getattr(w, repair)(xy[:3])
    check_error(err, vicino.InvalidInputError, ValueError)
    message = str(err.value)
    assert "3 locations" in message and "4 units" in message  # by hand
    assert "one location per unit" in message


def test_repair_with_dataframe_of_other_ids(w, xy):
    df = pd.DataFrame(xy, columns=["x", "y"], index=["Amberly", "Brisk", "Corvane", "Elsworth"])
    with pytest.raises(vicino.IdError) as err:
        w.connect_islands(df)
    check_error(err, vicino.IdError, ValueError)
    message = str(err.value)
    assert "'Dunmire'" in message and "'Elsworth'" in message  # which id lacks a location, which is extra


def test_repair_with_dataframe_in_another_order(w, xy):
    df = pd.DataFrame(xy[::-1], columns=["x", "y"], index=IDS[::-1])
    with pytest.raises(vicino.IdError, match="another order") as err:
        w.connect_islands(df)
    check_error(err, vicino.IdError, ValueError)
    assert "reindex(weights.ids)" in str(err.value)  # says what to do
    # the advice works: reindexed, the repair links each island (by hand: c -> b, d -> c)
    fixed = w.connect_islands(df.reindex(w.ids))
    assert fixed.audit().islands.empty


def test_repair_with_dataframe_of_other_length(w, xy):
    df = pd.DataFrame(np.vstack([xy, [[20.0, 0.0]]]), columns=["x", "y"], index=IDS + ["Elsworth"])
    with pytest.raises(vicino.VicinoError, match="5 locations") as err:
        w.connect_islands(df)
    assert isinstance(err.value, ValueError)


@pytest.mark.parametrize("k", [4, 5, 100])
def test_connect_islands_k_too_large(w, xy, k):
    with pytest.raises(vicino.InvalidParameterError, match=r"n - 1") as err:
        w.connect_islands(xy, k=k)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert f"k = {k}" in str(err.value) and "4 units" in str(err.value)


def test_connect_islands_largest_k_is_n_minus_one(w, xy):
    fixed = w.connect_islands(xy, k=3)
    # by hand: both islands link to all three others, both ways (the links are symmetric)
    expected = w.to_dense()
    expected[2:, :] = expected[:, 2:] = 1.0
    np.fill_diagonal(expected, 0.0)
    np.testing.assert_array_equal(fixed.to_dense(), expected)


@pytest.mark.parametrize("k", [0, -1])
def test_connect_islands_k_below_one(w, xy, k):
    with pytest.raises(vicino.InvalidParameterError, match="at least 1") as err:
        w.connect_islands(xy, k=k)
    check_error(err, vicino.InvalidParameterError, ValueError)


def test_connect_islands_k_of_wrong_type(w, xy):
    with pytest.raises(vicino.InvalidParameterTypeError, match="whole number") as err:
        w.connect_islands(xy, k="1")
    check_error(err, vicino.InvalidParameterTypeError, TypeError)
    with pytest.raises(vicino.InvalidParameterError, match="whole number") as err:
        w.connect_islands(xy, k=1.0)  # a float, even a round one, is not a whole number (as in order)
    check_error(err, vicino.InvalidParameterError, ValueError)


@pytest.mark.parametrize("repair", ["connect_islands", "connect_components"])
@pytest.mark.parametrize("weight", [0, 0.0, -1.0, np.nan, np.inf, -np.inf])
def test_repair_weight_must_be_finite_and_positive(w, xy, repair, weight):
    with pytest.raises(vicino.InvalidParameterError, match="finite number > 0") as err:
        getattr(w, repair)(xy, weight=weight)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert str(float(weight)) in str(err.value)  # names the value given


@pytest.mark.parametrize("weight", ["1", None, True])
def test_repair_weight_of_wrong_type(w, xy, weight):
    with pytest.raises(vicino.InvalidParameterTypeError, match="weight must be a number") as err:
        w.connect_islands(xy, weight=weight)
    check_error(err, vicino.InvalidParameterTypeError, TypeError)


@pytest.mark.parametrize("repair", ["connect_islands", "connect_components"])
@pytest.mark.parametrize("metric", ["manhattan", "Euclidean", None])
def test_repair_unknown_metric(w, xy, repair, metric):
    with pytest.raises(vicino.InvalidParameterError, match="unknown metric") as err:
        getattr(w, repair)(xy, metric=metric)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert "'euclidean'" in str(err.value) and "'great_circle'" in str(err.value)  # lists what to use


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_connect_islands_island_without_a_location_names_it(w, xy, bad):
    p = xy.copy()
    p[3, 1] = bad  # Dunmire, an island
    with pytest.raises(vicino.InvalidInputError) as err:
        w.connect_islands(p)
    check_error(err, vicino.InvalidInputError, ValueError)
    message = str(err.value)
    assert "'Dunmire'" in message and err.value.ids == ["Dunmire"]
    assert "drop" in message  # says what to do


def test_connect_components_unit_without_a_location_names_it(w, xy):
    p = xy.copy()
    p[2, 0] = np.nan  # Corvane, a component of one
    with pytest.raises(vicino.InvalidInputError) as err:
        w.connect_components(p)
    check_error(err, vicino.InvalidInputError, ValueError)
    assert "'Corvane'" in str(err.value) and "drop" in str(err.value)


@pytest.mark.parametrize("repair", ["connect_islands", "connect_components"])
def test_repair_refuses_nan_coordinates_of_linked_units(w, xy, repair):
    p = xy.copy()
    p[1, 1] = np.nan  # Brisk has a neighbour; its location is nonetheless unusable
    with pytest.raises(vicino.InvalidInputError, match="Brisk"):
        getattr(w, repair)(p)


def test_repair_refuses_text_coordinates(w):
    with pytest.raises(vicino.InvalidTypeError, match="numbers") as err:
        w.connect_islands([["0", "0"], ["1", "0"], ["2", "0"], ["3", "0"]])
    check_error(err, vicino.InvalidTypeError, TypeError)


def test_repair_refuses_latitude_out_of_range(w):
    lonlat = [[0, 0], [1, 0], [2, 0], [3, 95]]
    with pytest.raises(vicino.InvalidInputError, match=r"\[-90, 90\]") as err:
        w.connect_islands(lonlat, metric="great_circle")
    assert "'Dunmire'" in str(err.value)


# ---------------------------------------------------------------------------
# connect_islands with polygons
# ---------------------------------------------------------------------------
def test_polygon_island_with_empty_geometry_names_its_id():
    shapely = pytest.importorskip("shapely")
    # ids that are not positions, so a message naming a position cannot pass for one naming an id
    ids = [40, 30, 20, 10]
    shapes = pd.Series(
        [shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1), shapely.box(5, 5, 6, 6), shapely.Polygon()],
        index=ids,
    )
    with pytest.warns(UserWarning, match="empty geometry"):
        w = vicino.contiguity(shapes)
    assert list(w.islands) == [20, 10]  # by hand: the far box and the empty one
    with pytest.raises(vicino.InvalidInputError) as err:
        w.connect_islands(shapes)
    check_error(err, vicino.InvalidInputError, ValueError)
    message = str(err.value)
    assert "10" in message and err.value.ids == [10]
    assert not re.search(r"\b3\b", message)  # position 3 is not named as if it were an id
    assert "drop" in message  # says what to do
    # the advice works: without the empty unit, the other island is linked
    kept = w.drop([10])
    fixed = kept.connect_islands(shapes.drop(10))
    assert fixed.audit().islands.empty


def test_polygon_island_with_empty_geometry_named_by_label():
    shapely = pytest.importorskip("shapely")
    shapes = pd.Series(
        [shapely.Polygon(), shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1)], index=["Zedmoor", "Yarrow", "Xentby"]
    )
    with pytest.warns(UserWarning):
        w = vicino.contiguity(shapes)
    with pytest.raises(vicino.InvalidInputError, match="'Zedmoor'") as err:
        w.connect_islands(shapes)
    assert err.value.ids == ["Zedmoor"]
    assert "position" not in str(err.value)


def test_polygon_input_with_wrong_order_is_refused():
    shapely = pytest.importorskip("shapely")
    shapes = pd.Series(
        [shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1), shapely.box(5, 0, 6, 1)], index=["Ostby", "Pellow", "Quarne"]
    )
    w = vicino.contiguity(shapes)
    with pytest.raises(vicino.IdError, match="another order"):
        w.connect_islands(shapes.iloc[::-1])


# ---------------------------------------------------------------------------
# nothing to repair
# ---------------------------------------------------------------------------
def test_connect_components_on_a_connected_map_changes_nothing(xy):
    m = np.ones((4, 4)) - np.eye(4)
    m[0, 3] = m[3, 0] = 0.0  # still one group: every unit is linked to Brisk or Corvane
    w = vicino.from_matrix(m, ids=IDS)
    fixed = w.connect_components(xy)
    np.testing.assert_array_equal(fixed.to_dense(), m)  # reference: the matrix before the repair
    step = fixed.recipe[-1]
    assert step.action == "connect_components" and step.params["links_added"] == 0


def test_connect_islands_without_islands_changes_nothing(xy):
    m = np.zeros((4, 4))
    for i, j in [(0, 1), (1, 2), (2, 3)]:
        m[i, j] = m[j, i] = 1.0
    w = vicino.from_matrix(m, ids=IDS)
    fixed = w.connect_islands(xy)
    np.testing.assert_array_equal(fixed.to_dense(), m)  # reference: the matrix before the repair
    assert fixed.recipe[-1].params["links_added"] == 0
