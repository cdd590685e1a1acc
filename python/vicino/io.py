"""Weights files: write them for R, MATLAB / Octave and SciPy, and read them back.

Formats, chosen from the file name's suffix unless given:

========== ================= ===================================================
format     suffixes          holds
========== ================= ===================================================
``mtx``    .mtx .mm          Matrix Market coordinate real, ``general`` or
                             ``symmetric`` (lower triangle); R ``Matrix::readMM``,
                             ``scipy.io.mmread``
``triplet`` .txt .tri .dat   1-based ``i j w`` lines ending with ``n n 0``;
                             MATLAB / Octave ``spconvert(load(path))``
``npz``    .npz              ``scipy.sparse.load_npz`` reads the matrix; ids,
                             recipe and per-link facts are stored in the same
                             archive
``csv``    .csv              an edge table: ``source``, ``target``, ``weight``,
                             then the per-link facts
``parquet`` .parquet .pq     the same edge table, with the ids and the recipe in
                             the file's metadata (needs pyarrow)
========== ================= ===================================================

Ids: the text formats (``mtx``, ``triplet``, ``csv``) keep them in a
sidecar file beside the weights, named after it with ``.ids.csv`` added
(``w.mtx`` → ``w.mtx.ids.csv``): one column whose header is ``id:int64`` or
``id:str`` (the dtype the ids come back with), then one id per line, in row
order. ``npz`` and ``parquet`` hold them inside. The recipe travels in a
comment line of ``mtx`` and ``triplet`` files (``%vicino {...}``), which R,
Octave and SciPy skip, and inside ``npz`` and ``parquet``; per-link facts
(``distance``, ``border_length``) travel in ``npz`` and in the edge tables.

Every write goes to a temporary file in the same folder and is renamed over
the target only when complete, so a failed or interrupted write never leaves
a half-written file under the target name, nor harms the file that was there.
"""

from __future__ import annotations

import json
import os
import tempfile
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager, suppress
from pathlib import Path
from typing import Any, Literal

import numpy as np
import pandas as pd

from . import _gateway as core
from ._checks import choice
from ._ids import examples, positions
from .errors import FileAccessError, FileFormatError, InvalidInputError, InvalidParameterError, VicinoError
from .weights import Step, Weights, built, core_matrix, link_facts, unit_facts

Format = Literal["mtx", "triplet", "npz", "csv", "parquet"]
FORMATS = ("mtx", "triplet", "npz", "csv", "parquet")
SUFFIXES = {
    ".mtx": "mtx",
    ".mm": "mtx",
    ".txt": "triplet",
    ".tri": "triplet",
    ".dat": "triplet",
    ".npz": "npz",
    ".csv": "csv",
    ".parquet": "parquet",
    ".pq": "parquet",
}
SIDECAR = ".ids.csv"
FORMAT_VERSION = 1


def _format_of(path: Path, format: str | None) -> str:
    if format is not None:
        return choice(format, "file format", FORMATS)
    found = SUFFIXES.get(path.suffix.lower())
    if found is None:
        known = ", ".join(sorted(SUFFIXES))
        raise InvalidParameterError(
            f"cannot tell the format of {str(path)!r} from its suffix; use one of {known}, or pass format="
        )
    return found


def sidecar_of(path: str | os.PathLike) -> Path:
    """The ids file that goes with a weights file: its name plus ``.ids.csv``."""
    p = Path(path)
    return p.with_name(p.name + SIDECAR)


# ---- ids -----------------------------------------------------------------------------------
def _ids_dtype(ids: pd.Index) -> str:
    """``int64`` or ``str``: the dtypes ids can be written with."""
    if pd.api.types.is_integer_dtype(ids.dtype) and not isinstance(ids, pd.MultiIndex):
        if pd.api.types.is_unsigned_integer_dtype(ids.dtype) and len(ids) and ids.max() > np.iinfo(np.int64).max:
            raise InvalidParameterError(
                f"the id {ids.max()} is beyond the int64 range files keep; write the ids as text "
                "(rebuild the weights with ids=[str(i) for i in ids])"
            )
        return "int64"
    if not isinstance(ids, pd.MultiIndex) and pd.api.types.infer_dtype(ids, skipna=False) == "string":
        if any("\n" in s or "\r" in s for s in ids):
            raise InvalidParameterError("ids that contain line breaks cannot be written; replace the line breaks")
        return "str"
    raise InvalidParameterError(
        f"ids of dtype {ids.dtype} ({pd.api.types.infer_dtype(ids, skipna=False)}) cannot be written: files keep "
        "integer or text ids. Convert them first, for example w.align(...) after renaming, or rebuild the weights "
        "with ids=[str(i) for i in ids]"
    )


