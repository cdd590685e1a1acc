//! The one place where core errors become Python exceptions, and where core
//! calls run without the GIL.
//!
//! Exception classes live in `vicino.errors` (they inherit both
//! `VicinoError` and `ValueError` / `TypeError` / `MemoryError`, which a
//! class made in Rust could not); they are imported once, when the module
//! loads, so a missing class fails at import rather than when raising.
//! Units travel as data: the message is a template with a marker for each
//! mention of units (see `vicino_core::error::template`), and the exception
//! carries what each marker stands for in `_named`; Python names the ids.

use pyo3::exceptions::{PyKeyboardInterrupt, PyRuntimeError};
use pyo3::prelude::*;
use pyo3::sync::PyOnceLock;
use pyo3::types::{PyList, PyTuple, PyType};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::mpsc;
use std::time::Duration;
use vicino_core::error::{template, Named};
use vicino_core::{Error, Guard};

/// The exception classes of `vicino.errors` that core errors map to.
const CLASSES: [&str; 12] = [
    "InvalidInputError",
    "InvalidParameterError",
    "IdError",
    "IslandError",
    "InvalidMatrixError",
    "InvalidValuesError",
    "ConvergenceError",
    "TooLargeError",
    "FileFormatError",
    "FileAccessError",
    "InternalError",
    "VicinoError",
];

static TYPES: PyOnceLock<Vec<Py<PyType>>> = PyOnceLock::new();

/// Import the exception classes; called when the module loads.
pub fn load(py: Python<'_>) -> PyResult<()> {
    let module = py.import("vicino.errors")?;
    let types = CLASSES
        .iter()
        .map(|name| Ok(module.getattr(*name)?.cast_into::<PyType>()?.unbind()))
        .collect::<PyResult<Vec<_>>>()?;
    let _ = TYPES.set(py, types);
    Ok(())
}

fn class<'py>(py: Python<'py>, name: &str) -> PyResult<Bound<'py, PyType>> {
    let k = CLASSES.iter().position(|c| *c == name).expect("a known class name");
    let types = TYPES.get(py).ok_or_else(|| PyRuntimeError::new_err("vicino._core was not initialised"))?;
    Ok(types[k].bind(py).clone())
}

/// The Python class of a core error (exhaustive: a new variant must be placed).
fn class_name(e: &Error) -> &'static str {
    use Error::*;
    match e {
        Empty
        | OddCoordinates { .. }
        | InvalidGeometry { .. }
        | NonFiniteCoordinate { .. }
        | CoordinateTooLarge { .. }
        | CoordinateSpan { .. }
        | LatitudeOutOfRange { .. }
        | LongitudeOutOfRange { .. }
        | Unlocated { .. }
        | SelfLoop { .. }
        | DuplicateEdge { .. } => "InvalidInputError",
        InvalidK { .. }
        | InvalidRadius { .. }
        | InvalidPower { .. }
        | UnknownMetric { .. }
        | UnknownStandardization { .. }
        | UnknownAlternative { .. }
        | TooFewUnits { .. }
        | UnknownRule { .. }
        | InvalidTolerance { .. }
        | CoincidentCentroids { .. }
        | CoincidentUnits { .. }
        | InvalidOrder { .. }
        | UnknownOption { .. } => "InvalidParameterError",
        PositionOutOfRange { .. } | RepeatedPosition { .. } => "IdError",
        Islands { .. } => "IslandError",
        NoWeight { .. }
        | InvalidMatrix { .. }
        | NotSquare { .. }
        | NonFiniteWeight { .. }
        | NegativeWeight { .. }
        | ZeroWeight { .. }
        | WeightOutOfRange { .. }
        | LinkExists { .. }
        | EdgeOutOfRange { .. }
        | EdgeWeight { .. }
        | SelfLinks { .. } => "InvalidMatrixError",
        LengthMismatch { .. }
        | NonFiniteValues { .. }
        | ConstantValues
        | Overflow { .. }
        | NegativeValues { .. }
        | TooFewPositive { .. }
        | NotBinary { .. } => "InvalidValuesError",
        NotConverged { .. } | EigenNotConverged { .. } | NoRealEigenvalue { .. } => "ConvergenceError",
        TooLarge { .. } => "TooLargeError",
        BadFile { .. } => "FileFormatError",
        FileAccess { .. } => "FileAccessError",
        Interrupted => "VicinoError",
    }
}

