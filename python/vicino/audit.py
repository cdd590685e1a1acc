"""The health report of a weights matrix: what the choice of weights did.

The facts (components, column counts, self-links, asymmetry) come from the
core in one pass; this module turns them into findings, each with a level
and a message that says what to do.
"""

from __future__ import annotations

import html
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from ._ids import examples, show

LEVELS = ("problem", "warning", "note", "ok")
DENSE_SHARE = 0.5  # a warning when units neighbour more than this share of all others, on average
UNEVEN_RATIO = 4.0  # a warning when the largest count exceeds this many times the median ...
UNEVEN_MIN_GAP = 5  # ... and the median by at least this many neighbours
HISTOGRAM_ROWS = 16  # counts spanning more values than this are grouped into bins


@dataclass(frozen=True)
class Finding:
    """One check of an audit: its level, what was checked and what to do."""

    level: str
    check: str
    message: str

    def __str__(self) -> str:
        return f"[{self.level}] {self.check}: {self.message}"


@dataclass(frozen=True)
class Components:
    """Connected components (links taken in either direction).

    ``count`` components; ``sizes`` largest first; ``labels`` the component
    of each unit by id (0 is the largest, ties go to the component holding
    the unit that comes first).
    """

    count: int
    sizes: np.ndarray
    labels: pd.Series

    def __repr__(self) -> str:
        shown = ", ".join(str(s) for s in self.sizes[:8]) + (", ..." if self.count > 8 else "")
        return f"<Components: {self.count} (sizes {shown})>"