def _write_ids(ids: pd.Index, dtype: str, path: Path) -> None:
    """The ids file: whole numbers by the core, text through pandas (which quotes as CSV needs)."""
    if dtype == "int64":
        core.write_int_ids(str(path), ids)
    else:
        pd.DataFrame({f"id:{dtype}": np.asarray(ids)}).to_csv(path, index=False)


def _typed_ids(values: np.ndarray, dtype: str, where: str) -> pd.Index:
    if dtype == "int64":
        try:
            return pd.Index(values.astype(np.int64))
        except (TypeError, ValueError):
            raise FileFormatError(f"{where}: the ids are declared int64 but are not all whole numbers") from None
    if dtype == "str":
        return pd.Index(values.astype(str).tolist())  # pandas' own string dtype, as for ids given as str
    raise FileFormatError(f"{where}: unknown id dtype {dtype!r}; vicino writes int64 or str")


def _read_sidecar(path: Path, n: int | None) -> pd.Index:
    side = sidecar_of(path)
    if not side.exists():
        assert n is not None
        warnings.warn(
            f"no ids file {side.name} beside {path.name}: the units get the ids 0 .. {n - 1}",
            UserWarning,
            stacklevel=4,
        )
        return pd.RangeIndex(n)
    ids = _ids_in(side)
    if n is not None and len(ids) != n:
        raise FileFormatError(f"{side}: {len(ids)} ids for the {n} units of {path.name}; give one id per unit")
    if not ids.is_unique:
        raise FileFormatError(
            f"{side}: ids repeat: {examples(ids[ids.duplicated()].unique())}; each unit needs its own id"
        )
    return ids


def _ids_in(side: Path) -> pd.Index:
    """The ids of an ids file: whole numbers read by the core, text by pandas (CSV quoting)."""
    ints, _ = core.read_int_ids(str(side))
    if ints is not None:
        return pd.Index(ints)
    try:
        frame = pd.read_csv(side, dtype=str, keep_default_na=False, na_filter=False)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise FileFormatError(
            f"{side}: not an ids file ({exc}); it holds a header id:int64 or id:str, then one id per line"
        ) from None
    if frame.shape[1] != 1 or not str(frame.columns[0]).startswith("id:"):
        raise FileFormatError(f"{side}, line 1: the header must be id:int64 or id:str, got {list(frame.columns)}")
    return _typed_ids(frame.iloc[:, 0].to_numpy(), str(frame.columns[0])[3:], str(side))


# ---- the record -------------------------------------------------------------------------------
def _record(w: Weights, **extra: Any) -> dict[str, Any]:
    return {
        "format": "vicino weights",
        "version": FORMAT_VERSION,
        "n": w.n,
        "recipe": [[s.action, dict(s.params)] for s in w.recipe],
        "duplicate_locations": w.duplicate_locations,
        **extra,
    }


def _json(record: dict[str, Any]) -> str:
    try:
        return json.dumps(record, separators=(",", ":"), allow_nan=False)
    except (TypeError, ValueError):
        # a recipe parameter JSON cannot hold (rare): keep its text
        record = {**record, "recipe": [[a, {k: str(v) for k, v in p.items()}] for a, p in record["recipe"]]}
        return json.dumps(record, separators=(",", ":"))


def _parse_record(text: str | None, where: str) -> dict[str, Any]:
    if not text:
        return {}
    try:
        record = json.loads(text)
    except json.JSONDecodeError as exc:
        raise FileFormatError(f"{where}: the vicino record is not valid JSON ({exc.msg})") from None
    if not isinstance(record, dict) or record.get("format") != "vicino weights":
        raise FileFormatError(f"{where}: the vicino record is not one this version reads")
    return record


def _recipe(record: dict[str, Any], fmt: str, path: Path) -> tuple[Step, ...]:
    steps = tuple(Step(str(a), dict(p)) for a, p in record.get("recipe", []))
    return (*steps, Step("read", {"format": fmt, "file": path.name}))


