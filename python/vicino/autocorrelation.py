"""Global Geary's C, Getis-Ord G and join counts, and one statistic across candidate weights.

The results have the shape of :class:`vicino.MoranResult`: the statistic,
its expectation, and inference grouped by assumption (``normality``,
``randomization``, ``permutation``), with the same ``alternative`` and seed
rules as :func:`vicino.moran`. ``alternative`` is always read in terms of
the statistic, as in scipy.stats: ``"greater"`` asks whether the statistic
is larger than its expectation. For Moran's I and Getis-Ord G that is
positive autocorrelation (or clustering of high values); for Geary's C,
positive autocorrelation makes C *smaller* than 1, so test it with
``alternative="less"``.

A small p-value says the pattern is unlikely under random assignment of
the values to units for the weights used; it does not say why (it is not
evidence of a cause), and testing many variables or many weights inflates
the number of small p-values found by chance.
"""

from __future__ import annotations

import html
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any, ClassVar, Literal

import numpy as np
import pandas as pd

from . import _gateway as core
from ._checks import choice
from ._ids import check_index, examples
from ._values import _missing_error
from .errors import IdError, InvalidParameterError, InvalidTypeError, InvalidValuesError
from .stats import (
    ALTERNATIVES,
    Alternative,
    AnalyticInference,
    MoranResult,
    PermutationInference,
    _permutations,
    _seed,
    checked,
    moran,
    normal_p,
    permutation_inference,
    recipe_text,
)
from .weights import Weights, aligned_values, core_matrix, neighbour_counts

__all__ = [
    "GearyResult",
    "GetisOrdResult",
    "JoinCount",
    "JoinCountsResult",
    "SamplingInference",
    "compare",
    "geary",
    "getis_ord",
    "join_counts",
]

STATISTICS = ("moran", "geary", "getis_ord")


# ---------------------------------------------------------------- Geary's C and Getis-Ord G
@dataclass(frozen=True)
class _GlobalResult:
    """A global statistic with inference under each assumption (the shape of MoranResult)."""

    statistic: float
    expected: float
    n: int
    alternative: str
    normality: AnalyticInference | None
    randomization: AnalyticInference
    permutation: PermutationInference | None
    s0: float
    s1: float
    s2: float
    weights: str

    symbol: ClassVar[str] = ""
    title: ClassVar[str] = ""
    reading: ClassVar[str] = ""

    def table(self) -> pd.DataFrame:
        """One row per assumption: statistic, expected value, variance, z and p-value."""
        rows = []
        for inf in (self.normality, self.randomization):
            if inf is not None:
                rows.append(
                    {
                        "assumption": inf.assumption,
                        self.symbol: self.statistic,
                        "expected": self.expected,
                        "variance": inf.variance,
                        "z": inf.z,
                        "p_value": inf.p_value,
                    }
                )
        if self.permutation is not None:
            p = self.permutation
            rows.append(
                {
                    "assumption": f"permutation (R={p.permutations})",
                    self.symbol: self.statistic,
                    "expected": p.mean,
                    "variance": p.std**2,
                    "z": p.z,
                    "p_value": p.p_value,
                }
            )
        return pd.DataFrame(rows).set_index("assumption")

    def _head(self) -> str:
        return (
            f"{self.title} = {self.statistic:.6f}  (E[{self.symbol}] = {self.expected:.6g}, n = {self.n}, "
            f"alternative: {self.alternative})"
        )

    def __str__(self) -> str:
        lines = [self._head(), self.table().to_string(float_format=lambda v: f"{v:.6g}")]
        lines.append(self.reading)
        lines.append(f"weights: {self.weights}")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        head = (
            f"<p><strong>{html.escape(self._head(), quote=False)}</strong><br>"
            f"<small>{html.escape(self.reading, quote=False)}<br>"
            f"weights: {html.escape(self.weights, quote=False)}</small></p>"
        )
        return "<div>" + head + self.table().to_html(float_format=lambda v: f"{v:.6g}") + "</div>"


@dataclass(frozen=True)
class GearyResult(_GlobalResult):
    """Global Geary's C with inference under normality, randomization and permutation.

    C < 1 means neighbours are more alike than random (positive
    autocorrelation); ``alternative`` is read in terms of C, so
    ``"less"`` tests for positive autocorrelation.
    """

    symbol: ClassVar[str] = "C"
    title: ClassVar[str] = "Geary's C"
    reading: ClassVar[str] = "C < 1: neighbours alike (positive autocorrelation); C > 1: unlike"


