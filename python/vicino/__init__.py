"""vicino: spatial weights matrices, spatial lags and spatial autocorrelation.

Build weights from locations (:func:`k_nearest`, :func:`within_distance`)
from polygons (:func:`contiguity`, :func:`cliff_ord`) or from a matrix
(:func:`from_matrix`); check them with :meth:`Weights.audit`, repair and
combine them, standardize them, compute lags with
:meth:`Weights.lag`, test for spatial autocorrelation with :func:`moran`,
:func:`geary`, :func:`getis_ord` and :func:`join_counts`, see how much the
conclusion depends on the weights with :func:`compare`, find where it is with
:func:`local_moran` and :func:`local_getis_ord`, and draw it with
:func:`moran_plot` and :func:`cluster_map`.
"""

from importlib.metadata import PackageNotFoundError, version

from ._gateway import get_memory_limit, set_memory_limit
from .audit import Audit, Components, Finding
from .autocorrelation import (
    GearyResult,
    GetisOrdResult,
    JoinCount,
    JoinCountsResult,
    SamplingInference,
    compare,
    geary,
    getis_ord,
    join_counts,
)
from .build import (
    EARTH_RADIUS_KM,
    cliff_ord,
    contiguity,
    from_edges,
    from_matrix,
    from_networkx,
    inverse_distance,
    k_nearest,
    kernel_weights,
    within_distance,
)
from .errors import (
    ConvergenceError,
    DuplicateLocationWarning,
    FileAccessError,
    FileFormatError,
    IdError,
    InternalError,
    InvalidInputError,
    InvalidMatrixError,
    InvalidParameterError,
    InvalidParameterTypeError,
    InvalidTypeError,
    InvalidValuesError,
    IslandError,
    TooLargeError,
    VicinoError,
)
from .io import read
from .local import LocalGetisOrdResult, LocalMoranResult, local_getis_ord, local_moran
from .plots import cluster_map, moran_plot
from .spectrum import EigenvalueBounds
from .stats import AnalyticInference, MoranResult, PermutationInference, moran
from .weights import Step, Weights

try:
    __version__ = version("vicino")
except PackageNotFoundError:  # pragma: no cover - running from a source tree without an install
    __version__ = "0+unknown"

__all__ = [
    "EARTH_RADIUS_KM",
    "AnalyticInference",
    "Audit",
    "Components",
    "ConvergenceError",
    "DuplicateLocationWarning",
    "EigenvalueBounds",
    "FileAccessError",
    "FileFormatError",
    "Finding",
    "GearyResult",
    "GetisOrdResult",
    "IdError",
    "InternalError",
    "InvalidInputError",
    "InvalidMatrixError",
    "InvalidParameterError",
    "InvalidParameterTypeError",
    "InvalidTypeError",
    "InvalidValuesError",
    "IslandError",
    "JoinCount",
    "JoinCountsResult",
    "LocalGetisOrdResult",
    "LocalMoranResult",
    "MoranResult",
    "PermutationInference",
    "SamplingInference",
    "Step",
    "TooLargeError",
    "VicinoError",
    "Weights",
    "cliff_ord",
    "cluster_map",
    "compare",
    "contiguity",
    "from_edges",
    "from_matrix",
    "from_networkx",
    "geary",
    "get_memory_limit",
    "getis_ord",
    "inverse_distance",
    "join_counts",
    "k_nearest",
    "kernel_weights",
    "local_getis_ord",
    "local_moran",
    "moran",
    "moran_plot",
    "read",
    "set_memory_limit",
    "within_distance",
]