# ---- atomic writes --------------------------------------------------------------------------------
@contextmanager
def _atomic(*targets: Path) -> Iterator[list[Path]]:
    """Temporary paths in the targets' folders; renamed over the targets only if the block succeeds."""
    temps: list[Path] = []
    try:
        for t in targets:
            if t.is_dir():
                raise FileAccessError(f"cannot write {t}: it is a folder")
            fd, name = tempfile.mkstemp(prefix=f".{t.name}.", suffix=".partial", dir=t.parent)
            os.close(fd)
            temps.append(Path(name))
        yield temps
        for tmp, t in zip(temps, targets, strict=True):
            os.replace(tmp, t)
    except FileNotFoundError as exc:
        raise FileAccessError(f"cannot write {targets[0]}: {exc.strerror} ({exc.filename})") from None
    except PermissionError as exc:
        raise FileAccessError(f"cannot write {targets[0]}: permission denied") from exc
    finally:
        for tmp in temps:
            with suppress(FileNotFoundError):
                tmp.unlink()


# ---- writers -----------------------------------------------------------------------------------------
def _write_text(w: Weights, path: Path, fmt: str) -> None:
    dtype = _ids_dtype(w.ids)
    side = sidecar_of(path)
    with _atomic(path, side) as (tmp, tmp_ids):
        record = _record(w, ids={"file": side.name, "dtype": dtype})
        writer = core.write_matrix_market if fmt == "mtx" else core.write_triplet
        writer(str(tmp), core_matrix(w), _json(record), w.ids)
        _write_ids(w.ids, dtype, tmp_ids)


def _write_npz(w: Weights, path: Path) -> None:
    m = w.to_scipy()
    dtype = _ids_dtype(w.ids)
    arrays: dict[str, Any] = {
        "indices": m.indices,
        "indptr": m.indptr,
        "format": b"csr",
        "shape": np.array(m.shape),
        "data": m.data,
        "_is_array": True,
        "vicino_record": np.array(_json(_record(w, ids={"dtype": dtype}))),
        "vicino_ids": np.asarray(w.ids, dtype=np.int64 if dtype == "int64" else str),
    }
    for name, values in link_facts(w).items():
        arrays[f"vicino_link_{name}"] = values
    for name, values in unit_facts(w).items():
        arrays[f"vicino_unit_{name}"] = values
    with _atomic(path) as (tmp,), open(tmp, "wb") as f:
        np.savez(f, **arrays)


def _edge_table(w: Weights) -> pd.DataFrame:
    return w.to_edges()


def _write_csv(w: Weights, path: Path) -> None:
    dtype = _ids_dtype(w.ids)
    side = sidecar_of(path)
    with _atomic(path, side) as (tmp, tmp_ids):
        _edge_table(w).to_csv(tmp, index=False)
        _write_ids(w.ids, dtype, tmp_ids)


def _write_parquet(w: Weights, path: Path) -> None:
    pa, pq = _pyarrow()
    dtype = _ids_dtype(w.ids)
    record = _record(w, ids={"dtype": dtype, "values": [v.item() if hasattr(v, "item") else v for v in w.ids]})
    table = pa.Table.from_pandas(_edge_table(w), preserve_index=False)
    table = table.replace_schema_metadata({**(table.schema.metadata or {}), b"vicino": _json(record).encode()})
    with _atomic(path) as (tmp,):
        pq.write_table(table, tmp)


def _pyarrow() -> tuple[Any, Any]:
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError:
        raise InvalidParameterError("Parquet files need pyarrow: pip install 'vicino[parquet]'") from None
    return pa, pq


def write(w: Weights, path: str | os.PathLike, format: Format | None = None) -> Path:
    """Write weights to a file (see the module notes for the formats); returns the path written."""
    if not isinstance(w, Weights):
        raise InvalidParameterError(f"write needs vicino.Weights, got {type(w).__name__}")
    p = Path(path)
    fmt = _format_of(p, format)
    if fmt in ("mtx", "triplet"):
        _write_text(w, p, fmt)
    elif fmt == "npz":
        _write_npz(w, p)
    elif fmt == "csv":
        _write_csv(w, p)
    else:
        _write_parquet(w, p)
    return p


# ---- readers -------------------------------------------------------------------------------------------
def _read_text(path: Path, fmt: str) -> Weights:
    reader = core.read_matrix_market if fmt == "mtx" else core.read_triplet
    n, csr, text, _, pattern = reader(str(path))
    record = _parse_record(text, str(path))
    ids = _read_sidecar(path, n)
    steps = _recipe(record, fmt, path)
    if pattern:
        steps = (*steps, Step("note", {"pattern": "every stored entry weighs 1"}))
    return built(csr, ids, steps, duplicates=record.get("duplicate_locations"))


