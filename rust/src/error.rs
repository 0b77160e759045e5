//! The one error type every kernel returns; the bindings map it to a Python
//! `ValueError` subclass.

use std::fmt;

/// A kernel refused its input. `argument` names the offending parameter.
#[derive(Debug, Clone, PartialEq)]
pub struct Error {
    /// The parameter at fault, as the Python API names it.
    pub argument: &'static str,
    /// What is wrong with it.
    pub message: String,
}

impl Error {
    /// An error blaming `argument`.
    pub fn invalid(argument: &'static str, message: impl Into<String>) -> Self {
        Error {
            argument,
            message: message.into(),
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.argument, self.message)
    }
}

impl std::error::Error for Error {}

/// Result of every fallible kernel.
pub type Result<T> = std::result::Result<T, Error>;

/// Fail with `argument` unless `condition` holds.
pub fn ensure(
    condition: bool,
    argument: &'static str,
    message: impl FnOnce() -> String,
) -> Result<()> {
    if condition {
        Ok(())
    } else {
        Err(Error::invalid(argument, message()))
    }
}
