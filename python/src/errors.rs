//! Library errors as Python exceptions.
//!
//! `InputError` (bad input: a model file, a keyword argument, a parameter
//! point) carries `.file` and `.key`; `RunError` is everything else (a
//! failed integration, a file that cannot be written). The library names
//! command-line flags in its messages (file `command line`, key `--x`);
//! here they become keyword arguments (file `keyword arguments`, key `x`),
//! so nothing a Python user reads talks about flags.

use pinflow::error::Error;
use pyo3::create_exception;
use pyo3::exceptions::PyException;
use pyo3::prelude::*;

create_exception!(
    pinflow,
    InputError,
    PyException,
    "Bad input: a model file, a keyword argument or a parameter point. Attributes: `file` (the model file, or `keyword arguments`), `key` (the key in the file or the keyword argument; may be empty) and `message`."
);
create_exception!(
    pinflow,
    RunError,
    PyException,
    "A run that failed: an integration that could not continue, a file that could not be written."
);

/// What the library calls the command line, and what Python calls it.
const COMMAND_LINE: &str = "command line";
const ARGUMENTS: &str = "keyword arguments";

/// The keyword argument that stands for a flag: `--ell-max` -> `ell_max`,
/// `--set` -> `point`, `-o` -> `out`, `--x/--y` -> `x/y`.
fn keyword(flag: &str) -> String {
    flag.split('/')
        .map(|f| match f {
            "--set" => "point".to_string(),
            "-o" => "out".to_string(),
            f => f.trim_start_matches('-').replace('-', "_"),
        })
        .collect::<Vec<_>>()
        .join("/")
}

/// A message with every `--flag` replaced by its keyword argument (the
/// switches `--force` and `--overwrite` as `force=True`, `overwrite=True`).
fn reword(message: &str) -> String {
    let message = message
        .replace("the flag", "the keyword argument")
        .replace("--force", "force=True")
        .replace("--overwrite", "overwrite=True");
    let mut out = String::with_capacity(message.len());
    let mut rest = message.as_str();
    while let Some(i) = rest.find("--") {
        out.push_str(&rest[..i]);
        let tail = &rest[i..];
        let end = tail[2..]
            .find(|c: char| !(c.is_ascii_alphanumeric() || c == '-'))
            .map_or(tail.len(), |j| j + 2);
        if end > 2 {
            out.push_str(&keyword(&tail[..end]));
        } else {
            out.push_str("--");
        }
        rest = &tail[end.max(2)..];
    }
    out.push_str(rest);
    out
}

/// An `InputError` naming a file, a key and what was expected.
fn input_error(file: &str, key: &str, message: &str) -> PyErr {
    let text = if key.is_empty() {
        format!("{file}: {message}")
    } else {
        format!("{file}: {key}: {message}")
    };
    Python::with_gil(|py| {
        let err = InputError::new_err(text);
        let value = err.value(py);
        // Setting attributes on a fresh exception object cannot fail in
        // practice; if it did, the message still names file and key.
        let _ = value.setattr("file", file);
        let _ = value.setattr("key", key);
        let _ = value.setattr("message", message);
        err
    })
}

/// An `InputError` about the keyword argument `key`.
pub fn input(key: &str, message: &str) -> PyErr {
    input_error(ARGUMENTS, key, message)
}

/// A library error as a Python exception; `model_file` names the model in
/// errors about a parameter point.
pub fn to_py(e: Error, model_file: &str) -> PyErr {
    match e {
        Error::Input(i) | Error::Refused(i) if i.file == COMMAND_LINE => {
            input_error(ARGUMENTS, &keyword(&i.key), &reword(&i.message))
        }
        Error::Input(i) | Error::Refused(i) => input_error(&i.file, &i.key, &reword(&i.message)),
        Error::Unphysical(u) => input_error(model_file, "", &u.to_string()),
        Error::Inaccurate(m) => input_error(model_file, "", &m),
        e => RunError::new_err(reword(&e.to_string())),
    }
}