def _canonical_npz(
    path: Path, shape: tuple[int, int], indptr: Any, indices: Any, data: Any
) -> tuple[tuple[Any, Any, Any], bool]:
    """The CSR arrays of an archive, canonical, and whether they passed the core's full check.

    As they are when they already are canonical (vicino's own files and most others: the core checks
    them), else sorted and with zeros dropped by scipy.
    """
    if data.dtype.kind not in "iuf":
        raise FileFormatError(f"{path}: the weights have dtype {data.dtype}; weights must be real numbers")
    arrays = tuple(a.astype(t, copy=False) for a, t in ((indptr, np.int64), (indices, np.int64), (data, np.float64)))
    for arr in arrays:
        arr.flags.writeable = False  # fresh from the archive: nobody else holds them, no snapshot needed
    try:
        core.validate(shape[0], arrays[0], arrays[1], arrays[2], None)
        return (arrays[0], arrays[1], arrays[2]), True
    except VicinoError:
        pass  # not canonical: let scipy sort it out, then check again
    import scipy.sparse as sp

    try:
        m = sp.csr_array((data, indices, indptr), shape=shape)
    except ValueError as exc:
        raise FileFormatError(f"{path}: the sparse arrays do not fit together ({exc})") from None
    m = m.astype(np.float64)
    m.eliminate_zeros()
    m.sort_indices()
    if not m.has_canonical_format:
        raise FileFormatError(f"{path}: the matrix stores some entries twice; each link must appear once")
    return (m.indptr, m.indices, m.data), False


def _read_npz(path: Path) -> Weights:
    try:
        archive = np.load(path, allow_pickle=False)
    except (OSError, ValueError) as exc:
        raise FileFormatError(f"{path}: not a NumPy .npz archive ({exc})") from None
    with archive as a:
        missing = [k for k in ("format", "shape", "data", "indices", "indptr") if k not in a]
        if missing:
            raise FileFormatError(
                f"{path}: not a SciPy sparse archive (no {', '.join(missing)}); write it with save_npz"
            )
        fmt = a["format"].item()
        fmt = fmt.decode("ascii") if isinstance(fmt, bytes) else str(fmt)
        if fmt != "csr":
            raise FileFormatError(f"{path}: a {fmt!r} sparse archive; convert it to CSR (matrix.tocsr()) first")
        shape = tuple(int(s) for s in a["shape"])
        if len(shape) != 2 or shape[0] != shape[1] or shape[0] == 0:
            raise FileFormatError(f"{path}: the matrix has shape {shape}; weights need a square matrix")
        n = shape[0]
        csr, checked = _canonical_npz(path, (n, n), a["indptr"], a["indices"], a["data"])
        record = _parse_record(a["vicino_record"].item() if "vicino_record" in a else None, str(path))
        if "vicino_ids" in a:
            ids = _typed_ids(a["vicino_ids"], record.get("ids", {}).get("dtype", "str"), str(path))
            if len(ids) != n:
                raise FileFormatError(f"{path}: {len(ids)} ids for {n} units; give one id per unit")
        else:
            warnings.warn(f"{path.name} holds no ids: the units get the ids 0 .. {n - 1}", UserWarning, stacklevel=3)
            ids = pd.RangeIndex(n)
        links = {k[len("vicino_link_") :]: a[k] for k in a if k.startswith("vicino_link_")}
        units = {k[len("vicino_unit_") :]: a[k] for k in a if k.startswith("vicino_unit_")}
    try:
        indptr, indices, data = csr if checked else core.validate(n, *csr, ids)
    except VicinoError as err:
        raise FileFormatError(f"{path}: {err}") from None
    if links and any(len(v) != len(data) for v in links.values()):
        links = {}  # the facts no longer line up (zeros were dropped): leave them out
    return built(
        (indptr, indices, data),
        ids,
        _recipe(record, "npz", path),
        links=links,
        units=units,
        duplicates=record.get("duplicate_locations", 0),
    )


