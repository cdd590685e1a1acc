//! The one place where core errors become Python exceptions, and where core
//! calls run without the GIL. Exception classes live in `vicino.errors`
//! (they inherit both `VicinoError` and `ValueError`/`TypeError`, which a
//! class made in Rust could not); they are looked up by name.

use pyo3::exceptions::PyRuntimeError;
use pyo3::prelude::*;
use pyo3::types::PyList;
use std::panic::{catch_unwind, AssertUnwindSafe};
use vicino_core::Error;

fn class_name(e: &Error) -> &'static str {
    use Error::*;
    match e {
        Empty
        | OddCoordinates { .. }
        | InvalidGeometry { .. }
        | NonFiniteCoordinate { .. }
        | CoordinateTooLarge { .. }
        | LatitudeOutOfRange { .. }
        | LongitudeOutOfRange { .. } => "InvalidInputError",
        InvalidK { .. }
        | InvalidRadius { .. }
        | UnknownMetric { .. }
        | UnknownStandardization { .. }
        | UnknownAlternative { .. }
        | TooFewUnits { .. }
        | UnknownRule { .. }
        | InvalidTolerance { .. }
        | CoincidentCentroids { .. }
        | InvalidOrder { .. }
        | UnknownOption { .. } => "InvalidParameterError",
        PositionOutOfRange { .. } | RepeatedPosition { .. } => "IdError",
        LinkExists { .. } => "InvalidMatrixError",
        Unlocated { .. } => "InvalidInputError",
        Islands { .. } => "IslandError",
        NoWeight { .. }
        | InvalidMatrix { .. }
        | NotSquare { .. }
        | NonFiniteWeight { .. }
        | NegativeWeight { .. }
        | SelfLinks { .. } => "InvalidMatrixError",
        LengthMismatch { .. } | NonFiniteValues { .. } | ConstantValues => "InvalidValuesError",
        NotConverged { .. } => "ConvergenceError",
    }
}

/// Turn a core error into the matching `vicino.errors` exception. Errors
/// that name positions carry them as `positions` (and `count`), so the
/// Python side can name ids instead.
pub fn to_py(py: Python<'_>, e: Error) -> PyErr {
    let build = || -> PyResult<PyErr> {
        let cls = py.import("vicino.errors")?.getattr(class_name(&e))?;
        let inst = cls.call1((e.to_string(),))?;
        let (count, first) = match &e {
            Error::Islands { count, first }
            | Error::NonFiniteValues { count, first }
            | Error::SelfLinks { count, first, .. }
            | Error::Unlocated { count, first, .. } => (*count, first.clone()),
            Error::PositionOutOfRange { position, .. } | Error::RepeatedPosition { position } => (1, vec![*position]),
            Error::LinkExists { row, col } => (2, vec![*row, *col]),
            Error::NonFiniteCoordinate { index, .. }
            | Error::CoordinateTooLarge { index, .. }
            | Error::LatitudeOutOfRange { index, .. }
            | Error::LongitudeOutOfRange { index, .. } => (1, vec![*index]),
            Error::InvalidGeometry { unit, .. } => (1, vec![*unit]),
            Error::CoincidentCentroids { i, j } => (2, vec![*i, *j]),
            _ => (0, vec![]),
        };
        inst.setattr("count", count)?;
        inst.setattr("positions", PyList::new(py, first)?)?;
        Ok(PyErr::from_value(inst))
    };
    build().unwrap_or_else(|err| err)
}

/// Run a core computation without the GIL. A panic becomes
/// `vicino.errors.InternalError` instead of reaching the user as an abort.
pub fn run<T, F>(py: Python<'_>, f: F) -> PyResult<T>
where
    T: Send,
    F: FnOnce() -> Result<T, Error> + Send,
{
    let out = py.detach(|| catch_unwind(AssertUnwindSafe(f)));
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
            Err(match py.import("vicino.errors").and_then(|m| m.getattr("InternalError")) {
                Ok(cls) => match cls.call1((msg.clone(),)) {
                    Ok(inst) => PyErr::from_value(inst),
                    Err(e) => e,
                },
                Err(_) => PyRuntimeError::new_err(msg),
            })
        }
    }
}
