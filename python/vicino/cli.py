"""The command line: ``vicino`` (or ``python -m vicino``) and its subcommands.

``demo`` runs the worked example; ``build`` makes a weights file from points
or polygons; ``audit`` reports on a weights file; ``lag`` and ``moran`` use a
weights file on a table of values; ``convert`` rewrites a weights file in
another format. ``vicino COMMAND --help`` describes each.

Exit codes: 0 success; 2 a user error (one line on stderr says what is wrong
and what to do); 1 an internal error (a bug: one line asks for a report);
130 interrupted. ``--debug`` adds the traceback. Steps that take more than
about two seconds show a ticker on stderr when it is a terminal; ``--quiet``
silences it and the summaries.

This module only reads inputs, calls the library and writes its results.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import textwrap
import threading
import time
import traceback
import warnings
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any, NoReturn, TextIO, cast

import numpy as np
import pandas as pd

from . import __version__
from ._ids import examples, id_differences, make_ids
from .errors import (
    FileAccessError,
    FileFormatError,
    IdError,
    InternalError,
    InvalidInputError,
    InvalidParameterError,
    InvalidTypeError,
    IslandError,
    VicinoError,
)

if TYPE_CHECKING:
    from .build import Metric

OK, INTERNAL, USER, INTERRUPTED = 0, 1, 2, 130
TABLE_SUFFIXES = {".csv": "csv", ".parquet": "parquet", ".pq": "parquet"}
VECTOR_HINT = "a vector file (GeoPackage, GeoJSON, Shapefile, FlatGeobuf, ...)"
TICK_AFTER = 2.0  # seconds before a step shows its ticker
TICK_EVERY = 1.0  # seconds between ticks


class UsageError(InvalidParameterError):
    """A command line that does not parse: an unknown option, a missing argument, a bad value."""


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are exceptions (one line, exit 2), not a usage dump."""

    def error(self, message: str) -> NoReturn:
        command = self.prog.removeprefix("vicino").strip()
        raise UsageError(f"{command + ': ' if command else ''}{message} (see {self.prog} --help)")


# ---- progress --------------------------------------------------------------------------------
class Progress:
    """A ticker on stderr for steps that take a while: the step's name and the seconds elapsed.

    Parameters
    ----------
    enabled : bool
        Whether to tick at all (the command line enables it when stderr is a
        terminal and ``--quiet`` is not given).
    stream : file-like, optional
        Where to write (default: ``sys.stderr`` at the time of each step).
    after, every : float
        Seconds before the first tick, and between ticks.
    """

    def __init__(
        self, enabled: bool, stream: TextIO | None = None, *, after: float = TICK_AFTER, every: float = TICK_EVERY
    ) -> None:
        self.enabled = enabled
        self.stream = stream
        self.after = after
        self.every = every

    @contextmanager
    def step(self, name: str) -> Iterator[None]:
        """Run the body of the ``with`` block as one named step, ticking from a background thread."""
        if not self.enabled:
            yield
            return
        stream = self.stream if self.stream is not None else sys.stderr
        done = threading.Event()
        ok = [False]
        start = time.monotonic()

        def tick() -> None:
            if done.wait(self.after):
                return  # finished before the first tick: nothing shown
            while True:
                stream.write(f"\r{name} ... {time.monotonic() - start:.0f} s")
                stream.flush()
                if done.wait(self.every):
                    break
            end = f" done in {time.monotonic() - start:.1f} s" if ok[0] else ""
            stream.write(f"\r{name} ...{end}\n")
            stream.flush()

        ticker = threading.Thread(target=tick, name="vicino-progress", daemon=True)
        ticker.start()
        try:
            yield
            ok[0] = True
        finally:
            done.set()
            ticker.join()


# ---- reading inputs ----------------------------------------------------------------------------
def _existing(path: Path, what: str) -> Path:
    if not path.exists():
        raise FileAccessError(f"cannot read {path}: no such file (the {what})")
    if path.is_dir():
        raise FileAccessError(f"cannot read {path}: it is a folder, not a file (the {what})")
    return path


