//! Error types shared by the library.
//!
//! Every error that comes from what the user wrote is an [`InputError`]: it
//! names the file, the key (a dotted path such as `array.V.1[0][1]` or
//! `term "tunnel".particles`) and what was expected. Errors that come from a
//! parameter point (a V that is not positive definite) name the point.
//! The binary maps input errors to exit code 2 and everything else to 1.

use std::fmt;

/// A problem with the user's input: a model file, a flag or a parameter.
#[derive(Debug, Clone, PartialEq)]
pub struct InputError {
    /// The file (or `command line`) the input came from.
    pub file: String,
    /// Where in the file: a dotted key path, or a flag name.
    pub key: String,
    /// What is wrong and what was expected.
    pub message: String,
}

impl InputError {
    /// Build an input error.
    pub fn new(
        file: impl Into<String>,
        key: impl Into<String>,
        message: impl Into<String>,
    ) -> Self {
        InputError {
            file: file.into(),
            key: key.into(),
            message: message.into(),
        }
    }
}

impl fmt::Display for InputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.key.is_empty() {
            write!(f, "{}: {}", self.file, self.message)
        } else {
            write!(f, "{}: {}: {}", self.file, self.key, self.message)
        }
    }
}

impl std::error::Error for InputError {}

/// A parameter point at which V is not positive definite: the theory is
/// unstable there.
#[derive(Debug, Clone, PartialEq)]
pub struct Unphysical {
    /// The parameter point, as `name=value` pairs.
    pub point: String,
    /// Smallest eigenvalue of V there (of V(q) at `q` for the q-space path).
    pub smallest_eigenvalue: f64,
    /// For arrays computed in q-space: a wave number q in [0, pi] at which
    /// V(q) is not positive definite (V(-q) is its complex conjugate).
    pub q: Option<f64>,
}

impl std::fmt::Display for Unphysical {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self.q {
            None => write!(f, "V is not positive definite at {}", self.point)?,
            Some(q) => write!(
                f,
                "V(q) is not positive definite at q = {q:.6} (and -q) at {}",
                self.point
            )?,
        }
        write!(
            f,
            ": smallest eigenvalue {:.6e} (an unstable theory; choose parameters where V > 0)",
            self.smallest_eigenvalue
        )
    }
}

impl std::error::Error for Unphysical {}

/// Failure to produce a figure file.
///
/// Carries the file that could not be written (or, for invalid input, the
/// path stem that was asked for) and a human-readable reason.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("cannot write figure {}: {message}", path.display())]
pub struct PlotError {
    /// The output path (or path stem) concerned.
    pub path: std::path::PathBuf,
    /// What went wrong.
    pub message: String,
}

impl PlotError {
    /// Builds an error for `path` with the given message.
    pub fn new(path: &std::path::Path, message: impl Into<String>) -> Self {
        PlotError {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }
}

/// Any failure of a library call.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// Bad input (exit code 2).
    #[error("{0}")]
    Input(#[from] InputError),
    /// A parameter point at which the theory is not defined (exit code 2 for
    /// a single point; a scan records it as the outcome "unphysical").
    #[error("{0}")]
    Unphysical(#[from] Unphysical),
    /// A parameter point at which a result cannot be computed to the
    /// accuracy the tool promises (e.g. a scaling dimension whose error
    /// bound exceeds 1e-8): the message names the point (exit code 2).
    #[error("{0}")]
    Inaccurate(String),
    /// Work above a safety limit, refused before it is done (exit code 2):
    /// the message gives the estimate and the way out (usually `--force`).
    /// Not bad input and not an undefined theory: a scan records such a
    /// point as `failed`, never `unphysical`.
    #[error("{0}")]
    Refused(InputError),
    /// A numerical failure (exit code 1).
    #[error("{0}")]
    Numerical(String),
    /// A figure could not be written (exit code 1).
    #[error("{0}")]
    Plot(#[from] PlotError),
    /// Reading or writing a file failed (exit code 1).
    #[error("{path}: {source}")]
    Io {
        /// The file concerned.
        path: String,
        /// The underlying error.
        source: std::io::Error,
    },
}

impl Error {
    /// The process exit code for this error: 2 for bad input, 1 otherwise.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input(_) | Error::Refused(_) | Error::Unphysical(_) | Error::Inaccurate(_) => 2,
            _ => 1,
        }
    }

    /// A refusal of work above a limit, about the command-line flag `key`.
    pub fn refused(key: &str, message: impl Into<String>) -> Self {
        Error::Refused(InputError::new("command line", key, message))
    }

    /// Wrap an I/O error with the path it concerns.
    pub fn io(path: impl AsRef<std::path::Path>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.as_ref().display().to_string(),
            source,
        }
    }
}

/// Result alias for library calls.
pub type Result<T> = std::result::Result<T, Error>;
