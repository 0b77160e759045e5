//! The one error type every kernel returns; the bindings map it to `ValueError`.

use std::fmt;

/// A kernel refused its input. `argument` names the offending parameter.
#[derive(Debug, Clone, PartialEq)]
pub struct Error {
    pub argument: &'static str,
    pub message: String,
}

impl Error {
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