def _read_csv(path: Path, id_column: str | None = None, *, first_is_id: bool = False) -> pd.DataFrame:
    """A CSV file as a DataFrame; the id column (named, or else the first) is read as text, keeping leading zeros."""
    try:
        if first_is_id and id_column is None:
            header = pd.read_csv(path, nrows=0).columns
            id_column = str(header[0]) if len(header) else None
        return pd.read_csv(path, dtype={id_column: str} if id_column is not None else None)
    except PermissionError:
        raise FileAccessError(f"cannot read {path}: permission denied") from None
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError, ValueError) as exc:
        message = " ".join(str(exc).split())
        raise FileFormatError(f"{path}: not a readable CSV table ({message})") from None


def _read_parquet(path: Path) -> pd.DataFrame:
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        raise InvalidParameterError(f"reading {path.name} needs pyarrow: pip install 'vicino[parquet]'") from None
    try:
        return pd.read_parquet(path)
    except PermissionError:
        raise FileAccessError(f"cannot read {path}: permission denied") from None
    except (OSError, ValueError) as exc:
        raise FileFormatError(f"{path}: not a readable Parquet file ({' '.join(str(exc).split())})") from None


def _read_vector(path: Path, layer: str | None) -> Any:
    """A vector file as a GeoDataFrame (through geopandas and pyogrio)."""
    try:
        import geopandas
    except ImportError:
        raise InvalidParameterError(
            f"reading {path.name} needs geopandas: pip install 'vicino[vector]' (or give points as a CSV file)"
        ) from None
    errors: tuple[type[BaseException], ...] = (OSError, ValueError)
    try:
        from pyogrio.errors import DataLayerError, DataSourceError

        errors = (*errors, DataLayerError, DataSourceError)
    except ImportError:  # pragma: no cover - geopandas reads through another engine
        pass
    try:
        frame = geopandas.read_file(path, layer=layer)
    except errors as exc:
        message = " ".join(str(exc).split())
        raise FileFormatError(f"{path}: not readable as {VECTOR_HINT} ({message})") from None
    if not isinstance(frame, geopandas.GeoDataFrame) or frame.geometry.name not in frame.columns:
        raise FileFormatError(f"{path}: the file holds no geometries; give {VECTOR_HINT}, or a CSV of points")
    return frame


def _id_index(column: pd.Series, where: str) -> pd.Index:
    """The ids in a column, as whole numbers or text (the kinds of id a weights file keeps)."""
    if pd.api.types.is_bool_dtype(column.dtype):
        raise IdError(
            f"the id column {column.name!r} of {where} holds true/false values; ids are whole numbers or text"
        )
    if pd.api.types.is_float_dtype(column.dtype):
        whole = column.dropna()
        if not np.array_equal(whole, np.round(whole)):
            raise IdError(
                f"the id column {column.name!r} of {where} holds decimal numbers; ids are whole numbers or text"
            )
        if len(whole) == len(column):
            column = column.astype(np.int64)
    elif not pd.api.types.is_integer_dtype(column.dtype):
        column = column.astype(object).where(column.isna(), column.astype(str))
    return pd.Index(column.to_numpy(), name=column.name)


def _with_ids(frame: pd.DataFrame, id_column: str | None, where: str) -> pd.DataFrame:
    """The frame indexed by its id column (checked: present, complete, unique), or by row number."""
    if id_column is None:
        return frame
    if id_column not in frame.columns:
        raise IdError(f"{where} has no column {id_column!r} for --id (it has {examples(list(frame.columns))})")
    try:
        ids = make_ids(_id_index(frame[id_column], where), len(frame))
    except IdError as exc:
        raise IdError(f"{where}, id column {id_column!r}: {exc}") from None
    return frame.drop(columns=[id_column]).set_axis(ids, axis=0)


def _coordinate_columns(frame: pd.DataFrame, x: str | None, y: str | None, where: str) -> list[str]:
    """The coordinate columns: --x and --y, or found by name as vicino.k_nearest finds them."""
    from .geometry import _pick_columns

    if (x is None) != (y is None):
        raise InvalidParameterError("give both --x and --y, or neither (the columns are then found by name)")
    try:
        return _pick_columns(frame, None if x is None else (x, y))
    except InvalidInputError:
        if x is not None:
            missing = [c for c in (x, y) if c not in frame.columns]
            raise InvalidInputError(
                f"{where} has no column {examples(missing)} (it has {examples(list(frame.columns))})"
            ) from None
        raise InvalidInputError(
            f"cannot tell which columns of {where} hold the coordinates (it has {examples(list(frame.columns))}); "
            "name them with --x and --y"
        ) from None


