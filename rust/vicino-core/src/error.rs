//! Errors of the core. Every variant carries the values that explain it, so
//! the binding can build a message that says what is wrong and what to do.
//!
//! Units are named by position through four small types ([`Unit`],
//! [`Pair`], [`Link`], [`Units`]). Their `Display` reads "unit at position
//! 3" and so on; [`template`] renders a message with a marker in their place
//! instead, and lists what each marker stands for, so that a caller that
//! knows the units' ids (the Python binding) can name the ids without
//! parsing the text.

use rayon::prelude::*;
use std::cell::RefCell;
use std::fmt;
use thiserror::Error;

/// Which axis of a coordinate pair a message talks about.
pub fn axis_name(axis: usize) -> &'static str {
    if axis == 0 {
        "x / longitude"
    } else {
        "y / latitude"
    }
}

/// What a marker in a [`template`] stands for.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Named {
    /// One unit: "unit at position 3".
    Unit(usize),
    /// Two units: "units at positions 3 and 5".
    Pair(usize, usize),
    /// A link: "link from position 3 to position 5".
    Link(usize, usize),
    /// Some of `count` units: "positions 3, 5 and 12 more".
    Units { first: Vec<usize>, count: usize },
    /// An edge of an edge list, by its index in the input: "edge 3".
    Edge(usize),
}

impl Named {
    /// Every position named.
    pub fn positions(&self) -> Vec<usize> {
        match self {
            Named::Unit(i) => vec![*i],
            Named::Pair(i, j) | Named::Link(i, j) => vec![*i, *j],
            Named::Units { first, .. } => first.clone(),
            Named::Edge(_) => Vec::new(),
        }
    }
}

thread_local! {
    /// Set while [`template`] renders: what each marker stands for.
    static MARKERS: RefCell<Option<Vec<Named>>> = const { RefCell::new(None) };
}

/// The character that encloses a marker's number in a template.
pub const MARK: char = '\u{1}';

fn write_named(f: &mut fmt::Formatter<'_>, named: Named) -> fmt::Result {
    let marked = MARKERS.with(|m| {
        m.borrow_mut().as_mut().map(|list| {
            list.push(named.clone());
            list.len() - 1
        })
    });
    if let Some(k) = marked {
        return write!(f, "{MARK}{k}{MARK}");
    }
    match named {
        Named::Unit(i) => write!(f, "unit at position {i}"),
        Named::Pair(i, j) => write!(f, "units at positions {i} and {j}"),
        Named::Link(i, j) => write!(f, "link from position {i} to position {j}"),
        Named::Edge(e) => write!(f, "edge {e}"),
        Named::Units { first, count } => {
            let shown: Vec<String> = first.iter().map(|p| p.to_string()).collect();
            write!(f, "positions {}", shown.join(", "))?;
            if count > first.len() {
                write!(f, " and {} more", count - first.len())?;
            }
            Ok(())
        }
    }
}

/// One unit named in a message.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Unit(pub usize);
/// Two units named in a message.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Pair(pub usize, pub usize);
/// A link (row i, column j) named in a message.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Link(pub usize, pub usize);
/// An edge of an edge list, by its index in the input.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Edge(pub usize);
/// The first few of `count` units named in a message.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Units {
    pub first: Vec<usize>,
    pub count: usize,
}

impl fmt::Display for Unit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write_named(f, Named::Unit(self.0))
    }
}
impl fmt::Display for Pair {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write_named(f, Named::Pair(self.0, self.1))
    }
}
impl fmt::Display for Link {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write_named(f, Named::Link(self.0, self.1))
    }
}
impl fmt::Display for Edge {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write_named(f, Named::Edge(self.0))
    }
}
impl fmt::Display for Units {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write_named(f, Named::Units { first: self.first.clone(), count: self.count })
    }
}

impl Units {
    /// The first few positions for which `bad` holds, and how many there are.
    pub fn find(len: usize, bad: impl Fn(usize) -> bool + Sync) -> Units {
        // the usual answer is none: look for one in parallel first
        if len >= 1 << 16 && !(0..len).into_par_iter().any(&bad) {
            return Units { first: Vec::new(), count: 0 };
        }
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
        Units { first, count }
    }

    /// The first few of the given positions.
    pub fn of(all: &[usize]) -> Units {
        Units { first: all.iter().copied().take(FIRST_FEW).collect(), count: all.len() }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.count == 0
    }
}

