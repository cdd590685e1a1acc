"""Local spatial autocorrelation: local Moran's I and local Getis-Ord G_i / G_i*.

Each unit gets its own statistic, analytic moments and a conditional
permutation test (its own value held fixed, its neighbours' values drawn
from the other units), computed in the core in parallel; the draws of each
unit come from their own seeded stream, so a seed gives the same result for
any number of threads. Significance is judged after the chosen adjustment
for multiple tests.

Cautions, shown with every result: testing every unit means many tests, so
some small p-values arise by chance (``adjust="fdr"`` bounds the expected
share of false discoveries); and a significant cluster says the pattern is
unlikely under random assignment of the values *for these weights*, not why
it is there.
"""

from __future__ import annotations

import html
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import pandas as pd
from scipy.special import ndtr

from . import _gateway as core
from ._checks import choice, real_number
from ._ids import examples
from .errors import InvalidParameterError, InvalidTypeError, InvalidValuesError
from .stats import Alternative, checked, recipe_text
from .weights import Weights, aligned_values, core_matrix

Adjustment = Literal["none", "fdr", "bonferroni"]
ADJUSTMENTS = ("none", "fdr", "bonferroni")
QUADRANTS = ("high-high", "low-low", "high-low", "low-high")
SPOTS = ("hot spot", "cold spot")
CAUTION = (
    "Every unit is a test of its own: with many units some small p-values arise by chance "
    "(adjust='fdr' bounds the expected share of false discoveries). A significant unit shows a "
    "pattern unlikely under random assignment of the values for these weights; it is not a cause."
)
_ROWS_SHOWN = 10


def normal_p_values(z: np.ndarray, alternative: str) -> np.ndarray:
    """Standard normal tail probabilities of z-scores for the alternative (NaN stays NaN)."""
    if alternative == "greater":
        return ndtr(-z)
    if alternative == "less":
        return ndtr(z)
    return np.minimum(1.0, 2.0 * ndtr(-np.abs(z)))


def _checks(
    weights: Any, permutations: Any, alternative: Any, seed: Any, alpha: Any, adjust: Any
) -> tuple[int, int, float]:
    """(permutations, seed to use, alpha) after the checks of every statistic and of alpha and adjust."""
    r, seed_used = checked(weights, permutations, alternative, seed)
    choice(adjust, "adjust", ADJUSTMENTS)
    a = real_number(alpha, "alpha")
    if not 0.0 < a < 1.0:
        raise InvalidParameterError(f"alpha = {a} is not a significance level: give a number between 0 and 1 (0.05)")
    return r, seed_used, a


def _note(weights: Weights, islands: list[int]) -> str | None:
    if not islands:
        return None
    return (
        f"{len(islands)} island(s) have no neighbours, ids {examples(weights.ids[islands])}: their local "
        "statistics are missing (NaN) and they are not tested; connect_islands() or other weights reach them"
    )


@dataclass(frozen=True)
class _Inference:
    """P-values, their adjustment and the significance that follows, per unit."""

    p_value: np.ndarray
    p_permutation: np.ndarray | None
    z_permutation: np.ndarray | None
    p_adjusted: np.ndarray
    significant: np.ndarray


def _inference(z: np.ndarray, perm: Any, alternative: str, adjust: str, alpha: float) -> _Inference:
    p = normal_p_values(z, alternative)
    p_perm = z_perm = None
    if perm is not None:
        _, p_perm, _, _, z_perm = perm
    tested = p_perm if p_perm is not None else p
    adjusted = core.adjust_p_values(tested, adjust)
    significant = np.isfinite(adjusted) & (adjusted <= alpha)
    return _Inference(p, p_perm, z_perm, adjusted, significant)


def _boolean(values: np.ndarray, missing: np.ndarray) -> pd.api.extensions.ExtensionArray:
    out = pd.array(values, dtype="boolean")
    out[missing] = pd.NA
    return out


def _summary_lines(r: Any, what: str) -> list[str]:
    tested = int((~r.islands_mask).sum())
    basis = f"permutation (R = {r.permutations}, seed {r.seed})" if r.permutations else "analytic (normal)"
    adjust = {"none": "no adjustment", "fdr": "Benjamini-Hochberg FDR", "bonferroni": "Bonferroni"}[r.adjust]
    lines = [
        f"{what}: {r.n} units, {tested} tested; p-values {basis}, {r.alternative}, {adjust}, alpha = {r.alpha:g}",
        f"significant: {int(r.significant.sum())} ({r.counts_text()})",
    ]
    if r.note:
        lines.append("note: " + r.note)
    lines.append("caution: " + CAUTION)
    lines.append(f"weights: {r.weights}")
    return lines