def _geometry_kind(geometry: Any) -> str:
    """``points``, ``polygons`` or ``mixed``, from shapely's type ids (missing geometries ignored)."""
    import shapely

    kinds = shapely.get_type_id(np.asarray(geometry, dtype=object))
    kinds = kinds[kinds >= 0]
    if len(kinds) and np.isin(kinds, (0,)).all():
        return "points"
    if len(kinds) and np.isin(kinds, (3, 6)).all():
        return "polygons"
    return "mixed"


# ---- the weights file ---------------------------------------------------------------------------------
def _weights_path(path: Path) -> Path:
    """A path whose suffix names a weights format of vicino.io (checked before any work is done)."""
    from .io import SUFFIXES

    if path.suffix.lower() not in SUFFIXES:
        known = ", ".join(sorted(SUFFIXES))
        raise InvalidParameterError(f"cannot tell the weights format of {path} from its suffix; use one of {known}")
    return path


def _read_weights(path: str, progress: Progress) -> Any:
    from .io import read

    p = _weights_path(Path(path))
    _existing(p, "weights file")
    with progress.step(f"reading {p.name}"):
        return read(p)


def _write_weights(w: Any, path: Path, progress: Progress) -> list[Path]:
    from .io import SUFFIXES, sidecar_of

    with progress.step(f"writing {path.name}"):
        w.write(path)
    with_sidecar = SUFFIXES[path.suffix.lower()] in ("mtx", "triplet", "csv")
    return [path, sidecar_of(path)] if with_sidecar else [path]


def _standardized(w: Any, method: str | None, islands: str) -> Any:
    if method is None or method == "none":
        return w
    try:
        return w.standardize(method, islands=islands)
    except IslandError as exc:
        raise IslandError(
            f"{exc.count} unit(s) have no neighbours (islands), such as {examples(exc.ids)}; "
            f"{method} standardization needs neighbours for every unit: add --islands keep to leave their rows "
            "empty (their lag is 0), or build weights that reach them (--k always does)",
            count=exc.count,
            positions=exc.positions,
            ids=exc.ids,
        ) from None


# ---- tables of values ---------------------------------------------------------------------------------------
def _ids_like(column: pd.Series, ids: pd.Index, where: str) -> pd.Index:
    """The ids of a table, in the kind of the weights' ids (whole numbers or text)."""
    table_ids = _id_index(column, where)
    if pd.api.types.is_integer_dtype(ids.dtype):
        if not pd.api.types.is_integer_dtype(table_ids.dtype):
            try:
                table_ids = pd.Index(pd.to_numeric(pd.Series(table_ids), errors="raise").astype(np.int64))
            except (TypeError, ValueError):
                raise IdError(
                    f"the ids in column {column.name!r} of {where} are not all whole numbers, "
                    f"but the weights' ids are (such as {examples(list(ids[:3]))})"
                ) from None
    elif pd.api.types.is_integer_dtype(table_ids.dtype):
        table_ids = pd.Index(table_ids.astype(str), dtype=object)
    return table_ids


def _aligned(
    table: pd.DataFrame, where: str, id_column: str | None, columns: Sequence[str], ids: pd.Index, weights: str
) -> tuple[pd.DataFrame, pd.Index, str]:
    """The value columns in the order of the weights' ids, the table's own ids and the id column's name."""
    if table.shape[1] == 0:
        raise FileFormatError(f"{where} has no columns; it needs an id column and value columns")
    name = str(table.columns[0]) if id_column is None else id_column
    if name not in table.columns:
        raise IdError(f"{where} has no column {name!r} for --id (it has {examples(list(table.columns))})")
    unknown = [c for c in columns if c not in table.columns]
    if unknown:
        raise InvalidParameterError(
            f"{where} has no column {examples(unknown)} (it has {examples(list(table.columns))})"
        )
    if name in columns:
        raise InvalidParameterError(f"{name!r} is the id column of {where}; name value columns, or another --id")
    for c in columns:
        dtype = table[c].dtype
        if pd.api.types.is_bool_dtype(dtype) or not pd.api.types.is_numeric_dtype(dtype):
            text = table[c][pd.to_numeric(table[c], errors="coerce").isna() & table[c].notna()]
            found = f", such as {text.iloc[0]!r}" if len(text) else ""
            raise InvalidTypeError(
                f"column {c!r} of {where} is not numeric (it holds {dtype}{found}); give numbers, "
                "with an empty cell for a missing value"
            )
    try:
        table_ids = make_ids(_ids_like(table[name], ids, where), len(table))
    except IdError as exc:
        raise IdError(f"{where}, id column {name!r}: {exc}") from None
    parts = id_differences(
        ids, table_ids, missing="unit(s) of the weights without a row", extra="row(s) whose id is not a unit"
    )
    if parts:
        raise IdError(
            f"the rows of {where} do not match the units of {weights} by id (column {name!r}: "
            + "; ".join(parts)
            + "); give one row per unit, or choose the id column with --id"
        )
    values = table[list(columns)].set_axis(table_ids, axis=0).reindex(ids)
    return values, table_ids, name


