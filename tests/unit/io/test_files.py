"""Weights files: exact round trips of every format, readers safe on bad files, atomic writes.

References: scipy.io.mmread / mmwrite and scipy.sparse.load_npz for what the
files hold; the Matrix Market description (Boisvert, Pozo and Remington 1996,
NISTIR 5935) for the header rules; the spconvert convention (1-based
triplets, a closing n n 0 line) for triplet files.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.io
import scipy.sparse as sp

import vicino
from vicino import io as vio

FORMATS = {"mtx": ".mtx", "triplet": ".txt", "npz": ".npz", "csv": ".csv"}
try:
    import pyarrow  # noqa: F401

    FORMATS["parquet"] = ".parquet"
except ImportError:  # pragma: no cover - pyarrow is optional
    pass


def random_weights(n: int, seed: int, *, symmetric: bool, ids: str, islands=(0, None, -1)) -> vicino.Weights:
    """Random weights with islands at the start, middle and end (positions), string or integer ids."""
    rng = np.random.default_rng(seed)
    m = sp.random_array((n, n), density=0.15, rng=rng, format="lil")
    m.setdiag(0)
    dense = m.toarray()
    dense[dense > 0] = rng.random(int((dense > 0).sum())) * 10 ** rng.uniform(-5, 5, int((dense > 0).sum()))
    lonely = [0, n // 2, n - 1]
    dense[lonely, :] = 0
    dense[:, lonely] = 0
    if symmetric:
        dense = np.maximum(dense, dense.T)
    labels = [f"unit {i}" for i in range(n)] if ids == "str" else list(range(100, 100 + 3 * n, 3))
    return vicino.from_matrix(dense, ids=labels)


def same(a: vicino.Weights, b: vicino.Weights) -> None:
    assert a.ids.equals(b.ids)
    assert pd.api.types.infer_dtype(a.ids) == pd.api.types.infer_dtype(b.ids)  # int or str, as written
    assert a.ids.dtype.kind == b.ids.dtype.kind
    da, db = a.to_scipy(), b.to_scipy()
    np.testing.assert_array_equal(da.indptr, db.indptr)
    np.testing.assert_array_equal(da.indices, db.indices)
    np.testing.assert_array_equal(da.data, db.data)  # exact: floats round-trip bit for bit


@pytest.mark.parametrize("fmt", sorted(FORMATS))
@pytest.mark.parametrize("symmetric", [False, True])
@pytest.mark.parametrize("ids", ["str", "int"])
def test_round_trips_are_exact_with_islands_and_ids(tmp_path, fmt, symmetric, ids):
    w = random_weights(40, seed=len(fmt) + symmetric, symmetric=symmetric, ids=ids)
    assert set(w.islands) >= {w.ids[0], w.ids[20], w.ids[-1]}  # islands at the start, middle and end
    path = w.write(tmp_path / f"w{FORMATS[fmt]}")
    back = vicino.read(path)
    same(w, back)
    assert back.recipe[-1].action == "read" and back.recipe[-1].params["format"] == fmt
    if fmt in ("mtx", "triplet", "npz", "parquet"):
        assert back.recipe[:-1] == w.recipe  # the recipe survives where the format holds it
    assert list(back.islands) == list(w.islands)


def test_per_link_facts_survive_npz_and_edge_tables(tmp_path):
    xy = np.random.default_rng(3).random((30, 2))
    w = vicino.k_nearest(xy, 3, ids=[f"p{i}" for i in range(30)])
    for suffix in (".npz", ".csv"):
        back = vicino.read(w.write(tmp_path / f"w{suffix}"))
        pd.testing.assert_frame_equal(back.to_edges(), w.to_edges())  # distances exact
    assert vicino.read(w.write(tmp_path / "w.npz")).duplicate_locations == 0


def test_symmetric_weights_store_the_lower_triangle(tmp_path):
    w = random_weights(12, seed=5, symmetric=True, ids="int")
    path = w.write(tmp_path / "s.mtx")
    lines = path.read_text().splitlines()
    assert lines[0] == "%%MatrixMarket matrix coordinate real symmetric"  # reference: NIST banner
    entries = [line.split() for line in lines[3:]]
    assert all(int(i) >= int(j) for i, j, _ in entries)  # reference: NIST, symmetric files store i >= j
    assert int(lines[2].split()[2]) == len(entries) == (w.nnz + (w.to_scipy().diagonal() > 0).sum()) // 2
    m = scipy.io.mmread(path)  # reference: scipy reads it and mirrors the triangle
    assert abs(m.tocsr() - w.to_scipy()).max() == 0


def test_vicino_reads_what_scipy_writes(tmp_path):
    rng = np.random.default_rng(6)
    m = sp.random_array((25, 25), density=0.2, rng=rng, format="csr")
    m.setdiag(0)
    m.eliminate_zeros()
    for symmetry, matrix in (("general", m), ("symmetric", m + m.T)):
        path = tmp_path / f"{symmetry}.mtx"
        scipy.io.mmwrite(path, matrix, symmetry=symmetry)  # reference: scipy's own writer
        with pytest.warns(UserWarning, match="ids 0 .. 24"):
            w = vicino.read(path)
        np.testing.assert_array_equal(w.to_dense(), matrix.toarray())
    sp.save_npz(tmp_path / "m.npz", m)  # reference: scipy's npz
    with pytest.warns(UserWarning, match="no ids"):
        np.testing.assert_array_equal(vicino.read(tmp_path / "m.npz").to_dense(), m.toarray())


def test_scipy_reads_what_vicino_writes(tmp_path):
    w = random_weights(30, seed=7, symmetric=False, ids="str")
    m = scipy.io.mmread(w.write(tmp_path / "w.mtx"))  # reference: scipy.io.mmread
    np.testing.assert_array_equal(m.toarray(), w.to_dense())
    z = sp.load_npz(w.write(tmp_path / "w.npz"))  # reference: scipy.sparse.load_npz
    np.testing.assert_array_equal(z.toarray(), w.to_dense())


def test_triplet_file_ends_with_the_size_line(tmp_path):
    w = random_weights(10, seed=8, symmetric=False, ids="int")
    lines = w.write(tmp_path / "w.txt").read_text().splitlines()
    assert lines[-1] == "10 10 0"  # spconvert convention: the largest indices give the size
    body = np.array([[float(v) for v in line.split()] for line in lines[1:-1]])
    ref = w.to_scipy().tocoo()  # reference: scipy COO, 1-based
    got = {(int(i), int(j)): v for i, j, v in body}
    assert got == {(int(i) + 1, int(j) + 1): v for i, j, v in zip(ref.row, ref.col, ref.data)}


def test_ids_sidecar_is_one_typed_column(tmp_path):
    w = random_weights(8, seed=9, symmetric=False, ids="str")
    w.write(tmp_path / "w.mtx")
    side = (tmp_path / "w.mtx.ids.csv").read_text().splitlines()
    assert side[0] == "id:str" and side[1:] == [f"unit {i}" for i in range(8)]
    v = random_weights(8, seed=9, symmetric=False, ids="int")
    v.write(tmp_path / "v.txt")
    assert (tmp_path / "v.txt.ids.csv").read_text().splitlines()[:2] == ["id:int64", "100"]


def test_a_missing_sidecar_falls_back_to_positions_with_a_warning(tmp_path):
    w = random_weights(8, seed=10, symmetric=False, ids="str")
    path = w.write(tmp_path / "w.mtx")
    (tmp_path / "w.mtx.ids.csv").unlink()
    with pytest.warns(UserWarning, match="0 .. 7"):
        back = vicino.read(path)
    assert list(back.ids) == list(range(8))


def test_ids_of_other_types_are_refused_before_writing(tmp_path):
    ids = pd.MultiIndex.from_product([["a", "b"], [1, 2]])
    w = vicino.k_nearest(np.random.default_rng(11).random((4, 2)), 1, ids=ids)
    with pytest.raises(vicino.InvalidParameterError, match="integer or text ids"):
        w.write(tmp_path / "w.mtx")
    assert not list(tmp_path.iterdir())  # nothing written


# ---- bad files ----------------------------------------------------------------------------------------
BAD_MTX = {
    "no banner": ("1 2 3\n", 1, "banner"),
    "empty": ("", 1, "empty"),
    "complex": ("%%MatrixMarket matrix coordinate complex general\n2 2 1\n1 2 1 0\n", 1, "complex"),
    "hermitian": ("%%MatrixMarket matrix coordinate real hermitian\n2 2 1\n1 2 1\n", 1, "hermitian"),
    "skew": ("%%MatrixMarket matrix coordinate real skew-symmetric\n2 2 1\n1 2 1\n", 1, "skew-symmetric"),
    "dense": ("%%MatrixMarket matrix array real general\n2 2\n0\n1\n1\n0\n", 1, "array"),
    "not square": ("%%MatrixMarket matrix coordinate real general\n2 3 1\n1 2 1\n", 2, "square"),
    "no size": ("%%MatrixMarket matrix coordinate real general\n% only comments\n", 3, "size line"),
    "bad size": ("%%MatrixMarket matrix coordinate real general\n2 two 1\n", 2, "three whole numbers"),
    "count lies (more)": ("%%MatrixMarket matrix coordinate real general\n2 2 3\n1 2 1\n2 1 1\n", 4, "truncated"),
    "count lies (fewer)": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 2 1\n2 1 1\n", 4, "declares 1"),
    "index 0": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n0 2 1\n", 3, "start at 1"),
    "index beyond": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 3 1\n", 3, "beyond the 2 units"),
    "duplicate": ("%%MatrixMarket matrix coordinate real general\n2 2 2\n1 2 1\n1 2 5\n", 4, "second entry"),
    "symmetric duplicate": ("%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n2 1 1\n1 2 5\n", 4, "second"),
    "text weight": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 2 heavy\n", 3, "not a number"),
    "nan weight": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 2 nan\n", 3, "finite"),
    "inf weight": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 2 inf\n", 3, "finite"),
    "negative": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 2 -1\n", 3, "> 0"),
    "zero": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 2 0\n", 3, "> 0"),
    "missing weight": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 2\n", 3, "no weight"),
    "extra field": ("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 2 1 7\n", 3, "more fields"),
    "bad record": ("%%MatrixMarket matrix coordinate real general\n%vicino {not json\n2 2 1\n1 2 1\n", 2, "JSON"),
}


@pytest.mark.parametrize("case", sorted(BAD_MTX))
def test_bad_matrix_market_files_name_the_file_and_line(tmp_path, case):
    text, line, words = BAD_MTX[case]
    path = tmp_path / "bad.mtx"
    path.write_text(text)
    (tmp_path / "bad.mtx.ids.csv").write_text("id:int64\n1\n2\n")
    with pytest.raises(vicino.FileFormatError, match=words) as err:
        vicino.read(path)
    assert isinstance(err.value, ValueError)
    assert str(path) in str(err.value)
    if case != "bad record":
        assert f"line {line}" in str(err.value)


def test_pattern_files_read_as_binary_weights(tmp_path):
    path = tmp_path / "p.mtx"
    path.write_text("%%MatrixMarket matrix coordinate pattern general\n3 3 2\n1 2\n3 1\n")
    with pytest.warns(UserWarning):
        w = vicino.read(path)
    ref = scipy.io.mmread(path).toarray()  # reference: scipy reads a pattern file as ones
    np.testing.assert_array_equal(w.to_dense(), ref)
    assert w.recipe[-1].params == {"pattern": "every stored entry weighs 1"}


def test_a_header_declaring_a_trillion_entries_allocates_nothing(tmp_path):
    path = tmp_path / "big.mtx"
    path.write_text("%%MatrixMarket matrix coordinate real general\n3 3 1000000000000\n1 2 1\n")
    with pytest.raises(vicino.FileFormatError, match="declares 1000000000000 entries but the file holds 1"):
        vicino.read(path)
    path.write_text("%%MatrixMarket matrix coordinate real general\n1000000000000 1000000000000 1\n1 2 1\n")
    with pytest.raises((vicino.FileFormatError, vicino.TooLargeError)):
        vicino.read(path)


BAD_TRIPLET = {
    "text": ("1 2 x\n", 1, "not a number"),
    "index 0": ("1 2 1\n0 1 1\n", 2, "start at 1"),
    "duplicate": ("1 2 1\n2 1 1\n1 2 3\n", 3, "second entry"),
    "zero inside": ("1 2 0\n2 1 1\n", 1, "> 0"),
    "bad closing line": ("1 2 1\n3 2 0\n", 2, "same row and column"),
    "one field": ("1\n", 1, "one field"),
    "nan": ("1 2 nan\n", 1, "finite"),
}


@pytest.mark.parametrize("case", sorted(BAD_TRIPLET))
def test_bad_triplet_files_name_the_file_and_line(tmp_path, case):
    text, line, words = BAD_TRIPLET[case]
    path = tmp_path / "bad.txt"
    path.write_text(text)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(vicino.FileFormatError, match=words) as err:
            vicino.read(path)
    assert f"{path}, line {line}" in str(err.value)


def test_sidecar_problems_are_named(tmp_path):
    w = random_weights(6, seed=12, symmetric=False, ids="str")
    path = w.write(tmp_path / "w.mtx")
    side = tmp_path / "w.mtx.ids.csv"
    side.write_text("id:str\na\nb\n")
    with pytest.raises(vicino.FileFormatError, match="2 ids for the 6 units"):
        vicino.read(path)
    side.write_text("name\na\nb\nc\nd\ne\nf\n")
    with pytest.raises(vicino.FileFormatError, match="header must be id:int64 or id:str"):
        vicino.read(path)
    side.write_text("id:int64\n1\n2\nthree\n4\n5\n6\n")
    with pytest.raises(vicino.FileFormatError, match='line 4: the id "three" is not a whole number'):
        vicino.read(path)
    side.write_text("id:int64\n1\n2\n\n4\n5\n6\n")
    with pytest.raises(vicino.FileFormatError, match="line 4: the line is empty"):
        vicino.read(path)
    side.write_text("id:int64\n1\n2\n9223372036854775808\n4\n5\n6\n")  # 2**63: beyond int64
    with pytest.raises(vicino.FileFormatError, match="line 4"):
        vicino.read(path)
    side.write_text("id:int64\n1\n2\n3\n4\n5\n5\n")
    with pytest.raises(vicino.FileFormatError, match="repeat: 5"):
        vicino.read(path)
    side.write_text("id:int64\n1\n2\n3\n4\n5\n")
    with pytest.raises(vicino.FileFormatError, match="5 ids for the 6 units"):
        vicino.read(path)
    side.write_text("id:str\na\nb\na\nc\nd\ne\n")
    with pytest.raises(vicino.FileFormatError, match="repeat"):
        vicino.read(path)


@pytest.mark.parametrize("fmt", [".mtx", ".txt", ".csv"])
def test_whole_number_ids_survive_at_the_edges_of_int64(tmp_path, fmt):
    extremes = np.array([np.iinfo(np.int64).min, -1, 0, 7, 10**18, np.iinfo(np.int64).max], dtype=np.int64)
    w = vicino.from_matrix(np.ones((6, 6)) - np.eye(6), ids=extremes)
    back = vicino.read(w.write(tmp_path / f"w{fmt}"))
    # the ids file is plain text: pandas reads the same numbers (pandas as the outside reader)
    assert pd.read_csv(tmp_path / f"w{fmt}.ids.csv")["id:int64"].tolist() == extremes.tolist()
    assert back.ids.dtype == np.int64 and back.ids.tolist() == extremes.tolist()


def test_unsigned_ids_beyond_int64_are_refused(tmp_path):
    w = vicino.from_matrix(np.ones((2, 2)) - np.eye(2), ids=np.array([1, 2**63 + 5], dtype=np.uint64))
    with pytest.raises(vicino.InvalidParameterError, match="beyond the int64 range"):
        w.write(tmp_path / "w.mtx")
    assert not (tmp_path / "w.mtx").exists()


def test_bad_edge_tables_name_the_line(tmp_path):
    w = random_weights(20, seed=13, symmetric=False, ids="str")
    path = w.write(tmp_path / "w.csv")
    good = path.read_text().splitlines()
    cases = {
        "unknown id": (good[1].replace("unit", "nobody", 1), "not among the 20 ids"),
        "bad weight": (",".join(good[1].split(",")[:2] + ["heavy"] + good[1].split(",")[3:]), "not a finite number"),
    }
    for name, (line, words) in cases.items():
        path.write_text("\n".join([good[0], line, *good[2:]]) + "\n")
        with pytest.raises(vicino.FileFormatError, match=words) as err:
            vicino.read(path)
        assert "line 2" in str(err.value), name
    path.write_text("\n".join([good[0], good[1], good[1], *good[2:]]) + "\n")
    with pytest.raises(vicino.FileFormatError, match=r"line 2 and line 3 both give the link from .* must appear once"):
        vicino.read(path)


def test_unreadable_and_unknown_files(tmp_path):
    with pytest.raises(vicino.FileAccessError):
        vicino.read(tmp_path / "none.mtx")
    (tmp_path / "w.xyz").write_text("1 2 1\n")
    with pytest.raises(vicino.InvalidParameterError, match="suffix"):
        vicino.read(tmp_path / "w.xyz")
    (tmp_path / "junk.npz").write_bytes(b"not an archive")
    with pytest.raises(vicino.FileFormatError, match="npz"):
        vicino.read(tmp_path / "junk.npz")


# ---- atomic writes -------------------------------------------------------------------------------------
def test_a_failing_write_leaves_the_old_file_and_no_temporary(tmp_path, monkeypatch):
    old = random_weights(10, seed=14, symmetric=False, ids="str")
    path = old.write(tmp_path / "w.mtx")
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    new = random_weights(30, seed=15, symmetric=False, ids="str")

    real = vio.core.write_matrix_market

    def half_then_fail(target, *args):
        real(target, *args)  # the whole file is written to the temporary name ...
        Path(target).write_text(Path(target).read_text()[:50])  # ... cut short ...
        raise KeyboardInterrupt  # ... and the user presses Ctrl-C

    monkeypatch.setattr(vio.core, "write_matrix_market", half_then_fail)
    with pytest.raises(KeyboardInterrupt):
        new.write(path)
    after = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    assert after == before  # the old file and its ids untouched, nothing else left behind
    monkeypatch.undo()
    same(vicino.read(path), old)


def test_a_write_into_a_missing_folder_is_a_clear_error(tmp_path):
    w = random_weights(5, seed=16, symmetric=False, ids="int")
    with pytest.raises(vicino.FileAccessError, match="cannot write"):
        w.write(tmp_path / "no" / "such" / "w.mtx")


def test_writes_replace_an_existing_file_whole(tmp_path):
    a = random_weights(30, seed=17, symmetric=False, ids="str")
    b = random_weights(7, seed=18, symmetric=True, ids="str")
    path = a.write(tmp_path / "w.txt")
    b.write(path)
    same(vicino.read(path), b)
    assert sorted(os.listdir(tmp_path)) == ["w.txt", "w.txt.ids.csv"]


@pytest.mark.parametrize("symmetric", [False, True])
def test_every_spelling_of_a_float_reads_as_python_reads_it(tmp_path, symmetric):
    # Python's float() (correctly rounded) as the oracle: 17 significant digits, the shortest
    # form, subnormals, exponents near both ends of the range, mixed with comments and CRLF
    rng = np.random.default_rng(7)
    bits = rng.integers(1, 0x7FEFFFFFFFFFFFFF, size=3000, dtype=np.int64)
    uniform = rng.uniform(1e-3, 1, size=3000)  # plain decimals of 17 digits after the point
    values = np.concatenate([bits.view(np.float64), uniform, [5e-324, 2.2250738585072014e-308, 1.7976931348623157e308]])
    spellings = [f"{v:.16e}" for v in values] + [repr(float(v)) for v in values] + [f"{v:.17f}" for v in uniform]
    spellings += ["2.2250738585072011e-308", "9007199254740993", "0.1000000000000000055511151231257827", "1E22", ".5"]
    n = len(spellings)
    lines = ["%%MatrixMarket matrix coordinate real " + ("symmetric" if symmetric else "general"), f"{n} {n} {n}"]
    for k, s in enumerate(spellings):
        lines.append(f"{k + 1} {k + 1} {s}" + ("\r" if k % 5 == 0 else ""))
        if k % 97 == 0:
            lines.append("% a comment among the entries")
    path = tmp_path / "floats.mtx"
    path.write_text("\n".join(lines) + "\n")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # no ids file
        w = vicino.read(path)
    want = np.array([float(s) for s in spellings])
    np.testing.assert_array_equal(w.to_scipy().diagonal().view(np.int64), want.view(np.int64))
    # reference: numpy's own text-to-float conversion agrees with float()
    np.testing.assert_array_equal(np.array(spellings).astype(np.float64), want)


def test_a_symmetric_file_in_either_triangle_reads_as_scipy_reads_it(tmp_path):
    # reference: scipy.io.mmread mirrors the stored triangle of a symmetric file
    rng = np.random.default_rng(3)
    m = sp.random_array((400, 400), density=0.02, rng=rng, format="coo")
    m = sp.coo_array((m.data + 0.5, (m.row, m.col)), shape=m.shape).tocsr()
    full = (m + m.T).tocsr()
    for tri in (sp.tril(full).tocoo(), sp.triu(full).tocoo()):
        order = np.lexsort((tri.col, tri.row))
        body = "".join(
            f"{i + 1} {j + 1} {float(v)!r}\n"
            for i, j, v in zip(tri.row[order], tri.col[order], tri.data[order], strict=True)
        )
        path = tmp_path / "sym.mtx"
        path.write_text(f"%%MatrixMarket matrix coordinate real symmetric\n400 400 {tri.nnz}\n{body}")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            w = vicino.read(path)
        np.testing.assert_array_equal(w.to_dense(), scipy.io.mmread(path).toarray())
        np.testing.assert_array_equal(w.to_dense(), full.toarray())


@pytest.mark.parametrize(
    "ids",
    [np.arange(50), np.arange(-7, 43), np.array([0, 0, 2]), np.array([3, 1, 2]), np.array([0, 2, 3]), np.array([5])],
)
def test_positions_of_whole_number_ids_match_pandas(ids):
    from vicino._ids import positions

    index = pd.Index(ids)
    values = np.array([0, 1, 2, -7, -8, 42, 43, 49, 50, 5, np.iinfo(np.int64).max, np.iinfo(np.int64).min])
    if index.is_unique:
        # reference: pandas Index.get_indexer
        np.testing.assert_array_equal(positions(index, values), index.get_indexer(pd.Index(values)))
    else:
        with pytest.raises(pd.errors.InvalidIndexError):
            positions(index, values)  # like get_indexer: repeated ids have no one position


def test_an_edge_table_with_ids_k_to_k_plus_n_reads_back(tmp_path):
    # reference: scipy.sparse holds the same matrix after the round trip
    w = random_weights(40, seed=9, symmetric=False, ids="int")
    shifted = vicino.from_matrix(w.to_scipy(), ids=np.arange(1000, 1040))
    back = vicino.read(shifted.write(tmp_path / "e.csv"))
    assert list(back.ids) == list(range(1000, 1040))
    np.testing.assert_array_equal(back.to_scipy().toarray(), w.to_scipy().toarray())