@dataclass(frozen=True)
class GetisOrdResult(_GlobalResult):
    """Global Getis-Ord G with inference under randomization and permutation.

    ``normality`` is None: G is for non-negative amounts, and its moments
    (Getis and Ord 1992) are those of random assignment of the observed
    values. G above its expectation: high values cluster; below: low
    values cluster.
    """

    symbol: ClassVar[str] = "G"
    title: ClassVar[str] = "Getis-Ord G"
    reading: ClassVar[str] = "G > E[G]: high values near high values; G < E[G]: low values near low values"


def _global(
    fn: Callable[..., Any],
    cls: type[_GlobalResult],
    values: Any,
    weights: Any,
    permutations: Any,
    seed: Any,
    alternative: Any,
) -> Any:
    r, seed = checked(weights, permutations, alternative, seed)
    x, _ = aligned_values(weights, values, allow_2d=False)
    out = fn(core_matrix(weights), x, r, seed, alternative, weights.ids)

    def analytic(name: str) -> AnalyticInference:
        z = getattr(out, f"{name}_z")
        return AnalyticInference(name, getattr(out, f"{name}_variance"), z, normal_p(z, alternative))

    # NaN moments under normality mean the statistic has none (Getis-Ord G)
    normality = None if np.isnan(out.normality_variance) else analytic("normality")
    return cls(
        out.statistic,
        out.expected,
        out.n,
        alternative,
        normality,
        analytic("randomization"),
        permutation_inference(out.permutation, r, seed),
        out.s0,
        out.s1,
        out.s2,
        recipe_text(weights),
    )


def geary(
    values: Any,
    weights: Weights,
    *,
    permutations: int = 999,
    seed: int | None = None,
    alternative: Alternative = "two-sided",
) -> GearyResult:
    """Global Geary's C of one variable under one weights matrix.

    Parameters
    ----------
    values : 1-D array-like or pandas Series
        One value per unit, in the order of ``weights.ids`` (a Series' index
        must equal ``weights.ids``).
    weights : Weights
        Any non-negative weights without self-links; asymmetric weights
        enter through the general Cliff-Ord sums S0, S1, S2.
    permutations : int
        Number of random permutations (0 skips the permutation test; 1 is
        refused).
    seed : int, optional
        Seed of the permutations, 0 <= seed < 2**64; the same seed gives the
        same draws (the same as :func:`vicino.moran`'s) for any number of
        threads. When None a random seed is drawn and reported in
        ``result.permutation.seed``.
    alternative : {"two-sided", "greater", "less"}
        Read in terms of C, as in scipy.stats. Positive autocorrelation
        (alike neighbours) makes C smaller than 1: test it with ``"less"``;
        ``"greater"`` tests for negative autocorrelation. The two-sided
        permutation test counts draws at least as far from 1 as C.

    Returns
    -------
    GearyResult
        The statistic and its inference under each assumption.

    Notes
    -----
    C = (n - 1) sum_ij w_ij (x_i - x_j)^2 / (2 S0 sum_i (x_i - mean)^2)
    (Geary 1954); E[C] = 1; the variances under normality and
    randomization are those of Cliff and Ord (1981), and the permutation
    p-value is (M + 1) / (R + 1) (Hope 1968). Islands (units without
    neighbours) stay in n and in the variance of the values but add
    nothing to the sum over links. A small p-value says the pattern is
    unlikely under random assignment *for these weights*; it does not say
    why.
    """
    return _global(core.geary, GearyResult, values, weights, permutations, seed, alternative)


def getis_ord(
    values: Any,
    weights: Weights,
    *,
    permutations: int = 999,
    seed: int | None = None,
    alternative: Alternative = "two-sided",
) -> GetisOrdResult:
    """Global Getis-Ord G of a non-negative variable under one weights matrix.

    Parameters
    ----------
    values : 1-D array-like or pandas Series
        Non-negative amounts (counts, totals, rates), one per unit in the
        order of ``weights.ids``; negative values are refused, and at least
        two units must have positive values.
    weights : Weights
        Non-negative weights without self-links, usually binary (a distance
        band). G scales with the weights; its z-score and p-values do not.
    permutations, seed
        As for :func:`geary`.
    alternative : {"two-sided", "greater", "less"}
        Read in terms of G: ``"greater"`` tests whether high values
        cluster (G above E[G]), ``"less"`` whether low values do.

    Returns
    -------
    GetisOrdResult
        The statistic and its inference under randomization and permutation
        (``normality`` is None).

    Notes
    -----
    G = sum_{i != j} w_ij x_i x_j / sum_{i != j} x_i x_j and
    E[G] = S0 / (n (n - 1)); the variance under randomization is that of
    Getis and Ord (1992) (its terms B0 to B4); the permutation p-value is
    (M + 1) / (R + 1) (Hope 1968). A small p-value does not say why the
    values cluster.
    """
    return _global(core.getis_ord, GetisOrdResult, values, weights, permutations, seed, alternative)


