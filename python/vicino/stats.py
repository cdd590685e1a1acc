"""Spatial autocorrelation statistics: global Moran's I.

Results are small frozen dataclasses grouped by the assumption behind the
inference: ``normality`` (values drawn from a normal population),
``randomization`` (the observed values, randomly assigned to units; uses
their kurtosis) and ``permutation`` (random relabellings actually drawn).
"""

from __future__ import annotations

import html
import secrets
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import pandas as pd
from scipy.special import ndtr

from . import _gateway as core
from ._checks import choice, whole_number
from .errors import InvalidParameterError, InvalidTypeError
from .weights import Weights, aligned_values, core_matrix

Alternative = Literal["two-sided", "greater", "less"]
ALTERNATIVES = ("two-sided", "greater", "less")


def normal_p(z: float, alternative: str) -> float:
    """Tail probability of a standard normal z-score for the chosen alternative."""
    if alternative == "greater":
        return float(ndtr(-z))
    if alternative == "less":
        return float(ndtr(z))
    return float(min(1.0, 2.0 * ndtr(-abs(z))))


@dataclass(frozen=True)
class AnalyticInference:
    """Inference from the analytic moments under one assumption."""

    assumption: str
    variance: float
    z: float
    p_value: float


@dataclass(frozen=True)
class PermutationInference:
    """Inference from random permutations of the values over the units.

    ``p_value`` is (M + 1) / (R + 1), with R the number of permutations and
    M the number of draws at least as extreme as the observed statistic
    (Hope 1968); ``mean``, ``std`` (ddof = 1) and ``z`` describe the draws,
    which are kept in ``draws``. ``seed`` reproduces them exactly.
    """

    permutations: int
    seed: int
    extreme: int
    p_value: float
    mean: float
    std: float
    z: float
    draws: np.ndarray = field(repr=False, compare=False)


@dataclass(frozen=True)
class MoranResult:
    """Global Moran's I with inference under normality, randomization and permutation."""

    statistic: float
    expected: float
    n: int
    alternative: str
    normality: AnalyticInference
    randomization: AnalyticInference
    permutation: PermutationInference | None
    s0: float
    s1: float
    s2: float
    weights: str

    def table(self) -> pd.DataFrame:
        """One row per assumption: statistic, expected value, variance, z and p-value."""
        rows = []
        for inf in (self.normality, self.randomization):
            rows.append(
                {
                    "assumption": inf.assumption,
                    "I": self.statistic,
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
                    "I": self.statistic,
                    "expected": p.mean,
                    "variance": p.std**2,
                    "z": p.z,
                    "p_value": p.p_value,
                }
            )
        return pd.DataFrame(rows).set_index("assumption")

    def __str__(self) -> str:
        lines = [
            f"Moran's I = {self.statistic:.6f}  (E[I] = {self.expected:.6f}, n = {self.n}, "
            f"alternative: {self.alternative})"
        ]
        lines.append(self.table().to_string(float_format=lambda v: f"{v:.6g}"))
        lines.append(f"weights: {self.weights}")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        head = (
            f"<p><strong>Moran's I = {self.statistic:.6f}</strong> (E[I] = {self.expected:.6f}, "
            f"n = {self.n}, alternative: {html.escape(self.alternative)})<br>"
            f"<small>weights: {html.escape(self.weights)}</small></p>"
        )
        return "<div>" + head + self.table().to_html(float_format=lambda v: f"{v:.6g}") + "</div>"


def _seed(seed: Any) -> int:
    if seed is None:
        return secrets.randbits(64)
    return whole_number(seed, "seed", minimum=0, maximum=2**64 - 1)


def _permutations(permutations: Any) -> int:
    r = whole_number(permutations, "permutations", minimum=0)
    if r == 1:
        raise InvalidParameterError(
            "permutations = 1 gives no spread to compare with: use 0 to skip the permutation test, "
            "or at least 2 (999 is usual; the smallest p-value is 1 / (R + 1))"
        )
    return r


def checked(weights: Any, permutations: Any, alternative: Any, seed: Any) -> tuple[int, int]:
    """The checks every statistic makes of its arguments: (permutations, seed to use)."""
    if not isinstance(weights, Weights):
        raise InvalidTypeError(f"weights must be vicino.Weights, got {type(weights).__name__}; see vicino.from_matrix")
    r = _permutations(permutations)
    choice(alternative, "alternative", ALTERNATIVES)
    return r, _seed(seed)


def permutation_inference(out: Any, permutations: int, seed: int) -> PermutationInference | None:
    """The permutation summary the core returned, as a result (None when no draws were made)."""
    if out is None:
        return None
    extreme, p_value, mean, std, z, draws = out
    draws.flags.writeable = False
    return PermutationInference(permutations, seed, extreme, p_value, mean, std, z, draws)


def recipe_text(weights: Weights) -> str:
    """The recipe of ``weights`` on one line, as results name their weights."""
    return " -> ".join(str(s) for s in weights.recipe)


def moran(
    values: Any,
    weights: Weights,
    *,
    permutations: int = 999,
    seed: int | None = None,
    alternative: Alternative = "two-sided",
) -> MoranResult:
    """Global Moran's I of one variable under one weights matrix.

    Parameters
    ----------
    values : 1-D array-like or pandas Series
        One value per unit, in the order of ``weights.ids`` (a Series' index
        must equal ``weights.ids``).
    weights : Weights
        Any non-negative weights; asymmetric weights are handled by the
        general Cliff-Ord moments.
    permutations : int
        Number of random permutations (0 skips the permutation test; 1 is
        refused, since one draw has no spread).
    seed : int, optional
        Seed of the permutations, 0 <= seed < 2**64; the result is the same
        for a given seed whatever the number of threads. When None a random
        seed is drawn and reported in ``result.permutation.seed``.
    alternative : {"two-sided", "greater", "less"}
        "greater" tests for positive autocorrelation (clustering). The
        two-sided permutation test counts draws at least as far from E[I]
        as the observed value.

    Returns
    -------
    MoranResult
        The statistic and its inference under each assumption.

    Notes
    -----
    I = (n / S0) z'Wz / z'z with z the centred values; E[I] = -1/(n - 1);
    the variances are those of Cliff and Ord (1981), and the permutation
    p-value is (M + 1) / (R + 1) (Hope 1968). A small p-value says the
    pattern is unlikely under random assignment of the values to units *for
    these weights*; it does not say why.
    """
    permutations, seed = checked(weights, permutations, alternative, seed)
    x, _ = aligned_values(weights, values, allow_2d=False)
    r = core.moran(core_matrix(weights), x, permutations, seed, alternative, weights.ids)

    def analytic(name: str) -> AnalyticInference:
        z = getattr(r, f"{name}_z")
        return AnalyticInference(name, getattr(r, f"{name}_variance"), z, normal_p(z, alternative))

    return MoranResult(
        r.statistic,
        r.expected,
        r.n,
        alternative,
        analytic("normality"),
        analytic("randomization"),
        permutation_inference(r.permutation, permutations, seed),
        r.s0,
        r.s1,
        r.s2,
        recipe_text(weights),
    )