def _read_values(
    args: argparse.Namespace, ids: pd.Index, columns: Sequence[str], progress: Progress
) -> tuple[pd.DataFrame, pd.Index, str]:
    """The table of values (.csv or .parquet) aligned to the weights' ids; see :func:`_aligned`."""
    p = Path(args.table)
    kind = TABLE_SUFFIXES.get(p.suffix.lower())
    if kind is None:
        raise InvalidParameterError(f"cannot tell the format of the table {p} from its suffix; use .csv or .parquet")
    _existing(p, "table")
    with progress.step(f"reading {p.name}"):
        table = _read_csv(p, args.id, first_is_id=True) if kind == "csv" else _read_parquet(p)
    return _aligned(table, str(p), args.id, columns, ids, args.weights)


def _write_table(frame: pd.DataFrame, out: str | None) -> None:
    """A result table as CSV on stdout, or in the file ``out`` (.csv or .parquet), written atomically."""
    if out is None:
        frame.to_csv(sys.stdout, index=False)
        return
    from .io import _atomic

    p = Path(out)
    kind = TABLE_SUFFIXES.get(p.suffix.lower())
    if kind is None:
        raise InvalidParameterError(f"cannot tell the format of {p} from its suffix; use .csv or .parquet for --out")
    if kind == "parquet":
        try:
            import pyarrow  # noqa: F401
        except ImportError:
            raise InvalidParameterError(f"writing {p.name} needs pyarrow: pip install 'vicino[parquet]'") from None
    with _atomic(p) as (tmp,):
        if kind == "csv":
            frame.to_csv(tmp, index=False)
        else:
            frame.to_parquet(tmp, index=False)


# ---- the subcommands ----------------------------------------------------------------------------------------------
def _run_demo(args: argparse.Namespace, progress: Progress) -> int:
    from .demo import run

    run(args.out, seed=args.seed, permutations=args.permutations)
    return OK


def _builder(args: argparse.Namespace) -> str:
    if args.rule is not None:
        if args.metric is not None:
            raise InvalidParameterError("--metric applies to --k and --radius; contiguity (--rule) has no metric")
        return "contiguity"
    if args.tolerance is not None:
        raise InvalidParameterError("--tolerance applies to contiguity (--rule); --k and --radius have none")
    return "k_nearest" if args.k is not None else "within_distance"


def _locations(args: argparse.Namespace, builder: str, where: str) -> tuple[Any, list[str] | None]:
    """What the builder takes (a frame of points with its coordinate columns, or polygons), indexed by id."""
    path = _existing(Path(args.input), "input")
    is_csv = path.suffix.lower() == ".csv"
    if is_csv and args.layer is not None:
        raise InvalidParameterError("--layer applies to vector files with several layers, not to a CSV file")
    if is_csv:
        if builder == "contiguity":
            raise InvalidParameterError(
                f"--rule needs polygons, but {where} is a CSV of points: give {VECTOR_HINT}, or use --k or --radius"
            )
        frame = _with_ids(_read_csv(path, args.id), args.id, where)
        return frame, _coordinate_columns(frame, args.x, args.y, where)
    frame = _with_ids(_read_vector(path, args.layer), args.id, where)
    if args.x is not None or args.y is not None:
        if builder == "contiguity":
            raise InvalidParameterError("--x and --y name coordinate columns of points; --rule uses the polygons")
        attributes = pd.DataFrame(frame.drop(columns=frame.geometry.name))
        return attributes, _coordinate_columns(attributes, args.x, args.y, where)
    kind = _geometry_kind(frame.geometry)
    if builder == "contiguity":
        if kind == "points":
            raise InvalidParameterError(f"--rule needs polygons, but {where} holds points; use --k or --radius")
        return frame.geometry, None
    if kind == "polygons":
        raise InvalidParameterError(
            f"--k and --radius need points, but {where} holds polygons; use --rule queen or --rule rook"
        )
    if frame.crs is not None and frame.crs.is_geographic and args.metric in (None, "euclidean"):
        warnings.warn(
            f"{where} is in longitude/latitude ({frame.crs.name}): euclidean distances are in degrees; "
            "add --metric great_circle for kilometres",
            UserWarning,
            stacklevel=2,
        )
    return frame.geometry, None


