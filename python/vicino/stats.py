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

import numpy as np
import pandas as pd
from scipy.special import ndtr

from . import _core
from ._util import choice, whole_number
from .errors import InvalidTypeError
from .weights import Weights, call

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


def _seed(seed) -> int:
    if seed is None:
        return secrets.randbits(64)
    return whole_number(seed, "seed", minimum=0) % 2**64


def moran(
    values, weights: Weights, *, permutations: int = 999, seed=None, alternative: str = "two-sided"
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
        Number of random permutations (0 skips the permutation test).
    seed : int, optional
        Seed of the permutations; the result is the same for a given seed
        whatever the number of threads. When None a random seed is drawn and
        reported in ``result.permutation.seed``.
    alternative : {"two-sided", "greater", "less"}
        "greater" tests for positive autocorrelation (clustering). The
        two-sided permutation test counts draws at least as far from E[I]
        as the observed value.

    Notes
    -----
    E[I] = -1/(n - 1); the variances are those of Cliff and Ord (1981).
    A small p-value says the pattern is unlikely under random assignment of
    the values to units *for these weights*; it does not say why.
    """
    if not isinstance(weights, Weights):
        raise InvalidTypeError(f"weights must be vicino.Weights, got {type(weights).__name__}; see vicino.from_matrix")
    permutations = whole_number(permutations, "permutations", minimum=0)
    choice(alternative, "alternative", ALTERNATIVES)
    seed = _seed(seed)
    x, _ = weights._aligned(values, allow_2d=False)
    r = call(_core.moran, weights._csr(), x, permutations, seed, alternative, ids=weights.ids)
    stat, expected = r["statistic"], r["expected"]

    def analytic(name):
        z = r[f"{name}_z"]
        return AnalyticInference(name, r[f"{name}_variance"], z, normal_p(z, alternative))

    perm = None
    if permutations:
        draws = r["perm_draws"]
        draws.flags.writeable = False
        perm = PermutationInference(
            permutations, seed, r["perm_extreme"], r["perm_p"], r["perm_mean"], r["perm_std"], r["perm_z"], draws
        )
    return MoranResult(
        stat,
        expected,
        r["n"],
        alternative,
        analytic("normality"),
        analytic("randomization"),
        perm,
        r["s0"],
        r["s1"],
        r["s2"],
        " -> ".join(str(s) for s in weights.recipe),
    )
