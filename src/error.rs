//! The library's one error type.
//!
//! Every data-dependent failure (a bad file, a parameter out of range, a non-physical
//! state, a solver that does not converge, a proven bound that is violated) is an
//! [`Error`] with a [`ErrorKind`] and a lowercase message that names the file, the key and
//! the value at fault and says what would be valid. The binary maps kinds to exit codes.

use std::fmt;
use std::path::{Path, PathBuf};

/// What went wrong, in classes the command line maps to exit codes.
#[derive(Clone, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum ErrorKind {
    /// User input is malformed or out of range (exit status 2).
    Input,
    /// Reading or writing a file failed (exit status 2).
    Io,
    /// A state or channel is not physical within tolerance.
    NotPhysical,
    /// An iterative solver did not converge.
    NoConvergence,
    /// A computed quantity is NaN (or a probability lies outside [0, 1] by more than the
    /// stated rounding tolerance): never reported as data, never skipped by a check.
    NotANumber,
    /// A computed quantity violates a proven bound: a defect in the code, the model or the
    /// bound. Never hidden, never clipped.
    BoundViolation,
}

/// The library error.
#[derive(Clone, Debug, PartialEq)]
pub struct Error {
    kind: ErrorKind,
    file: Option<PathBuf>,
    /// 1-based line and column of the key in the file, where known.
    at: Option<(usize, usize)>,
    key: Option<String>,
    message: String,
}

/// Result alias for the library.
pub type Result<T> = std::result::Result<T, Error>;

impl Error {
    /// A new error of `kind` with `message`.
    pub fn new(kind: ErrorKind, message: impl Into<String>) -> Self {
        Error { kind, file: None, at: None, key: None, message: message.into() }
    }
    /// Input error shorthand.
    pub fn input(message: impl Into<String>) -> Self {
        Self::new(ErrorKind::Input, message)
    }
    /// Input error naming the key at fault.
    pub fn input_key(key: impl Into<String>, message: impl Into<String>) -> Self {
        Self::input(message).with_key(key)
    }
    /// Attaches the file the error is about (kept if one is already set).
    pub fn with_file(mut self, file: impl AsRef<Path>) -> Self {
        if self.file.is_none() {
            self.file = Some(file.as_ref().to_path_buf());
        }
        self
    }
    /// Attaches the key the error is about; an existing key becomes a sub-key.
    pub fn with_key(mut self, key: impl Into<String>) -> Self {
        let key = key.into();
        self.key = Some(match self.key.take() {
            Some(inner) if !key.is_empty() => format!("{key}.{inner}"),
            Some(inner) => inner,
            None => key,
        });
        self
    }
    /// Attaches the line and column (1-based) of the key in the file (kept if already set).
    pub fn at(mut self, line: usize, column: usize) -> Self {
        self.at.get_or_insert((line, column));
        self
    }
    /// The line and column of the key in the file, if known.
    pub fn location(&self) -> Option<(usize, usize)> {
        self.at
    }
    /// The error class.
    pub fn kind(&self) -> &ErrorKind {
        &self.kind
    }
    /// True for malformed or out-of-range input.
    pub fn is_input(&self) -> bool {
        matches!(self.kind, ErrorKind::Input | ErrorKind::Io | ErrorKind::NotPhysical)
    }
    /// True when a proven bound was violated.
    pub fn is_bound_violation(&self) -> bool {
        self.kind == ErrorKind::BoundViolation
    }
    /// The message without file and key.
    pub fn message(&self) -> &str {
        &self.message
    }
    /// The file at fault, if known.
    pub fn file(&self) -> Option<&Path> {
        self.file.as_deref()
    }
    /// The key at fault, if known.
    pub fn key(&self) -> Option<&str> {
        self.key.as_deref()
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.kind == ErrorKind::BoundViolation {
            write!(f, "BOUND VIOLATED: ")?;
        }
        match (&self.file, self.at) {
            (Some(file), Some((line, column))) => write!(f, "{}:{line}:{column}: ", file.display())?,
            (Some(file), None) => write!(f, "{}: ", file.display())?,
            (None, Some((line, column))) => write!(f, "line {line}, column {column}: ")?,
            (None, None) => {}
        }
        if let Some(key) = &self.key {
            write!(f, "key `{key}`: ")?;
        }
        write!(f, "{}", self.message)
    }
}

impl std::error::Error for Error {}

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error::new(ErrorKind::Io, e.to_string())
    }
}

/// Checks that `value` is finite and lies in `[lo, hi]`; the error names `key`.
pub fn check_range(key: &str, value: f64, lo: f64, hi: f64) -> Result<f64> {
    if !value.is_finite() || value < lo || value > hi {
        return Err(Error::input_key(key, format!("{value} is outside the allowed range [{lo}, {hi}]")));
    }
    Ok(value)
}