def _run_build(args: argparse.Namespace, progress: Progress) -> int:
    from .build import contiguity, k_nearest, within_distance

    builder = _builder(args)
    out = _weights_path(Path(args.output))
    where = str(args.input)
    if out.exists() and Path(args.input).exists() and out.resolve() == Path(args.input).resolve():
        raise InvalidParameterError(f"the output {out} is the input; write the weights to another file")
    with progress.step(f"reading {Path(args.input).name}"):
        locations, columns = _locations(args, builder, where)
    metric = cast("Metric", args.metric or "euclidean")
    if builder == "contiguity":
        with progress.step(f"{args.rule} contiguity"):
            w = contiguity(locations, args.rule, tolerance=args.tolerance or 0.0)
    elif builder == "k_nearest":
        with progress.step(f"{args.k} nearest neighbours"):
            w = k_nearest(locations, args.k, metric=metric, columns=columns)
    else:
        with progress.step(f"neighbours within {args.radius:g}"):
            w = within_distance(locations, args.radius, metric=metric, columns=columns)
    with progress.step(f"{args.standardize} standardization"):
        w = _standardized(w, args.standardize, args.islands)
    written = _write_weights(w, out, progress)
    if not args.quiet:
        print(repr(w))
        print("wrote " + " and ".join(str(p) for p in written))
    return OK


def _audit_record(report: Any) -> dict[str, Any]:
    """The audit as plain JSON values: facts, neighbour counts and findings."""

    def plain(values: Any) -> list[Any]:
        return np.asarray(values).tolist()

    worst = report.max_asymmetry
    return {
        "units": report.n,
        "links": report.links,
        "neighbours": {k: float(v) if k in ("median", "mean") else int(v) for k, v in report.summary.items()},
        "islands": plain(report.islands),
        "components": {"count": report.components.count, "sizes": plain(report.components.sizes)},
        "symmetric": bool(report.symmetric),
        "one_way_links": report.one_way_links,
        "max_asymmetry": None
        if worst is None
        else {"difference": worst[0], "between": plain(pd.Index([worst[1], worst[2]], dtype=object))},
        "zero_columns": plain(report.zero_columns),
        "self_links": report.self_links,
        "density": report.density,
        "duplicate_locations": report.duplicate_locations,
        "histogram": [
            {"neighbours": str(a), "units": int(b)}
            for a, b in zip(report.histogram["neighbours"], report.histogram["units"], strict=True)
        ],
        "findings": [{"level": f.level, "check": f.check, "message": f.message} for f in report.findings],
    }


def _run_audit(args: argparse.Namespace, progress: Progress) -> int:
    w = _read_weights(args.weights, progress)
    with progress.step("audit"):
        report = w.audit()
    if args.format == "csv":
        _write_table(report.to_frame(), args.out)
        return OK
    text = repr(report) + "\n" if args.format == "text" else json.dumps(_audit_record(report), indent=2) + "\n"
    if args.out is None:
        sys.stdout.write(text)
    else:
        from .io import _atomic

        with _atomic(Path(args.out)) as (tmp,):
            tmp.write_text(text, encoding="utf-8")
    return OK


def _run_lag(args: argparse.Namespace, progress: Progress) -> int:
    w = _standardized(_read_weights(args.weights, progress), args.standardize, args.islands)
    values, table_ids, name = _read_values(args, w.ids, args.columns, progress)
    with progress.step("spatial lag"):
        lagged = w.lag(values)
    out = lagged.reindex(table_ids).set_axis([f"{c}_lag" for c in args.columns], axis=1)
    _write_table(out.rename_axis(name).reset_index(), args.out)
    return OK