# ---------------------------------------------------------------- join counts
@dataclass(frozen=True)
class SamplingInference:
    """Moments of a join count under one sampling assumption, and the normal z and p.

    ``assumption`` is ``"free sampling"`` (each unit takes the second label
    independently with the observed share as probability) or
    ``"non-free sampling"`` (the observed labels assigned to units at random).
    """

    assumption: str
    expected: float
    variance: float
    z: float
    p_value: float


@dataclass(frozen=True)
class JoinCount:
    """One join count (``join`` is ``"both <label>"`` or ``"unlike"``) with its inference."""

    join: str
    count: float
    free: SamplingInference
    nonfree: SamplingInference
    permutation: PermutationInference | None


@dataclass(frozen=True)
class JoinCountsResult:
    """Join counts of a binary variable: like joins of each label, unlike joins, and their inference.

    ``labels`` are the two labels in sorted order, ``label_counts`` how many
    units carry each; ``like`` holds the joins between units that both
    carry ``labels[1]`` and both carry ``labels[0]``, in that order.
    """

    labels: tuple[Any, Any]
    label_counts: tuple[int, int]
    like: tuple[JoinCount, JoinCount]
    unlike: JoinCount
    n: int
    alternative: str
    s0: float
    s1: float
    s2: float
    weights: str

    @property
    def joins(self) -> tuple[JoinCount, JoinCount, JoinCount]:
        """The three counts: both ``labels[1]``, both ``labels[0]``, unlike."""
        return (self.like[0], self.like[1], self.unlike)

    def like_of(self, label: Any) -> JoinCount:
        """The count of joins between two units that both carry ``label``."""
        for lab, jc in zip(self.labels[::-1], self.like, strict=True):
            if lab == label:
                return jc
        raise InvalidParameterError(f"{label!r} is not one of the labels {examples(self.labels)}")

    def table(self) -> pd.DataFrame:
        """One row per join and assumption: count, expected value, variance, z and p-value."""
        rows = []
        for jc in self.joins:
            for inf in (jc.free, jc.nonfree):
                rows.append((jc.join, inf.assumption, jc.count, inf.expected, inf.variance, inf.z, inf.p_value))
            if jc.permutation is not None:
                p = jc.permutation
                name = f"permutation (R={p.permutations})"
                rows.append((jc.join, name, jc.count, p.mean, p.std**2, p.z, p.p_value))
        columns = ["join", "assumption", "count", "expected", "variance", "z", "p_value"]
        return pd.DataFrame(rows, columns=columns).set_index(["join", "assumption"])

    def _head(self) -> str:
        (a, b), (na, nb) = self.labels, self.label_counts
        return (
            f"Join counts (n = {self.n}: {na} x {a!r}, {nb} x {b!r}; joins = S0 / 2 = {self.s0 / 2:.6g}; "
            f"alternative: {self.alternative})"
        )

    def __str__(self) -> str:
        return "\n".join(
            [self._head(), self.table().to_string(float_format=lambda v: f"{v:.6g}"), f"weights: {self.weights}"]
        )

    def _repr_html_(self) -> str:
        head = (
            f"<p><strong>{html.escape(self._head(), quote=False)}</strong><br>"
            f"<small>weights: {html.escape(self.weights, quote=False)}</small></p>"
        )
        return "<div>" + head + self.table().to_html(float_format=lambda v: f"{v:.6g}") + "</div>"