def _html(r: Any, what: str) -> str:
    lines = _summary_lines(r, what)
    head = "<p><strong>" + html.escape(lines[0]) + "</strong><br>" + "<br>".join(html.escape(x) for x in lines[1:])
    table = r.table()
    shown = table.head(_ROWS_SHOWN).to_html(float_format=lambda v: f"{v:.4g}", na_rep="&mdash;")
    more = (
        f"<p><small>first {_ROWS_SHOWN} of {len(table)} rows; .table() has all</small></p>" if len(table) > 10 else ""
    )
    return "<div>" + head + "</p>" + shown + more + "</div>"


class _LocalResult:
    """What local results share: read-only arrays, ``n``, and their text and HTML views."""

    # given by each result: its ids, its title and its table (one row per unit, indexed by id)
    ids: pd.Index
    _title: Callable[[], str]
    table: Callable[[], pd.DataFrame]

    def __post_init__(self) -> None:
        _read_only(self)

    @property
    def n(self) -> int:
        """Number of units."""
        return len(self.ids)

    def __str__(self) -> str:
        lines = _summary_lines(self, self._title())
        lines.append(self.table().head(_ROWS_SHOWN).to_string(float_format=lambda v: f"{v:.4g}"))
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        return _html(self, self._title())


@dataclass(frozen=True)
class LocalMoranResult(_LocalResult):
    """Local Moran's I of every unit, with its inference (arrays in the order of ``ids``).

    ``p_value`` is analytic (randomization moments, normal tail);
    ``p_permutation`` the conditional permutation p-value (None when
    ``permutations == 0``); ``p_adjusted`` adjusts the p-values that decide
    significance (permutation ones when drawn, else analytic); ``quadrant``
    holds "high-high", "low-low", "high-low" or "low-high" (None for
    islands). Islands have NaN statistics and are never significant.
    """

    ids: pd.Index
    statistic: np.ndarray
    expected: np.ndarray
    variance: np.ndarray
    z: np.ndarray
    p_value: np.ndarray
    p_permutation: np.ndarray | None
    z_permutation: np.ndarray | None
    p_adjusted: np.ndarray
    significant: np.ndarray
    quadrant: np.ndarray
    standardized: np.ndarray
    lag: np.ndarray
    islands: pd.Index
    islands_mask: np.ndarray = field(repr=False)
    alternative: str
    alpha: float
    adjust: str
    permutations: int
    seed: int | None
    kurtosis: float
    weights: str
    note: str | None

    def counts_text(self) -> str:
        """Significant units per quadrant, as text."""
        q = self.quadrant[self.significant]
        return ", ".join(f"{name} {int((q == name).sum())}" for name in QUADRANTS)

    def table(self) -> pd.DataFrame:
        """One row per unit, indexed by id.

        Columns: ``value`` (standardized), ``lag`` (its spatial lag), ``I``,
        ``E[I]``, ``variance``, ``z``, ``p_analytic``, ``p_permutation``
        (when drawn), ``p_adjusted``, ``quadrant`` (categorical, missing for
        islands) and ``significant`` (nullable boolean, missing for islands).
        """
        cols: dict[str, Any] = {
            "value": self.standardized,
            "lag": self.lag,
            "I": self.statistic,
            "E[I]": self.expected,
            "variance": self.variance,
            "z": self.z,
            "p_analytic": self.p_value,
        }
        if self.p_permutation is not None:
            cols["p_permutation"] = self.p_permutation
        cols["p_adjusted"] = self.p_adjusted
        cols["quadrant"] = pd.Categorical(self.quadrant, categories=QUADRANTS)
        cols["significant"] = _boolean(self.significant, self.islands_mask)
        return pd.DataFrame(cols, index=self.ids)

    def _title(self) -> str:
        return "Local Moran's I"