def _moran_row(column: str, r: Any) -> dict[str, Any]:
    row: dict[str, Any] = {"column": column, "n": r.n, "I": r.statistic, "expected": r.expected}
    for inference in (r.normality, r.randomization):
        for field in ("variance", "z", "p_value"):
            row[f"{field.removesuffix('_value')}_{inference.assumption}"] = getattr(inference, field)
    if r.permutation is not None:
        p = r.permutation
        row.update({"z_permutation": p.z, "p_permutation": p.p_value, "permutations": p.permutations, "seed": p.seed})
    row["alternative"] = r.alternative
    return row


def _run_moran(args: argparse.Namespace, progress: Progress) -> int:
    from .stats import moran

    w = _standardized(_read_weights(args.weights, progress), args.standardize, args.islands)
    values, _, _ = _read_values(args, w.ids, args.column, progress)
    rows = []
    for column in args.column:
        with progress.step(f"Moran's I of {column} ({args.permutations} permutations)"):
            r = moran(values[column], w, permutations=args.permutations, seed=args.seed, alternative=args.alternative)
        rows.append(_moran_row(column, r))
    _write_table(pd.DataFrame(rows), args.out)
    return OK


def _run_convert(args: argparse.Namespace, progress: Progress) -> int:
    out = _weights_path(Path(args.output))
    if out.exists() and out.resolve() == Path(args.input).resolve():
        raise InvalidParameterError(f"the output {out} is the input; write to another file")
    w = _read_weights(args.input, progress)
    written = _write_weights(w, out, progress)
    if not args.quiet:
        print(repr(w))
        print("wrote " + " and ".join(str(p) for p in written))
    return OK


# ---- the parser ---------------------------------------------------------------------------------------------------
EXAMPLES = {
    "demo": "vicino demo --out demo-out --permutations 99",
    "build": (
        "vicino build towns.csv towns-k8.mtx --k 8 --id town\n"
        "  vicino build towns.csv towns-15km.npz --radius 15 --x easting --y northing --id town\n"
        "  vicino build airports.csv air.mtx --k 5 --metric great_circle --id code\n"
        "  vicino build districts.gpkg queen.mtx --rule queen --id name --standardize row --islands keep"
    ),
    "audit": "vicino audit queen.mtx\n  vicino audit queen.mtx --format json --out queen-audit.json",
    "lag": "vicino lag queen.mtx values.csv --columns income rent --id name --out lags.csv",
    "moran": "vicino moran queen.mtx values.csv --column income --standardize row --seed 1",
    "convert": "vicino convert queen.mtx queen.txt",
}


def _common() -> argparse.ArgumentParser:
    """Options every subcommand takes (also accepted before the subcommand)."""
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument(
        "--quiet", action="store_true", default=argparse.SUPPRESS, help="no progress ticker and no summaries"
    )
    common.add_argument(
        "--debug", action="store_true", default=argparse.SUPPRESS, help="show the traceback of an error"
    )
    return common


def _subcommand(sub: Any, name: str, summary: str, description: str, common: argparse.ArgumentParser) -> Any:
    return sub.add_parser(
        name,
        help=summary,
        description=textwrap.fill(description, 78),
        epilog=f"example:\n  {EXAMPLES[name]}",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        parents=[common],
        allow_abbrev=False,
    )


def _standardize_options(parser: argparse.ArgumentParser, *, default_text: str) -> None:
    from .weights import STANDARDIZATIONS

    parser.add_argument(
        "--standardize",
        choices=STANDARDIZATIONS,
        metavar="METHOD",
        help=f"standardize the weights: {', '.join(STANDARDIZATIONS)} ({default_text})",
    )
    parser.add_argument(
        "--islands",
        choices=("raise", "keep"),
        default="raise",
        help="units without neighbours: refuse to standardize (raise, the default) or keep their rows empty",
    )