def _binary(values: Any, weights: Weights) -> tuple[np.ndarray, tuple[Any, Any], tuple[int, int]]:
    """0 / 1 codes of a two-label variable in unit order (the second label in sorted order is 1)."""
    ids = weights.ids
    if isinstance(values, pd.Series):
        check_index(values.index, ids)
        arr = values.to_numpy()
    elif isinstance(values, pd.DataFrame):
        raise InvalidValuesError("join counts take one variable: pass a Series or a 1-D array, not a DataFrame")
    else:
        arr = np.asarray(values)
    if arr.ndim != 1:
        raise InvalidValuesError(f"values must have shape (n,), got {arr.shape}")
    if len(arr) != len(ids):
        raise InvalidValuesError(f"values have {len(arr)} rows but the weights have {len(ids)} units")
    missing = np.asarray(pd.isna(arr), dtype=bool)
    if missing.any():
        raise _missing_error(missing, ids, "values (NaN / NA)")
    try:
        codes, uniques = pd.factorize(arr, sort=True)
    except TypeError:  # labels of mixed types have no order: keep them in order of appearance
        codes, uniques = pd.factorize(arr, sort=False)
    labels = [u.item() if isinstance(u, np.generic) else u for u in uniques]  # plain Python labels
    if len(labels) > 2:
        raise InvalidValuesError(
            f"join counts need a binary variable, but the values hold {len(labels)} distinct labels "
            f"({examples(labels)}); recode them into two categories first"
        )
    if len(labels) < 2:
        raise InvalidValuesError(f"every unit carries the same label ({examples(labels)}): join counts need two labels")
    ones = int(codes.sum())
    return codes.astype(np.float64), (labels[0], labels[1]), (len(codes) - ones, ones)


def join_counts(
    values: Any,
    weights: Weights,
    *,
    permutations: int = 999,
    seed: int | None = None,
    alternative: Alternative = "two-sided",
) -> JoinCountsResult:
    """Join counts of a binary variable: like-like joins of each label and unlike joins.

    Parameters
    ----------
    values : 1-D array-like or pandas Series
        Exactly two distinct labels of any kind (0 / 1, booleans, text), one
        per unit in the order of ``weights.ids``; more than two labels, or one,
        are refused, as are missing values.
    weights : Weights
        Non-negative weights without self-links. With symmetric binary
        weights (contiguity, a distance band) each join is counted once.
        Other weights are used as given: the counts are weighted counts,
        1/2 sum_ij w_ij [...], which equal those of the symmetric
        (W + W^T) / 2, so the moments hold for them too. Their sum is
        always S0 / 2.
    permutations, seed
        As for :func:`geary`; the permutations place the observed labels at
        random (non-free sampling).
    alternative : {"two-sided", "greater", "less"}
        Read for each count in terms of the count: ``"greater"`` for a like
        count asks whether alike units are neighbours more often than by
        chance (positive autocorrelation); for the unlike count it asks
        the opposite. Two-sided permutation tests count draws at least as
        far from the non-free expectation as the observed count.

    Returns
    -------
    JoinCountsResult
        The three counts with their moments under free and non-free
        sampling, normal z and p, and the permutation inference.

    Notes
    -----
    Moments under free (binomial) and non-free (hypergeometric) sampling
    as in Cliff and Ord (1981), chapter 1, in terms of S0, S1 and S2; the
    permutation p-value is (M + 1) / (R + 1) (Hope 1968). The normal
    approximation is poor when one label is rare; prefer the permutation
    p-value then.
    """
    r, seed = checked(weights, permutations, alternative, seed)
    x, labels, label_counts = _binary(values, weights)
    (s0, s1, s2), _, joins = core.join_counts(core_matrix(weights), x, r, seed, alternative, weights.ids)

    def count(name: str, out: Any) -> JoinCount:
        c, free, nonfree, perm = out

        def inference(assumption: str, m: tuple[float, float, float]) -> SamplingInference:
            return SamplingInference(assumption, m[0], m[1], m[2], normal_p(m[2], alternative))

        return JoinCount(
            name,
            c,
            inference("free sampling", free),
            inference("non-free sampling", nonfree),
            permutation_inference(perm, r, seed),
        )

    names = (f"both {labels[1]}", f"both {labels[0]}", "unlike")
    ones, zeros, unlike = (count(name, out) for name, out in zip(names, joins, strict=True))
    return JoinCountsResult(
        labels, label_counts, (ones, zeros), unlike, len(x), alternative, s0, s1, s2, recipe_text(weights)
    )