/// Everything the core can refuse.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum Error {
    #[error("no units were given; pass at least one location")]
    Empty,
    #[error("coordinates must come as pairs: got {len} numbers, which is not a multiple of 2")]
    OddCoordinates { len: usize },
    #[error(
        "coordinate {} of {unit} is {value}; coordinates must be finite \
         (drop or impute units with missing locations first)",
        axis_name(*axis)
    )]
    NonFiniteCoordinate { unit: Unit, axis: usize, value: f64 },
    #[error(
        "coordinate {} of {unit} is {value:e}; coordinates larger than 1e150 \
         in magnitude overflow squared distances: rescale them (for example to kilometres)",
        axis_name(*axis)
    )]
    CoordinateTooLarge { unit: Unit, axis: usize, value: f64 },
    #[error(
        "coordinate {} of {unit} is {value:e}, more than 10^138 times smaller than the largest \
         coordinate ({largest:e}): at that span squared distances underflow and nearby units \
         cannot be told apart; round such tiny values to 0",
        axis_name(*axis)
    )]
    CoordinateSpan { unit: Unit, axis: usize, value: f64, largest: f64 },
    #[error(
        "latitude of {unit} is {value}, outside [-90, 90]; \
         great_circle expects (longitude, latitude) in degrees, in that order"
    )]
    LatitudeOutOfRange { unit: Unit, value: f64 },
    #[error(
        "longitude of {unit} is {value}, outside [-180, 360]; \
         great_circle expects (longitude, latitude) in degrees, in that order"
    )]
    LongitudeOutOfRange { unit: Unit, value: f64 },
    #[error("{unit} has an unreadable geometry: {reason}")]
    InvalidGeometry { unit: Unit, reason: String },
    #[error(
        "unknown contiguity rule {name:?}: use \"queen\" (a shared point) or \"rook\" (a shared stretch of border)"
    )]
    UnknownRule { name: String },
    #[error("tolerance = {tolerance} is not usable: give a finite number >= 0 in the units of the coordinates")]
    InvalidTolerance { tolerance: f64 },
    #[error(
        "{pair} are neighbours but their centroids coincide, so the distance term of the \
         Cliff-Ord weight is infinite; use distance_power=0 or fix the geometry"
    )]
    CoincidentCentroids { pair: Pair },
    #[error(
        "{pair} share one location (distance 0), so their inverse-distance weight is infinite; pass \
         coincident=\"drop\" to leave such links out, or min_distance= to raise small distances to a floor"
    )]
    CoincidentUnits { pair: Pair },
    #[error("k = {k} is not possible with {n} units: k must be at least 1 and at most n - 1")]
    InvalidK { k: usize, n: usize },
    #[error("radius = {radius} is not usable: give a finite number >= 0 in the units of the distance")]
    InvalidRadius { radius: f64 },
    #[error("{name} = {value} is not usable: give a finite number >= 0")]
    InvalidPower { name: &'static str, value: f64 },
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
        "{} unit(s) have no neighbours (islands), {units}; pass islands=\"keep\" to leave their rows \
         empty, or choose weights that reach them",
        units.count
    )]
    Islands { units: Units },
    #[error("the weights have no links: {what} is undefined")]
    NoWeight { what: &'static str },
    #[error("{what} has length {got} but the weights have {expected} units")]
    LengthMismatch { what: &'static str, expected: usize, got: usize },
    #[error(
        "{} unit(s) have NaN or infinite values, {units}; drop or impute them (and subset the weights) first",
        units.count
    )]
    NonFiniteValues { units: Units },
    #[error("the values are constant (zero variance): spatial autocorrelation is undefined")]
    ConstantValues,
    #[error("{what} needs at least {need} units, got {n}")]
    TooFewUnits { what: &'static str, need: usize, n: usize },
    #[error(
        "{} unit(s) are linked to themselves (w_ii > 0), {units}; the moments of {what} assume \
         w_ii = 0: remove the diagonal first",
        units.count
    )]
    SelfLinks { what: &'static str, units: Units },
    #[error(
        "{} unit(s) have negative values, {units}; {what} is defined for non-negative values \
         (counts, amounts, rates): shift or transform the variable, or use Moran's I",
        units.count
    )]
    NegativeValues { what: &'static str, units: Units },
    #[error(
        "{what} needs at least two units with positive values, got {count}: its denominator, the sum \
         of x_i x_j over pairs of distinct units, is 0"
    )]
    TooFewPositive { what: &'static str, count: usize },
    #[error(
        "{} unit(s) have values other than 0 and 1, {units}; join counts take a binary variable coded 0 / 1",
        units.count
    )]
    NotBinary { units: Units },
    #[error("the matrix is not a valid sparse matrix: {reason}")]
    InvalidMatrix { reason: String },
    #[error("the matrix must be square, got shape ({rows}, {cols})")]
    NotSquare { rows: usize, cols: usize },
    #[error("the weight of the {link} is {value}; weights must be finite")]
    NonFiniteWeight { link: Link, value: f64 },
    #[error("the weight of the {link} is {value}; weights must be >= 0")]
    NegativeWeight { link: Link, value: f64 },
    #[error(
        "the weight of the {link} is stored as 0; a zero weight is no link: drop it \
         (scipy: matrix.eliminate_zeros())"
    )]
    ZeroWeight { link: Link },
    #[error(
        "the {what} of the {link} is {value:e}, outside the range of floating point \
         (about 1e-308 to 1e308): {advice}"
    )]
    WeightOutOfRange { what: &'static str, link: Link, value: f64, advice: &'static str },
    #[error("{what} of {units} overflows the range of floating point (about 1e308): {advice}")]
    Overflow { what: &'static str, units: Units, advice: &'static str },
    #[error("order k = {k} is not possible: k must be at least 1 (k = 1 is the weights' own links)")]
    InvalidOrder { k: usize },
    #[error("unknown {what} {name:?}: use one of {options}")]
    UnknownOption { what: &'static str, name: String, options: &'static str },
    #[error("position {position} is out of range for {n} units")]
    PositionOutOfRange { position: usize, n: usize },
    #[error("the {unit} is named twice; name each unit once")]
    RepeatedPosition { unit: Unit },
    #[error("the {link} exists already")]
    LinkExists { link: Link },
    #[error(
        "{} unit(s) among the {what} have no location (empty geometry), {units}; \
         drop them first (drop_islands() or drop(ids)), or give them a location",
        units.count
    )]
    Unlocated { what: &'static str, units: Units },
    #[error(
        "the largest eigenvalue did not converge in {iterations} iterations: it lies between \
         {low:e} and {high:e} (Collatz-Wielandt bounds); use \"max_entry\" or \"row\" instead, or report this case"
    )]
    NotConverged { iterations: usize, low: f64, high: f64 },
    #[error(
        "{what} did not converge in {products} products with the matrix: the last estimate {value} has a \
         residual of {error}, above the {wanted} wanted; loosen tol, or report this case"
    )]
    EigenNotConverged { what: &'static str, products: usize, value: f64, error: f64, wanted: f64 },
    #[error(
        "the {} real eigenvalue lies inside the spectrum, out of reach of the Arnoldi iteration: the {count} \
         eigenvalues with the {} real parts are all complex (the first {re} +- {im}i, after {products} products \
         with the matrix); compute the eigenvalues densely if the matrix is small enough, or use the narrower \
         interval (-1 / rho, 1 / rho) from spectral_radius()",
        if *largest { "largest" } else { "smallest" }, if *largest { "largest" } else { "smallest" }
    )]
    NoRealEigenvalue { count: usize, re: f64, im: f64, largest: bool, products: usize },
    #[error(
        "{what} would need about {} of memory, more than the limit of {}: {advice} \
         (vicino.set_memory_limit raises the limit)",
        bytes_text(*needed), bytes_text(*limit as f64)
    )]
    TooLarge { what: &'static str, needed: f64, limit: u64, advice: &'static str },
    #[error("{edge} names a unit beyond the {n} units")]
    EdgeOutOfRange { edge: Edge, n: usize },
    #[error("{edge} (the {link}) weighs {value}; edge weights must be finite and > 0")]
    EdgeWeight { edge: Edge, link: Link, value: f64 },
    #[error("{edge} links {unit} to itself; pass self_loops=\"keep\" or \"drop\"")]
    SelfLoop { edge: Edge, unit: Unit },
    #[error("{first} and {second} both give the {link}; pass duplicates=\"sum\", \"mean\" or \"max\" to merge them")]
    DuplicateEdge { first: Edge, second: Edge, link: Link },
    #[error("{path}, line {line}: {reason}")]
    BadFile { path: String, line: u64, reason: String },
    #[error("cannot use the file {path}: {reason}")]
    FileAccess { path: String, reason: String },
    #[error("interrupted")]
    Interrupted,
}