def _from_edge_table(
    table: pd.DataFrame, ids: pd.Index, where: str, line_of: Callable[[int], str], recipe: tuple[Step, ...]
) -> Weights:
    need = [c for c in ("source", "target", "weight") if c not in table.columns]
    if need:
        raise FileFormatError(
            f"{where}: the edge table has no column {', '.join(need)}; it needs source, target, weight"
        )
    rows = positions(ids, table["source"])
    cols = positions(ids, table["target"])
    unknown = np.flatnonzero((rows < 0) | (cols < 0))
    if len(unknown):
        e = int(unknown[0])
        bad = table["source"].iloc[e] if rows[e] < 0 else table["target"].iloc[e]
        raise FileFormatError(f"{where}, {line_of(e)}: the id {bad!r} is not among the {len(ids)} ids of the units")
    weight = pd.to_numeric(table["weight"], errors="coerce").to_numpy(dtype=np.float64)
    bad_w = np.flatnonzero(~np.isfinite(weight) | (weight <= 0))
    if len(bad_w):
        e = int(bad_w[0])
        raise FileFormatError(
            f"{where}, {line_of(e)}: the weight {table['weight'].iloc[e]!r} is not a finite number > 0"
        )
    try:
        csr, first, _, _ = core.from_edges(len(ids), rows, cols, weight, "error", "keep", ids, edge_name=line_of)
    except VicinoError as err:
        twice = sorted(getattr(err, "edges", []))
        if isinstance(err, InvalidInputError) and len(twice) == 2:  # the core found a link given twice
            a, b = twice
            raise FileFormatError(
                f"{where}: {line_of(a)} and {line_of(b)} both give the link from {ids[rows[b]]!r} to "
                f"{ids[cols[b]]!r}; each link must appear once"
            ) from None
        raise FileFormatError(f"{where}: {err}") from None
    facts = {
        c: pd.to_numeric(table[c], errors="coerce").to_numpy(dtype=np.float64)[first]
        for c in table.columns
        if c not in ("source", "target", "weight")
    }
    return built(csr, ids, recipe, links=facts)


def _read_csv(path: Path) -> Weights:
    side = sidecar_of(path)
    if side.exists():
        ids = _read_sidecar(path, None)
        as_str = not pd.api.types.is_integer_dtype(ids.dtype)
    else:
        ids, as_str = None, False
    try:
        table = pd.read_csv(
            path,
            dtype={"source": str, "target": str} if as_str or ids is None else None,
            keep_default_na=False,
            na_values=[""],
        )
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError, ValueError) as exc:
        raise FileFormatError(f"{path}: not a CSV edge table ({exc})") from None
    if ids is None:
        found = pd.Index(pd.concat([table.get("source", pd.Series([])), table.get("target", pd.Series([]))]).unique())
        warnings.warn(
            f"no ids file {side.name} beside {path.name}: the units are the {len(found)} ids that appear in the "
            "edges (units without links are lost)",
            UserWarning,
            stacklevel=3,
        )
        ids = found
    elif not as_str:
        for c in ("source", "target"):
            if c in table and not pd.api.types.is_integer_dtype(table[c]):
                raise FileFormatError(f"{path}: the {c} column must hold whole numbers, as the ids do")
    return _from_edge_table(
        table, ids, str(path), lambda e: f"line {e + 2}", (Step("read", {"format": "csv", "file": path.name}),)
    )


def _read_parquet(path: Path) -> Weights:
    pa, pq = _pyarrow()
    try:
        table = pq.read_table(path)
    except (OSError, pa.ArrowInvalid) as exc:
        raise FileFormatError(f"{path}: not a Parquet file ({exc})") from None
    meta = (table.schema.metadata or {}).get(b"vicino")
    record = _parse_record(meta.decode() if meta else None, str(path))
    frame = table.to_pandas()
    if record.get("ids", {}).get("values") is not None:
        ids = _typed_ids(np.asarray(record["ids"]["values"], dtype=object), record["ids"]["dtype"], str(path))
    else:
        ids = pd.Index(pd.concat([frame["source"], frame["target"]]).unique())
        warnings.warn(
            f"{path.name} holds no ids: the units are the ids that appear in the edges", UserWarning, stacklevel=3
        )
    return _from_edge_table(frame, ids, str(path), lambda e: f"row {e}", _recipe(record, "parquet", path))


def read(path: str | os.PathLike, format: Format | None = None) -> Weights:
    """Read weights written by :meth:`Weights.write` (or by SciPy, R, Octave in the same formats).

    Parameters
    ----------
    path : str or path-like
        The weights file. Its ids come from the sidecar ``<name>.ids.csv``
        for the text formats (a missing sidecar gives ids 0..n-1 and a
        warning), or from inside ``npz`` and ``parquet`` files.
    format : {"mtx", "triplet", "npz", "csv", "parquet"}, optional
        The file's format; by default taken from its suffix.

    Returns
    -------
    Weights
        With the ids, the recipe (plus a ``read`` step) and the per-link
        facts where the format holds them.

    Raises
    ------
    FileFormatError
        The file does not read as its format says; the message names the
        file and line.
    FileAccessError
        The file cannot be opened.
    """
    p = Path(path)
    fmt = _format_of(p, format)
    if not p.exists():
        raise FileAccessError(f"cannot read {p}: no such file")
    if fmt in ("mtx", "triplet"):
        return _read_text(p, fmt)
    if fmt == "npz":
        return _read_npz(p)
    if fmt == "csv":
        return _read_csv(p)
    return _read_parquet(p)