# ---------------------------------------------------------------- comparison across weights
def compare(
    values: Any,
    candidates: Mapping[Any, Weights],
    statistic: Literal["moran", "geary", "getis_ord"] = "moran",
    *,
    permutations: int = 999,
    seed: int | None = None,
    alternative: Alternative = "two-sided",
) -> pd.DataFrame:
    """One global statistic of one variable under several candidate weights, a row per candidate.

    The choice of weights is a modelling assumption, not a fact of the
    data: the same values can look clustered under one neighbourhood
    definition and random under another. Compare candidates that are all
    defensible for the question before trusting one, and report the
    comparison. Testing many candidates also makes a small p-value under
    one of them more likely by chance alone; and a small p-value is not
    evidence of a cause.

    Parameters
    ----------
    values : 1-D array-like or pandas Series
        One value per unit; every candidate must have the same ids in the
        same order (a Series' index must equal them).
    candidates : mapping of name to Weights
        The candidate weights, in the order the rows should have.
    statistic : {"moran", "geary", "getis_ord"}
        Which statistic (see :func:`vicino.moran`, :func:`geary`,
        :func:`getis_ord`).
    permutations : int
        Permutations per candidate (0 skips the permutation columns' values,
        which are then NaN).
    seed : int, optional
        One seed for every candidate, so each uses the same draws; when None
        a random seed is drawn. It is kept in ``table.attrs["seed"]``.
    alternative : {"two-sided", "greater", "less"}
        As for the chosen statistic (read in terms of the statistic: for
        Geary's C, positive autocorrelation is ``"less"``).

    Returns
    -------
    pandas.DataFrame
        Indexed by candidate name, with columns: the statistic (``I``, ``C``
        or ``G``), its expectation (``E[I]``, ...), ``z, normality`` and
        ``p, normality`` (NaN for G, which has no moments under normality),
        ``z, randomization``, ``p, randomization``, ``z, permutation`` (of
        the observed value against the draws' mean and sd), ``p, permutation``
        ((M + 1) / (R + 1)), and the neighbour counts of the candidate:
        ``neighbours, min``, ``neighbours, median``, ``neighbours, max``,
        ``neighbours, mean`` and ``islands`` (units without neighbours; they
        stay in the statistic with no links). ``attrs`` holds the statistic,
        the alternative, the seed, the permutations and the caution above.
    """
    choice(statistic, "statistic", STATISTICS)
    r = _permutations(permutations)
    choice(alternative, "alternative", ALTERNATIVES)
    seed = _seed(seed)
    if not isinstance(candidates, Mapping):
        raise InvalidTypeError(
            f"candidates must be a mapping of name to Weights, got {type(candidates).__name__}; "
            "for example {'queen': wq, '6 nearest': wk}"
        )
    if not candidates:
        raise InvalidParameterError("candidates is empty: give at least one {name: Weights}")
    first: pd.Index | None = None
    for name, w in candidates.items():
        if not isinstance(w, Weights):
            raise InvalidTypeError(f"candidate {name!r} is {type(w).__name__}, not vicino.Weights")
        if first is None:
            first = w.ids
        elif not w.ids.equals(first):
            raise IdError(
                f"candidate {name!r} does not have the same ids in the same order as the first candidate; "
                "align the weights first (Weights.align) so that every candidate describes the same units"
            )
    functions: dict[str, Callable[..., MoranResult | _GlobalResult]] = {
        "moran": moran,
        "geary": geary,
        "getis_ord": getis_ord,
    }
    fn = functions[statistic]
    symbol = {"moran": "I", "geary": "C", "getis_ord": "G"}[statistic]
    nan = float("nan")
    rows = []
    for name, w in candidates.items():
        res = fn(values, w, permutations=r, seed=seed, alternative=alternative)
        counts = neighbour_counts(w)
        norm, perm = res.normality, res.permutation
        rows.append(
            {
                "weights": name,
                symbol: res.statistic,
                f"E[{symbol}]": res.expected,
                "z, normality": norm.z if norm is not None else nan,
                "p, normality": norm.p_value if norm is not None else nan,
                "z, randomization": res.randomization.z,
                "p, randomization": res.randomization.p_value,
                "z, permutation": perm.z if perm is not None else nan,
                "p, permutation": perm.p_value if perm is not None else nan,
                "neighbours, min": int(counts.min()),
                "neighbours, median": float(np.median(counts)),
                "neighbours, max": int(counts.max()),
                "neighbours, mean": float(counts.mean()),
                "islands": int((counts == 0).sum()),
            }
        )
    table = pd.DataFrame(rows).set_index("weights")
    table.attrs.update(
        statistic=statistic,
        alternative=alternative,
        seed=seed,
        permutations=r,
        caution=CAUTION,
    )
    return table


CAUTION = (
    "The choice of weights is a modelling assumption: compare defensible candidates rather than trusting one. "
    "Many tests inflate false discoveries, and a small p-value is not evidence of a cause."
)
