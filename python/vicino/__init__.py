"""vicino: spatial weights matrices, spatial lags and spatial autocorrelation.

Build weights from locations (:func:`k_nearest`, :func:`within_distance`)
or from a matrix (:func:`from_matrix`), standardize them, compute lags with
:meth:`Weights.lag` and test for spatial autocorrelation with :func:`moran`.
"""

from .build import EARTH_RADIUS_KM, cliff_ord, contiguity, from_matrix, k_nearest, within_distance
from .errors import (
    ConvergenceError,
    DuplicateLocationWarning,
    IdError,
    InternalError,
    InvalidInputError,
    InvalidMatrixError,
    InvalidParameterError,
    InvalidParameterTypeError,
    InvalidTypeError,
    InvalidValuesError,
    IslandError,
    VicinoError,
)
from .stats import AnalyticInference, MoranResult, PermutationInference, moran
from .weights import Step, Weights

__version__ = "0.1.0"

__all__ = [
    "EARTH_RADIUS_KM",
    "AnalyticInference",
    "ConvergenceError",
    "DuplicateLocationWarning",
    "IdError",
    "InternalError",
    "InvalidInputError",
    "InvalidMatrixError",
    "InvalidParameterError",
    "InvalidParameterTypeError",
    "InvalidTypeError",
    "InvalidValuesError",
    "IslandError",
    "MoranResult",
    "PermutationInference",
    "Step",
    "VicinoError",
    "Weights",
    "cliff_ord",
    "contiguity",
    "from_matrix",
    "k_nearest",
    "moran",
    "within_distance",
]
