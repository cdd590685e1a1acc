"""The real extreme eigenvalues of a weights matrix and the interval they imply.

For a spatial autoregressive model y = rho W y + ..., the matrix I - rho W
is singular exactly when 1 / rho is an eigenvalue of W, so only the real
eigenvalues matter for a real rho. The interval around 0 on which I - rho W
stays invertible is (1 / lambda_min, 1 / lambda_max), lambda_min and
lambda_max being the smallest and largest real eigenvalues (LeSage and Pace
2009, Introduction to Spatial Econometrics, chapter 4). The computation
lives in the core; this module presents it.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass

import pandas as pd

CAUTION = (
    "the interval is where I - rho W is invertible around rho = 0; it does not make a model "
    "well specified, and estimates near its ends deserve care"
)


def admissible_interval(lambda_min: float, lambda_max: float) -> tuple[float, float]:
    """(1 / lambda_min, 1 / lambda_max), with an open end where no eigenvalue of that sign exists.

    Without a negative real eigenvalue nothing bounds rho from below
    (-inf); without a positive one nothing bounds it from above (+inf).
    """
    low = 1.0 / lambda_min if lambda_min < 0 else -math.inf
    high = 1.0 / lambda_max if lambda_max > 0 else math.inf
    return low, high


@dataclass(frozen=True)
class EigenvalueBounds:
    """The smallest and largest real eigenvalues of W and the interval they imply.

    Attributes
    ----------
    lambda_min, lambda_max : float
        The smallest and largest real eigenvalues of W. For non-negative
        weights lambda_max is the spectral radius (Perron-Frobenius).
    interval : tuple of float
        (1 / lambda_min, 1 / lambda_max): the values of an autoregressive
        parameter rho around 0 for which I - rho W is invertible (LeSage and
        Pace 2009, chapter 4). An end is infinite when W has no real
        eigenvalue of that sign.
    min_error, max_error : float
        Bounds on the error of each eigenvalue. For symmetric W, or W
        similar to a symmetric matrix by a diagonal scaling (row-standardized
        symmetric weights), some eigenvalue of W lies within the bound of the
        value given (the Ritz residual). For other matrices the value is an
        exact eigenvalue of a matrix within that distance of W (a backward
        error). Dense solves give a few rounding units of the norm of W;
        closed forms (constant row sums, a directed cycle) rounding only.
    min_method, max_method : str
        How each was found: ``"dense QR"``, ``"constant sums"``,
        ``"directed cycle (closed form)"``, ``"Lanczos"``, ``"thick-restart Lanczos"``,
        ``"implicitly restarted Arnoldi"``, ``"shifted power iteration"`` or
        ``"strongly connected blocks"``.
    tol : float
        The residual asked for, relative to the spectral radius.
    products : int
        Products with W that the iterations took (0 when none was needed).
    n : int
        Units.
    weights : str
        The recipe of the weights.
    """

    lambda_min: float
    lambda_max: float
    interval: tuple[float, float]
    min_error: float
    max_error: float
    min_method: str
    max_method: str
    tol: float
    products: int
    n: int
    weights: str

    def table(self) -> pd.DataFrame:
        """One row per end: eigenvalue, error bound, method, and the end of the interval it gives."""
        rows = [
            ("lambda_min", self.lambda_min, self.min_error, self.min_method, self.interval[0]),
            ("lambda_max", self.lambda_max, self.max_error, self.max_method, self.interval[1]),
        ]
        return pd.DataFrame(rows, columns=["end", "eigenvalue", "error_bound", "method", "rho_limit"]).set_index("end")

    def _head(self) -> str:
        low, high = self.interval
        return f"admissible rho: ({low:.6g}, {high:.6g})  (n = {self.n}, tol = {self.tol:g})"

    def __str__(self) -> str:
        lines = [self._head(), self.table().to_string(float_format=lambda v: f"{v:.10g}")]
        lines += [f"weights: {self.weights}", f"note: {CAUTION}"]
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        head = (
            f"<p><strong>{html.escape(self._head())}</strong><br>"
            f"<small>weights: {html.escape(self.weights)}</small></p>"
        )
        table = self.table().to_html(float_format=lambda v: f"{v:.10g}")
        return "<div>" + head + table + f"<p><small>{html.escape(CAUTION)}</small></p></div>"