/// A byte count for a message: "3.2 GB".
pub fn bytes_text(b: f64) -> String {
    const UNITS: [&str; 6] = ["bytes", "kB", "MB", "GB", "TB", "PB"];
    let mut v = b;
    let mut k = 0;
    while v >= 1000.0 && k + 1 < UNITS.len() {
        v /= 1000.0;
        k += 1;
    }
    if k == 0 {
        format!("{v:.0} {}", UNITS[k])
    } else {
        format!("{v:.1} {}", UNITS[k])
    }
}

/// The message of `e` with a marker `\u{1}k\u{1}` in place of each mention
/// of units, and what each marker k stands for.
///
/// ```
/// use vicino_core::error::{template, Error, Named, Unit};
/// let e = Error::InvalidGeometry { unit: Unit(4), reason: "a ring has only 2 points".into() };
/// assert_eq!(e.to_string(), "unit at position 4 has an unreadable geometry: a ring has only 2 points");
/// let (text, named) = template(&e);
/// assert_eq!(text, "\u{1}0\u{1} has an unreadable geometry: a ring has only 2 points");
/// assert_eq!(named, vec![Named::Unit(4)]);
/// ```
pub fn template(e: &Error) -> (String, Vec<Named>) {
    MARKERS.with(|m| *m.borrow_mut() = Some(Vec::new()));
    let text = e.to_string();
    let named = MARKERS.with(|m| m.borrow_mut().take()).unwrap_or_default();
    (text, named)
}

/// Result type of the core.
pub type Result<T> = std::result::Result<T, Error>;

/// Up to this many positions are named in a message.
pub const FIRST_FEW: usize = 10;