/// What a marker stands for, as Python receives it: (kind, positions, count).
fn named_tuple<'py>(py: Python<'py>, named: &Named) -> PyResult<Bound<'py, PyTuple>> {
    let (kind, count) = match named {
        Named::Unit(_) => ("unit", 1),
        Named::Pair(..) => ("pair", 2),
        Named::Link(..) => ("link", 2),
        Named::Units { count, .. } => ("units", *count),
        Named::Edge(e) => return ("edge", vec![*e], 1).into_pyobject(py),
    };
    (kind, named.positions(), count).into_pyobject(py)
}

/// Turn a core error into the matching `vicino.errors` exception.
pub fn to_py(py: Python<'_>, e: Error) -> PyErr {
    if e == Error::Interrupted {
        return PyKeyboardInterrupt::new_err("interrupted");
    }
    let build = || -> PyResult<PyErr> {
        let (text, named) = template(&e);
        let inst = class(py, class_name(&e))?.call1((text,))?;
        let list = PyList::empty(py);
        for n in &named {
            list.append(named_tuple(py, n)?)?;
        }
        inst.setattr("_named", list)?;
        Ok(PyErr::from_value(inst))
    };
    build().unwrap_or_else(|err| err)
}

/// The memory budget of core calls, in bytes.
static MEMORY_LIMIT: AtomicU64 = AtomicU64::new(0);

/// Half the physical memory (from /proc/meminfo), or 8 GiB when unknown.
pub fn default_memory_limit() -> u64 {
    let total_kb = std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|s| s.lines().find(|l| l.starts_with("MemTotal:"))?.split_whitespace().nth(1)?.parse::<u64>().ok());
    total_kb.map_or(8 << 30, |kb| kb * 1024 / 2)
}

/// The current budget.
pub fn memory_limit() -> u64 {
    match MEMORY_LIMIT.load(Ordering::Relaxed) {
        0 => default_memory_limit(),
        v => v,
    }
}

/// Set the budget (0: back to the default).
pub fn set_memory_limit(bytes: u64) {
    MEMORY_LIMIT.store(bytes, Ordering::Relaxed);
}

/// How often a waiting call looks for Ctrl-C.
const POLL: Duration = Duration::from_millis(50);

/// Run a core computation without the GIL, on the rayon pool, while this
/// thread waits and checks Python's signals every 50 ms: Ctrl-C cancels the
/// computation's guard, the computation stops at its next check, and
/// KeyboardInterrupt is raised. A panic becomes
/// `vicino.errors.InternalError` instead of reaching the user as an abort.
pub fn run<T, F>(py: Python<'_>, f: F) -> PyResult<T>
where
    T: Send,
    F: FnOnce(&Guard) -> Result<T, Error> + Send,
{
    let guard = Guard::new(memory_limit());
    let mut interrupt: Option<PyErr> = None;
    let out = py.detach(|| {
        let (tx, rx) = mpsc::channel();
        rayon::in_place_scope(|s| {
            let guard = &guard;
            s.spawn(move |_| {
                let _ = tx.send(catch_unwind(AssertUnwindSafe(|| f(guard))));
            });
            loop {
                match rx.recv_timeout(POLL) {
                    Ok(result) => return result,
                    Err(mpsc::RecvTimeoutError::Timeout) => {
                        if interrupt.is_none() {
                            if let Err(err) = Python::attach(|py| py.check_signals()) {
                                interrupt = Some(err);
                                guard.cancel();
                            }
                        }
                    }
                    Err(mpsc::RecvTimeoutError::Disconnected) => {
                        return Err(Box::new("the computation ended without a result") as Box<dyn std::any::Any + Send>)
                    }
                }
            }
        })
    });
    if let Some(err) = interrupt {
        return Err(err);
    }
    match out {
        Ok(Ok(v)) => Ok(v),
        Ok(Err(e)) => Err(to_py(py, e)),
        Err(panic) => {
            let what = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "unknown".into());
            let msg =
                format!("internal error in vicino's core ({what}); please report it with the input that caused it");
            Err(match class(py, "InternalError").and_then(|c| c.call1((msg,))) {
                Ok(inst) => PyErr::from_value(inst),
                Err(e) => e,
            })
        }
    }
}