def _weights_and_table(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("weights", metavar="WEIGHTS", help="a weights file (.mtx, .txt, .npz, .csv, .parquet)")
    parser.add_argument("table", metavar="TABLE", help="a .csv or .parquet table: an id column and value columns")
    parser.add_argument("--id", metavar="COL", help="the table's id column (default: its first column)")
    parser.add_argument("--out", metavar="FILE", help="write the results to FILE (.csv or .parquet), not stdout")
    _standardize_options(parser, default_text="default: as stored")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``vicino`` command line, with its subcommands.

    Returns
    -------
    argparse.ArgumentParser
        Its errors raise :class:`UsageError` instead of exiting.
    """
    from .build import METRICS, RULES

    common = _common()
    parser = _Parser(
        prog="vicino",
        description="Spatial weights: build, audit, use and convert them. `vicino COMMAND --help` says more.",
        epilog="exit codes: 0 success, 2 a user error (one line on stderr), 1 an internal error (a bug), "
        "130 interrupted",
        parents=[common],
        allow_abbrev=False,
    )
    parser.add_argument("--version", action="version", version=f"vicino {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    demo = _subcommand(
        sub,
        "demo",
        "run the worked example on an invented region",
        "Run the worked example: candidate weights for an invented region, audits, a repair, lags and "
        "Moran's I, with tables, pictures and weights files written to --out.",
        common,
    )
    demo.add_argument("--out", metavar="DIR", default="vicino-demo-out", help="output folder (default: %(default)s)")
    demo.add_argument(
        "--seed", type=int, default=7, metavar="N", help="seed of the invented data and permutations (default: 7)"
    )
    demo.add_argument(
        "--permutations", type=int, default=999, metavar="N", help="permutations for Moran's I (default: 999)"
    )
    demo.set_defaults(run=_run_demo)

    build = _subcommand(
        sub,
        "build",
        "build a weights file from points or polygons",
        "Build weights from points (a CSV file with coordinate columns, or a vector file of points) or from "
        "polygons (a vector file: GeoPackage, GeoJSON, Shapefile, ...) and write them to OUTPUT, in the "
        "format its suffix names: .mtx Matrix Market, .txt triplets, .npz SciPy, .csv or .parquet edge "
        "tables. Text formats get their ids in OUTPUT.ids.csv beside them. Coordinate columns are found by "
        "name (x/y, lon/lat, longitude/latitude, easting/northing) unless --x and --y name them.",
        common,
    )
    build.add_argument("input", metavar="INPUT", help="a CSV file of points, or a vector file of points or polygons")
    build.add_argument("output", metavar="OUTPUT", help="the weights file to write (.mtx, .txt, .npz, .csv, .parquet)")
    how = build.add_argument_group("the builder (give exactly one)").add_mutually_exclusive_group(required=True)
    how.add_argument("--rule", choices=RULES, help="contiguity of polygons: queen (a shared point) or rook (a stretch)")
    how.add_argument("--k", type=int, metavar="K", help="each point's K nearest neighbours")
    how.add_argument("--radius", type=float, metavar="R", help="every pair of points at distance <= R")
    build.add_argument(
        "--metric",
        choices=METRICS,
        help="for --k and --radius: euclidean (coordinate units, the default) or great_circle "
        "(longitude/latitude in degrees, distances in km)",
    )
    build.add_argument(
        "--tolerance",
        type=float,
        metavar="T",
        help="for --rule: boundaries within T (coordinate units) touch; default 0 (exact)",
    )
    build.add_argument("--id", metavar="COL", help="the column of unit ids (default: row numbers 0, 1, ...)")
    build.add_argument("--x", metavar="COL", help="the column of x (or longitude) of points")
    build.add_argument("--y", metavar="COL", help="the column of y (or latitude) of points")
    build.add_argument("--layer", metavar="NAME", help="the layer of a vector file that holds several")
    _standardize_options(build, default_text="default: none, every link weighs 1")
    build.set_defaults(run=_run_build)

    audit = _subcommand(
        sub,
        "audit",
        "report on a weights file: islands, groups, symmetry, counts",
        "Audit a weights file: neighbour counts, islands, connected groups, symmetry, zero columns, "
        "self-links, density; each finding is a problem, a warning, a note or ok, and says what to do.",
        common,
    )
    audit.add_argument("weights", metavar="WEIGHTS", help="a weights file (.mtx, .txt, .npz, .csv, .parquet)")
    audit.add_argument(
        "--format",
        choices=("text", "csv", "json"),
        default="text",
        help="text (the report, the default), csv (one row per finding) or json (facts and findings)",
    )
    audit.add_argument("--out", metavar="FILE", help="write the report to FILE, not stdout")
    audit.set_defaults(run=_run_audit)

    lag = _subcommand(
        sub,
        "lag",
        "spatial lags of columns of a table",
        "Spatial lags W x of columns of TABLE, whose rows are matched to the units of WEIGHTS by id (every "
        "unit needs exactly one row). Writes the id column and one COLUMN_lag column per column, in the "
        "table's row order, as CSV.",
        common,
    )
    _weights_and_table(lag)
    lag.add_argument("--columns", nargs="+", required=True, metavar="COL", help="the value columns to lag")
    lag.set_defaults(run=_run_lag)

    moran = _subcommand(
        sub,
        "moran",
        "global Moran's I of columns of a table",
        "Global Moran's I of columns of TABLE under WEIGHTS, rows matched to units by id, with inference "
        "under normality, randomization and permutation; one CSV row per column. A small p-value says the "
        "pattern is unlikely under random placement for these weights; it is not evidence of a cause, and "
        "testing many columns or weights inflates false discoveries.",
        common,
    )
    _weights_and_table(moran)
    moran.add_argument("--column", nargs="+", required=True, metavar="COL", help="the value column(s) to test")
    moran.add_argument(
        "--permutations", type=int, default=999, metavar="N", help="random permutations (0 skips them; default: 999)"
    )
    moran.add_argument("--seed", type=int, metavar="N", help="seed of the permutations (default: drawn, and reported)")
    moran.add_argument(
        "--alternative",
        choices=("two-sided", "greater", "less"),
        default="two-sided",
        help="two-sided (the default), greater (clustering) or less (dispersion)",
    )
    moran.set_defaults(run=_run_moran)

    convert = _subcommand(
        sub,
        "convert",
        "rewrite a weights file in another format",
        "Read a weights file and write it in the format OUTPUT's suffix names (.mtx, .txt, .npz, .csv, "
        ".parquet), ids and recipe included.",
        common,
    )
    convert.add_argument("input", metavar="INPUT", help="the weights file to read")
    convert.add_argument("output", metavar="OUTPUT", help="the weights file to write")
    convert.set_defaults(run=_run_convert)
    return parser


# ---- running ------------------------------------------------------------------------------------------------------
def _say(message: str) -> None:
    print(f"vicino: {message}", file=sys.stderr)


def _one_line(exc: BaseException) -> str:
    return " ".join(part.strip() for part in str(exc).splitlines() if part.strip()) or type(exc).__name__


@contextmanager
def _warnings_as_lines() -> Iterator[None]:
    """Library warnings printed as one line each on stderr (no file and line of the source)."""

    def show(message: Any, category: Any, filename: str, lineno: int, file: Any = None, line: Any = None) -> None:
        _say(f"warning: {_one_line(Exception(str(message)))}")

    with warnings.catch_warnings():
        warnings.simplefilter("default")
        warnings.showwarning = show
        yield


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line.

    Parameters
    ----------
    argv : sequence of str, optional
        The arguments after the program name (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        The exit code: 0 success, 2 a user error, 1 an internal error, 130 interrupted.
    """
    arguments = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in arguments
    try:
        with _warnings_as_lines():
            args = build_parser().parse_args(arguments)
            args.quiet = getattr(args, "quiet", False)
            progress = Progress(not args.quiet and sys.stderr.isatty())
            return int(args.run(args, progress))
    except SystemExit as exc:  # --help and --version
        return exc.code if isinstance(exc.code, int) else OK
    except KeyboardInterrupt:
        _say("interrupted")
        return INTERRUPTED
    except BrokenPipeError:  # the reader of stdout went away (| head): stop quietly
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return OK
    except InternalError as exc:
        return _internal(exc, debug)
    except (VicinoError, OSError) as exc:
        if debug:
            traceback.print_exc()
        _say(f"error: {_one_line(exc)}")
        return USER
    except Exception as exc:
        return _internal(exc, debug)


def _internal(exc: BaseException, debug: bool) -> int:
    if debug:
        traceback.print_exc()
    hint = "" if debug else "; --debug shows the traceback"
    _say(
        f"internal error, a bug in vicino {__version__} ({type(exc).__name__}: {_one_line(exc)}): please report it "
        f"with the command and its input{hint}"
    )
    return INTERNAL
