//! Errors of the core. Every variant carries the values that explain it, so the
//! binding can build a message that says what is wrong and what to do.

use thiserror::Error;

/// Which axis of a coordinate pair a message talks about.
pub fn axis_name(axis: usize) -> &'static str {
    if axis == 0 {
        "x / longitude"
    } else {
        "y / latitude"
    }
}

/// Everything the core can refuse.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum Error {
    #[error("no units were given; pass at least two locations")]
    Empty,
    #[error("coordinates must come as pairs: got {len} numbers, which is not a multiple of 2")]
    OddCoordinates { len: usize },
    #[error(
        "coordinate {} of unit at position {index} is {value}; coordinates must be finite \
         (drop or impute units with missing locations first)",
        axis_name(*axis)
    )]
    NonFiniteCoordinate { index: usize, axis: usize, value: f64 },
    #[error(
        "coordinate {} of unit at position {index} is {value:e}; coordinates larger than 1e150 \
         in magnitude overflow squared distances: rescale them (for example to kilometres)",
        axis_name(*axis)
    )]
    CoordinateTooLarge { index: usize, axis: usize, value: f64 },
    #[error(
        "latitude of unit at position {index} is {value}, outside [-90, 90]; \
         great_circle expects (longitude, latitude) in degrees, in that order"
    )]
    LatitudeOutOfRange { index: usize, value: f64 },
    #[error(
        "longitude of unit at position {index} is {value}, outside [-180, 360]; \
         great_circle expects (longitude, latitude) in degrees, in that order"
    )]
    LongitudeOutOfRange { index: usize, value: f64 },
    #[error("unit at position {unit} has an unreadable geometry: {reason}")]
    InvalidGeometry { unit: usize, reason: String },
    #[error(
        "unknown contiguity rule {name:?}: use \"queen\" (a shared point) or \"rook\" (a shared stretch of border)"
    )]
    UnknownRule { name: String },
    #[error("tolerance = {tolerance} is not usable: give a finite number >= 0 in the units of the coordinates")]
    InvalidTolerance { tolerance: f64 },
    #[error(
        "units at positions {i} and {j} are neighbours but their centroids coincide, so the \
         distance term of the Cliff-Ord weight is infinite; use distance_power=0 or fix the geometry"
    )]
    CoincidentCentroids { i: usize, j: usize },
    #[error("k = {k} is not possible with {n} units: k must be at least 1 and at most n - 1")]
    InvalidK { k: usize, n: usize },
    #[error("radius = {radius} is not usable: give a finite number >= 0 in the units of the distance")]
    InvalidRadius { radius: f64 },
    #[error("unknown metric {name:?}: use \"euclidean\" or \"great_circle\"")]
    UnknownMetric { name: String },
    #[error(
        "unknown standardization {name:?}: use one of \"row\", \"binary\", \"max_entry\", \
         \"max_eigenvalue\", \"global\", \"variance_stabilizing\", \"none\""
    )]
    UnknownStandardization { name: String },
    #[error("unknown alternative {name:?}: use \"two-sided\", \"greater\" or \"less\"")]
    UnknownAlternative { name: String },
    #[error(
        "{count} unit(s) have no neighbours (islands), first at positions {first:?}; \
         pass islands=\"keep\" to leave their rows empty, or choose weights that reach them"
    )]
    Islands { count: usize, first: Vec<usize> },
    #[error("the weights have no links, or all weights are zero: {what} is undefined")]
    NoWeight { what: &'static str },
    #[error("{what} has length {got} but the weights have {expected} units")]
    LengthMismatch { what: &'static str, expected: usize, got: usize },
    #[error("{count} value(s) are NaN or infinite, first at positions {first:?}; drop or impute them first")]
    NonFiniteValues { count: usize, first: Vec<usize> },
    #[error("the values are constant (zero variance): spatial autocorrelation is undefined")]
    ConstantValues,
    #[error("{what} needs at least {need} units, got {n}")]
    TooFewUnits { what: &'static str, need: usize, n: usize },
    #[error(
        "{count} unit(s) are linked to themselves (w_ii > 0), first at positions {first:?}; \
         the moments of {what} assume w_ii = 0: remove the diagonal first"
    )]
    SelfLinks { what: &'static str, count: usize, first: Vec<usize> },
    #[error("the matrix is not a valid sparse matrix: {reason}")]
    InvalidMatrix { reason: String },
    #[error("the matrix must be square, got shape ({rows}, {cols})")]
    NotSquare { rows: usize, cols: usize },
    #[error("weight at row {row}, column {col} is {value}; weights must be finite")]
    NonFiniteWeight { row: usize, col: usize, value: f64 },
    #[error("weight at row {row}, column {col} is {value}; weights must be >= 0")]
    NegativeWeight { row: usize, col: usize, value: f64 },
    #[error("order k = {k} is not possible: k must be at least 1 (k = 1 is the weights' own links)")]
    InvalidOrder { k: usize },
    #[error("unknown {what} {name:?}: use one of {options}")]
    UnknownOption { what: &'static str, name: String, options: &'static str },
    #[error("position {position} is out of range for {n} units")]
    PositionOutOfRange { position: usize, n: usize },
    #[error("the unit at position {position} is named twice; name each unit once")]
    RepeatedPosition { position: usize },
    #[error("the link from position {row} to position {col} exists already")]
    LinkExists { row: usize, col: usize },
    #[error(
        "{count} unit(s) among the {what} have no location (empty geometry), first at positions {first:?}; \
         drop them first (drop_islands() or drop(ids)), or give them a location"
    )]
    Unlocated { what: &'static str, count: usize, first: Vec<usize> },
    #[error(
        "the largest eigenvalue did not converge in {iterations} iterations \
         (last estimate {estimate}); use \"max_entry\" or \"row\" instead, or report this case"
    )]
    NotConverged { iterations: usize, estimate: f64 },
}

/// Result type of the core.
pub type Result<T> = std::result::Result<T, Error>;

/// Up to this many positions are named in a message.
pub const FIRST_FEW: usize = 10;

/// The first few positions for which `bad` holds, and how many there are.
pub fn first_positions(len: usize, bad: impl Fn(usize) -> bool) -> (usize, Vec<usize>) {
    let mut count = 0;
    let mut first = Vec::new();
    for i in 0..len {
        if bad(i) {
            count += 1;
            if first.len() < FIRST_FEW {
                first.push(i);
            }
        }
    }
    (count, first)
}
