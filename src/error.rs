//! The library's error type, split by whose fault it was. Messages start in
//! lower case, name the bad value and, where there is a fixed set, list the valid
//! choices. Context such as the file name is added by the caller.

use std::io;

/// Everything the library can fail with.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The input bytes are not a valid image of the format they claim.
    #[error("cannot decode {format}: {reason}")]
    Decode { format: &'static str, reason: String },

    /// The image cannot be written in the requested format.
    #[error("cannot encode {format}: {reason}")]
    Encode { format: &'static str, reason: String },

    /// The data are valid but use a feature Pumice does not handle.
    #[error("unsupported: {0}")]
    Unsupported(String),

    /// A decode limit would be exceeded.
    #[error("{0}")]
    Limit(String),

    /// A step or its parameters are wrong.
    #[error("step `{step}`: {message}")]
    Step { step: String, message: String },

    /// A recipe file is malformed.
    #[error("{0}")]
    Recipe(String),

    /// Reading or writing failed.
    #[error("{0}")]
    Io(#[from] io::Error),

    /// A broken internal invariant (a bug in Pumice, please report it).
    #[error("internal error: {0}")]
    Internal(String),
}

impl Error {
    /// True when the error comes from how the tool was called (exit code 2)
    /// rather than from one input file (exit code 1).
    pub fn is_usage(&self) -> bool {
        matches!(self, Error::Step { .. } | Error::Recipe(_))
    }
}

/// A parameter is missing, of the wrong type or out of range.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{0}")]
pub struct ParamError(pub String);

impl ParamError {
    pub fn new(message: impl Into<String>) -> Self {
        ParamError(message.into())
    }
}