@dataclass(frozen=True)
class LocalGetisOrdResult(_LocalResult):
    """Local Getis-Ord G_i (or G_i* when ``star``) of every unit, with its inference.

    ``statistic`` is the ratio G_i, ``expected`` its mean under
    randomization and ``z`` the Ord and Getis (1995) z-score; ``spot`` is
    "hot spot" (z > 0: high values around the unit) or "cold spot" (z <= 0),
    None for islands. P-values and significance as in
    :class:`LocalMoranResult`.
    """

    ids: pd.Index
    star: bool
    statistic: np.ndarray
    expected: np.ndarray
    z: np.ndarray
    p_value: np.ndarray
    p_permutation: np.ndarray | None
    z_permutation: np.ndarray | None
    p_adjusted: np.ndarray
    significant: np.ndarray
    spot: np.ndarray
    islands: pd.Index
    islands_mask: np.ndarray = field(repr=False)
    alternative: str
    alpha: float
    adjust: str
    permutations: int
    seed: int | None
    weights: str
    note: str | None

    def counts_text(self) -> str:
        """Significant hot and cold spots, as text."""
        s = self.spot[self.significant]
        return ", ".join(f"{name} {int((s == name).sum())}" for name in SPOTS)

    def table(self) -> pd.DataFrame:
        """One row per unit, indexed by id: ``G``, ``E[G]``, ``z``, p-values, ``spot``, ``significant``."""
        name = "G*" if self.star else "G"
        cols: dict[str, Any] = {name: self.statistic, f"E[{name}]": self.expected, "z": self.z}
        cols["p_analytic"] = self.p_value
        if self.p_permutation is not None:
            cols["p_permutation"] = self.p_permutation
        cols["p_adjusted"] = self.p_adjusted
        cols["spot"] = pd.Categorical(self.spot, categories=SPOTS)
        cols["significant"] = _boolean(self.significant, self.islands_mask)
        return pd.DataFrame(cols, index=self.ids)

    def _title(self) -> str:
        return "Local G_i*" if self.star else "Local G_i"


def _read_only(result: Any) -> None:
    """Mark every array of a result read-only: results are immutable."""
    for value in vars(result).values():
        if isinstance(value, np.ndarray):
            value.flags.writeable = False


def _labels(codes: np.ndarray, names: tuple[str, ...]) -> np.ndarray:
    """Names for codes 0..k-1, None for -1 (islands)."""
    table = np.array([*names, None], dtype=object)
    return table[np.where(codes < 0, len(names), codes)]


def local_moran(
    values: Any,
    weights: Weights,
    *,
    permutations: int = 999,
    seed: int | None = None,
    alpha: float = 0.05,
    adjust: Adjustment = "none",
    alternative: Alternative = "two-sided",
) -> LocalMoranResult:
    """Local Moran's I of every unit (Anselin 1995).

    Parameters
    ----------
    values : 1-D array-like or pandas Series
        One value per unit, in the order of ``weights.ids`` (a Series' index
        must equal ``weights.ids``).
    weights : Weights
        Non-negative weights without self-links; row-standardized weights
        are usual (then the lag is the neighbours' mean).
    permutations : int
        Conditional permutations per unit (0: analytic inference only; 1 is
        refused).
    seed : int, optional
        Seed of the permutations, 0 <= seed < 2**64; the same seed gives the
        same p-values for any number of threads. None draws one, reported in
        ``result.seed``.
    alpha : float
        Significance level, applied to the adjusted p-values.
    adjust : {"none", "fdr", "bonferroni"}
        Adjustment for testing every unit: "fdr" is Benjamini and Hochberg
        (1995), "bonferroni" multiplies by the number of units tested.
    alternative : {"two-sided", "greater", "less"}
        "greater" looks for positive local association (clusters), "less"
        for negative (outliers); "two-sided" counts draws at least as far
        from the unit's exact conditional mean as the observed I_i.

    Returns
    -------
    LocalMoranResult
        Arrays in the order of the ids, ``table()`` (pandas) and an HTML repr.

    Notes
    -----
    I_i = z_i sum_j w_ij z_j / m2 with z the centred values and
    m2 = sum_i z_i^2 / n (divisor n, as in Anselin 1995), so that
    sum_i I_i = S0 I with I the global Moran's I (= n I for row-standardized
    weights without islands). E[I_i] = -W_i / (n - 1) and Var[I_i] are
    Anselin's (1995) moments under randomization (with the kurtosis b2).
    The permutation p-value of unit i is (M + 1) / (R + 1): its value is
    held fixed and its k_i neighbours take values drawn without replacement
    from the other n - 1 units. Significance uses the permutation p-values
    when drawn, else the analytic ones. Quadrants compare the standardized
    value and its lag with 0 (a value exactly at the mean counts as low).
    Islands get NaN and a ``note``, not an error.

    Each unit is a separate test: with many units some small p-values arise
    by chance, and a significant unit says the pattern is unlikely under
    random assignment for these weights, not why it is there.
    """
    r_count, seed_used, a = _checks(weights, permutations, alternative, seed, alpha, adjust)
    x, _ = aligned_values(weights, values, allow_2d=False)
    r = core.local_moran(core_matrix(weights), x, r_count, seed_used, alternative, weights.ids)
    inf = _inference(r.z, r.permutation, alternative, adjust, a)
    mask = np.zeros(weights.n, dtype=bool)
    mask[r.islands] = True
    quadrant = _labels(r.quadrant, QUADRANTS)
    return LocalMoranResult(
        ids=weights.ids,
        statistic=r.statistic,
        expected=r.expected,
        variance=r.variance,
        z=r.z,
        p_value=inf.p_value,
        p_permutation=inf.p_permutation,
        z_permutation=inf.z_permutation,
        p_adjusted=inf.p_adjusted,
        significant=inf.significant,
        quadrant=quadrant,
        standardized=r.standardized,
        lag=r.lag,
        islands=weights.ids[r.islands],
        islands_mask=mask,
        alternative=alternative,
        alpha=a,
        adjust=adjust,
        permutations=r_count,
        seed=seed_used if r_count else None,
        kurtosis=r.kurtosis,
        weights=recipe_text(weights),
        note=_note(weights, r.islands),
    )