def _histogram(counts: np.ndarray) -> pd.DataFrame:
    """Units per neighbour count: one row per count from min to max, or equal-width bins."""
    n = len(counts)
    lo, hi = int(counts.min()), int(counts.max())
    if hi - lo + 1 <= HISTOGRAM_ROWS:
        values = np.arange(lo, hi + 1)
        units = np.bincount(counts - lo, minlength=hi - lo + 1)
        labels = [str(v) for v in values]
    else:
        width = int(np.ceil((hi - lo + 1) / (HISTOGRAM_ROWS - 4)))
        starts = np.arange(lo, hi + 1, width)
        units = np.bincount((counts - lo) // width, minlength=len(starts))
        labels = [f"{a}-{min(a + width - 1, hi)}" for a in starts]
    return pd.DataFrame({"neighbours": labels, "units": units, "share": units / n})


class Audit:
    """The health report of a :class:`~vicino.Weights`, from :meth:`Weights.audit`.

    Attributes
    ----------
    n, links : int
        Units and stored links.
    counts : pandas.Series
        Neighbours of each unit, by id.
    summary : pandas.Series
        min, median, mean and max of the counts.
    histogram : pandas.DataFrame
        Units per neighbour count (``neighbours``, ``units``, ``share``).
    islands : pandas.Index
        Ids of units without neighbours (zero rows).
    zero_columns : pandas.Index
        Ids of units that are nobody's neighbour (their values enter no lag).
    components : Components
        Connected components.
    symmetric : bool
        Whether w_ij == w_ji for every pair.
    one_way_links : int
        Links i -> j without a link j -> i.
    max_asymmetry : tuple or None
        (largest |w_ij - w_ji|, id i, id j), None when symmetric.
    self_links : int
        Units linked to themselves.
    density : float
        Share of ordered pairs of distinct units that are linked (the
        density warning needs more than two units: with two, one link is
        already everything).
    duplicate_locations : int or None
        Units sharing their location with another, where the builder knew.
    findings : tuple of Finding
        Every check with its level: problem, warning, note, or ok.
    """

    def __init__(
        self,
        *,
        ids: pd.Index,
        counts: np.ndarray,
        stored: np.ndarray,
        facts: Any,
        density: float,
        duplicates: int | None,
        origin: Any,
    ) -> None:
        """Build the report from what :meth:`Weights.audit` hands over.

        ``counts`` are the links of each unit to other units, ``stored`` its
        stored entries (self-links included), ``facts`` the core's health
        facts, ``origin`` the first step of the recipe (or None).
        """
        self.n = len(ids)
        self.links = int(stored.sum())
        self.counts = pd.Series(counts, index=ids, name="neighbors")
        self.summary = pd.Series(
            {"min": counts.min(), "median": float(np.median(counts)), "mean": counts.mean(), "max": counts.max()},
            name="neighbours per unit",
        )
        self.histogram = _histogram(counts)
        self.islands = ids[counts == 0]
        in_counts = np.asarray(facts.in_counts)
        self.zero_columns = ids[in_counts == 0]
        labels = np.asarray(facts.labels)
        sizes = np.asarray(facts.sizes, dtype=np.int64)
        self.components = Components(len(sizes), sizes, pd.Series(labels, index=ids, name="component"))
        worst = facts.max_asymmetry
        self.max_asymmetry = None if worst is None else (float(worst[0]), ids[worst[1]], ids[worst[2]])
        self.symmetric = worst is None
        self.one_way_links = int(facts.one_way)
        self.self_links = int(facts.self_links)
        self.bad_weights = int(facts.bad_weights)
        self.density = density
        self.duplicate_locations = duplicates
        self._self_only = int((stored > 0)[counts == 0].sum())
        self._origin = origin
        self.findings = tuple(self._checks(ids, counts, in_counts))

    # ---- the checks ----------------------------------------------------
    def _checks(self, ids: pd.Index, counts: np.ndarray, in_counts: np.ndarray) -> Any:
        n = self.n
        if self.bad_weights:
            yield Finding(
                "problem",
                "weights",
                f"{self.bad_weights} stored weight(s) are zero, negative or not finite; a stored entry is a link "
                "and must weigh more than 0: rebuild the weights with a vicino builder or from_matrix",
            )
        if len(self.islands):
            alone = f" ({self._self_only} of them linked only to themselves)" if self._self_only else ""
            yield Finding(
                "problem",
                "islands",
                (
                    f"{len(self.islands)} unit(s) have no neighbours{alone}: ids {examples(self.islands)}. "
                    f"Their lag is {'0 or only their own value' if self._self_only else '0'}, "
                    "row standardization and most models cannot use them. Link them with "
                    "connect_islands(locations), remove them with drop_islands(), or choose weights that reach them "
                    "(k_nearest always does)."
                ),
            )
        else:
            yield Finding("ok", "islands", "every unit has at least one neighbour")
        comps = self.components
        if comps.count > 1:
            sizes = ", ".join(f"{s:,}" for s in comps.sizes[:6]) + (", ..." if comps.count > 6 else "")
            yield Finding(
                "warning",
                "components",
                (
                    f"the links split the units into {comps.count} separate groups (sizes {sizes}); no spatial "
                    "effect can pass between groups. connect_components(locations) links each smaller group to "
                    "the largest; or analyse the groups separately."
                ),
            )
        else:
            yield Finding("ok", "components", "all units are connected in one group")
        if self.symmetric:
            yield Finding("ok", "symmetry", "the weights are symmetric (w_ij = w_ji)")
        else:
            assert self.max_asymmetry is not None
            value, a, b = self.max_asymmetry
            if self.one_way_links:
                head = f"{self.one_way_links:,} link(s) run one way only"
            else:
                head = "every link runs both ways but the weights differ (as after row standardization)"
            yield Finding(
                "note",
                "symmetry",
                (
                    f"{head}; the largest |w_ij - w_ji| is {value:.4g}, between ids {show(a)} and {show(b)}. Many "
                    "estimators accept asymmetric weights; use symmetrize() if yours needs symmetric ones."
                ),
            )
        hidden = (in_counts == 0) & (counts > 0)
        if hidden.any():
            yield Finding(
                "note",
                "zero columns",
                (
                    f"{int(hidden.sum())} unit(s) with neighbours are nobody's neighbour (zero columns): ids "
                    f"{examples(ids[hidden])}. Their values enter no lag; check that this is intended."
                ),
            )
        else:
            yield Finding("ok", "zero columns", "every unit with neighbours is also someone's neighbour")
        if self.self_links:
            yield Finding(
                "warning",
                "self-links",
                (
                    f"{self.self_links} unit(s) are linked to themselves (w_ii > 0). Moran's I and the usual "
                    "models assume a zero diagonal; rebuild the weights without the diagonal."
                ),
            )
        else:
            yield Finding("ok", "self-links", "no unit is linked to itself")
        if n > 2 and self.density > DENSE_SHARE:
            yield Finding(
                "warning",
                "density",
                (
                    f"each unit neighbours {100 * self.density:.0f}% of all others on average. Such matrices are "
                    "heavy to store and use, and add little: in autoregressive models the lag of a lag already "
                    "connects everyone, so a sparse matrix suffices. Use fewer neighbours or a shorter distance."
                ),
            )
        else:
            yield Finding("ok", "density", f"{100 * self.density:.3g}% of all pairs are linked")
        median, top = float(np.median(counts)), int(counts.max())
        if median > 0 and top > UNEVEN_RATIO * median and top - median >= UNEVEN_MIN_GAP:
            yield Finding(
                "warning",
                "uneven counts",
                (
                    f"counts range from {int(counts.min())} to {top} (median {median:g}). Units with many "
                    "neighbours get smoothed lags and units with few noisy ones; look at the units with the "
                    "most neighbours, or use k_nearest for equal counts."
                ),
            )
        else:
            yield Finding("ok", "uneven counts", f"counts range from {int(counts.min())} to {top} (median {median:g})")
        if self.duplicate_locations:
            yield Finding(
                "warning",
                "duplicate locations",
                (
                    f"{self.duplicate_locations} unit(s) share their location with another and are at distance 0; "
                    "check whether they were geocoded to a common point (a town centre, a postcode), or "
                    "aggregate them."
                ),
            )
        origin = self._origin
        if origin is not None and origin.action in ("from_matrix", "from_edges", "from_networkx"):
            network = bool(origin.params.get("network"))
            yield Finding(
                "warning" if network else "note",
                "network",
                (
                    "built from a network: the network must be exogenous to the outcome (not shaped by it), "
                    "otherwise the estimated spatial effects are biased. Argue this, or use geographic weights."
                    if network
                    else "built from a given matrix: if it encodes a network (trade, migration, commuting, "
                    "contacts), that network must be exogenous to the outcome."
                ),
            )

    # ---- access and display ----------------------------------------------
    @property
    def problems(self) -> tuple[Finding, ...]:
        """Findings at level problem."""
        return tuple(f for f in self.findings if f.level == "problem")

    def to_frame(self) -> pd.DataFrame:
        """The findings as a table: one row per check (level, check, message)."""
        return pd.DataFrame([vars(f) for f in self.findings], columns=["level", "check", "message"])

    def _head(self) -> str:
        s = self.summary
        return (
            f"{self.n:,} units, {self.links:,} links; neighbours min {int(s['min'])}, median {s['median']:g}, "
            f"mean {s['mean']:.2f}, max {int(s['max'])}"
        )

    def __repr__(self) -> str:
        import textwrap

        lines = textwrap.wrap(f"Weights audit: {self._head()}", 78, subsequent_indent="  ")
        width = max(len(f.level) for f in self.findings)
        for f in self.findings:
            mark = f"{f.level:<{width}}"
            body = textwrap.wrap(f"{f.check}: {f.message}", 76 - width)
            lines.append(f"  {mark}  {body[0]}")
            lines.extend(f"  {'':<{width}}  {b}" for b in body[1:])
        lines.append("  neighbour counts:")
        top = max(int(self.histogram["units"].max()), 1)
        label = max(len(v) for v in self.histogram["neighbours"])
        for name, units in self._histogram_rows():
            bar = "=" * max(round(30 * units / top), 1 if units else 0)
            lines.append(f"    {name:>{label}} | {bar + ' ' if bar else ''}{units:,}")
        return "\n".join(lines)

    def _histogram_rows(self) -> list[tuple[str, int]]:
        return list(zip(map(str, self.histogram["neighbours"]), map(int, self.histogram["units"]), strict=True))

    def _repr_html_(self) -> str:
        tint = {"problem": "#c8553d", "warning": "#d49a2a", "note": "#3d5a80", "ok": "#5a8f6a"}
        rows = "".join(
            f"<tr><td style='color:{tint[f.level]};font-weight:bold;padding-right:1em'>{f.level}</td>"
            f"<td style='padding-right:1em'>{html.escape(f.check)}</td>"
            f"<td style='text-align:left'>{html.escape(f.message)}</td></tr>"
            for f in self.findings
        )
        hist = "".join(
            f"<tr><td>{html.escape(name)}</td><td>{units:,}</td><td>{100 * units / self.n:.1f}%</td></tr>"
            for name, units in self._histogram_rows()
        )
        return (
            f"<div><strong>Weights audit</strong>: {html.escape(self._head())}"
            f"<table>{rows}</table><details><summary>neighbour counts</summary>"
            f"<table><tr><th>neighbours</th><th>units</th><th>share</th></tr>{hist}</table></details></div>"
        )
