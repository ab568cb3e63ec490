//! Library-wide error type. Every variant says what was wrong and where; the binary maps
//! [`Error::is_bad_input`] to exit code 2.

use crate::atoms::AtomicDataError;

/// Errors from linegrid's library functions.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A parameter is outside its accepted range (names the option and the range).
    #[error("invalid {field} = {value}: {expected}")]
    InvalidParameter {
        /// The option or field name, as the user wrote it (e.g. `--temperature`).
        field: String,
        /// The offending value, as text.
        value: String,
        /// The accepted range or form.
        expected: String,
    },
    /// An unknown element or species name.
    #[error("unknown {kind} '{name}' in {field}: known are {known}")]
    UnknownName {
        /// "element" or "species".
        kind: &'static str,
        /// The name given.
        name: String,
        /// Where it was given.
        field: String,
        /// The known names.
        known: String,
    },
    /// Atomic data could not be read.
    #[error(transparent)]
    AtomicData(#[from] AtomicDataError),
}

impl Error {
    /// True when the error is the user's input (exit code 2), false for failures (exit 1).
    pub fn is_bad_input(&self) -> bool {
        matches!(
            self,
            Error::InvalidParameter { .. } | Error::UnknownName { .. } | Error::AtomicData(_)
        )
    }

    /// Shorthand for [`Error::InvalidParameter`].
    pub fn invalid(field: &str, value: impl std::fmt::Display, expected: &str) -> Error {
        Error::InvalidParameter {
            field: field.to_string(),
            value: value.to_string(),
            expected: expected.to_string(),
        }
    }
}

/// Result alias for the library.
pub type Result<T> = std::result::Result<T, Error>;