def local_getis_ord(
    values: Any,
    weights: Weights,
    *,
    star: bool = False,
    permutations: int = 999,
    seed: int | None = None,
    alpha: float = 0.05,
    adjust: Adjustment = "none",
    alternative: Alternative = "two-sided",
) -> LocalGetisOrdResult:
    """Local Getis-Ord G_i, or G_i* with ``star=True``, of every unit (Ord and Getis 1995).

    Parameters
    ----------
    values : 1-D array-like or pandas Series
        Non-negative values (Getis and Ord define G for a variable with a
        natural origin), one per unit in the order of ``weights.ids``.
    weights : Weights
        Non-negative weights. G_i leaves each unit's own value out and
        refuses self-links; G_i* counts it, with the stored self-weight w_ii
        where there is one and w_ii = 1 elsewhere (give self-weights
        explicitly, for example ``kernel_weights(..., self_weight=True)``,
        when the other weights are not on the scale of 1).
    star : bool
        G_i* instead of G_i.
    permutations, seed, alpha, adjust, alternative
        As in :func:`local_moran`; "greater" looks for hot spots, "less"
        for cold spots.

    Returns
    -------
    LocalGetisOrdResult
        Arrays in the order of the ids, ``table()`` (pandas) and an HTML repr.

    Notes
    -----
    G_i = sum_(j != i) w_ij x_j / sum_(j != i) x_j with E[G_i] = W_i / (n - 1);
    its z-score is (sum_j w_ij x_j - W_i xbar_i) /
    (s_i sqrt(((n - 1) S1_i - W_i^2) / (n - 2))), with xbar_i and s_i the
    mean and standard deviation (divisor n - 1) of the other n - 1 values
    and S1_i = sum_j w_ij^2. G_i* sums over all j including i, with
    E[G_i*] = W_i* / n and the z-score (sum_j w_ij x_j - W_i* xbar) /
    (s sqrt((n S1_i* - W_i*^2) / (n - 1))) over all n values (divisor n).
    The analytic z of G_i* treats every value as random; the permutation
    test of both holds the unit's own value fixed and draws its neighbours'
    values from the other n - 1 units. Units whose statistic cannot vary
    (linked to every other unit with equal weights) get NaN z-scores.

    Each unit is a separate test: with many units some small p-values arise
    by chance, and a hot spot is a pattern, not a cause.
    """
    if not isinstance(star, (bool, np.bool_)):
        raise InvalidTypeError(f"star must be True or False, got {star!r}")
    r_count, seed_used, a = _checks(weights, permutations, alternative, seed, alpha, adjust)
    x, _ = aligned_values(weights, values, allow_2d=False)
    negative = np.flatnonzero(x < 0)
    if len(negative):
        raise InvalidValuesError(
            f"{len(negative)} unit(s) have negative values, ids {examples(weights.ids[negative])}; "
            "Getis-Ord G is defined for non-negative values: use local_moran, or a variable with a natural origin",
            count=len(negative),
            positions=negative[:10].tolist(),
            ids=list(weights.ids[negative[:10]]),
        )
    r = core.local_getis_ord(core_matrix(weights), x, bool(star), r_count, seed_used, alternative, weights.ids)
    inf = _inference(r.z, r.permutation, alternative, adjust, a)
    mask = np.zeros(weights.n, dtype=bool)
    mask[r.islands] = True
    codes = np.where(mask | np.isnan(r.z), -1, np.where(r.z > 0, 0, 1))
    spot = _labels(codes, SPOTS)
    return LocalGetisOrdResult(
        ids=weights.ids,
        star=bool(star),
        statistic=r.statistic,
        expected=r.expected,
        z=r.z,
        p_value=inf.p_value,
        p_permutation=inf.p_permutation,
        z_permutation=inf.z_permutation,
        p_adjusted=inf.p_adjusted,
        significant=inf.significant,
        spot=spot,
        islands=weights.ids[r.islands],
        islands_mask=mask,
        alternative=alternative,
        alpha=a,
        adjust=adjust,
        permutations=r_count,
        seed=seed_used if r_count else None,
        weights=recipe_text(weights),
        note=_note(weights, r.islands),
    )
