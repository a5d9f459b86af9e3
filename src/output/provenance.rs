//! Provenance of an output: which pinflow, which model file, which
//! parameter point, grid and options made it.
//!
//! Every JSON output carries it under the key `provenance`; a CSV written
//! to a file gets it in a sibling JSON file (`run.json` in an output
//! directory, `<stem>.run.json` beside `-o <stem>.csv`), because a comment
//! line would break CSV readers. The fields are documented in
//! `docs/columns.md`. Invariant: the same run gives the same bytes (no
//! clock time, no host name, no thread count).

use std::path::Path;

use serde::Serialize;
use serde_json::{Map, Value};
use sha2::{Digest, Sha256};

use crate::error::Error;

/// What made an output.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Provenance {
    /// pinflow's version (`CARGO_PKG_VERSION`).
    pub pinflow: String,
    /// Source revision (git commit) when built from a checkout, else null.
    pub revision: Option<String>,
    /// The subcommand (`dims`, `flow`, `scan`, ...).
    pub command: String,
    /// Who ran it when not the command line: `python` for the Python
    /// package's calls (absent for the command line).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub caller: Option<String>,
    /// The command-line arguments after the program name, without the
    /// ones that cannot change a result (`--threads N`, `--quiet`, `-q`,
    /// `--resume`).
    pub arguments: Vec<String>,
    /// The model file as given on the command line.
    pub model: Option<String>,
    /// SHA-256 of the model file's bytes (lowercase hex).
    pub model_sha256: Option<String>,
    /// Every parameter value used: the model's defaults with `--set` applied.
    pub parameters: Map<String, Value>,
    /// The label and unit of every parameter that has one in the model's
    /// `[params]` table, by name: `{"lambda": {"label": "λ", "unit": null}}`
    /// (absent when no parameter has one, as the model then has none).
    #[serde(skip_serializing_if = "Map::is_empty")]
    pub parameter_labels: Map<String, Value>,
    /// The scan axes (`name=min:max:n[:log]`), empty for a single point.
    pub grid: Vec<String>,
    /// Every option of the engine after defaults were filled in.
    pub options: Value,
}

impl Provenance {
    /// A record for `command` with this build's version and revision.
    pub fn new(command: &str, arguments: Vec<String>) -> Provenance {
        Provenance {
            pinflow: env!("CARGO_PKG_VERSION").to_string(),
            revision: revision().map(str::to_string),
            command: command.to_string(),
            caller: None,
            arguments,
            model: None,
            model_sha256: None,
            parameters: Map::new(),
            parameter_labels: Map::new(),
            grid: Vec::new(),
            options: Value::Object(Map::new()),
        }
    }
}

impl Provenance {
    /// A record of a run on a model: `model` names the file, `bytes` are
    /// its contents (hashed), `parameters` every value used (name, value),
    /// `options` the engine's options after defaults.
    pub fn for_model(
        command: &str,
        arguments: Vec<String>,
        (model, bytes): (&str, &[u8]),
        parameters: impl IntoIterator<Item = (String, f64)>,
        options: Value,
    ) -> Provenance {
        let mut p = Provenance::new(command, arguments);
        p.model = Some(model.to_string());
        p.model_sha256 = Some(sha256_hex(bytes));
        for (name, value) in parameters {
            p.parameters.insert(name, Value::from(value));
        }
        p.options = options;
        p
    }
}

/// The source revision this binary was built from, if known.
pub fn revision() -> Option<&'static str> {
    Some(env!("PINFLOW_REVISION")).filter(|r| !r.is_empty())
}

/// `pinflow --version` text: the version and, when known, the revision.
pub fn version_text() -> &'static str {
    env!("PINFLOW_VERSION_LONG")
}

/// SHA-256 of `bytes` as lowercase hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// Add `provenance` as the last key of a JSON object given as text (pretty
/// JSON with a trailing newline comes back). A JSON value that is not an
/// object is an internal error.
pub fn stamp_json(text: &str, p: &Provenance) -> Result<String, Error> {
    let mut v: Value = serde_json::from_str(text)
        .map_err(|e| Error::Numerical(format!("cannot add provenance to JSON: {e}")))?;
    let Value::Object(map) = &mut v else {
        return Err(Error::Numerical(
            "cannot add provenance: the JSON output is not an object".into(),
        ));
    };
    let pv = serde_json::to_value(p)
        .map_err(|e| Error::Numerical(format!("cannot write provenance: {e}")))?;
    map.insert("provenance".to_string(), pv);
    super::to_json(&v)
}

/// Write `run.json` into an output directory and add the provenance to
/// its `summary.json` or `convergence.json`, when there is one (`flow`,
/// `dims --wires`; the command line and the Python package alike).
pub fn stamp_dir(dir: &Path, prov: &Provenance) -> Result<(), Error> {
    super::write_atomic(&dir.join("run.json"), super::to_json(prov)?.as_bytes())?;
    for name in ["summary.json", "convergence.json"] {
        let summary = dir.join(name);
        if !summary.is_file() {
            continue;
        }
        let text = std::fs::read_to_string(&summary).map_err(|e| Error::io(&summary, e))?;
        let stamped = stamp_json(&text, prov)?;
        super::write_atomic(&summary, stamped.as_bytes())?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_matches_the_fips_180_2_examples() {
        // FIPS 180-2, appendix B.1 and B.2.
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
        assert_eq!(
            sha256_hex(b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"
        );
    }

    #[test]
    fn stamp_adds_the_key_last_and_refuses_non_objects() {
        let p = Provenance::new("dims", vec!["dims".into(), "m.toml".into()]);
        let out = stamp_json("{\"a\": 1}\n", &p).unwrap();
        let v: Value = serde_json::from_str(&out).unwrap();
        let keys: Vec<&String> = v.as_object().unwrap().keys().collect();
        assert_eq!(keys, ["a", "provenance"]);
        assert_eq!(v["provenance"]["pinflow"], env!("CARGO_PKG_VERSION"));
        assert!(stamp_json("[1]", &p).is_err());
    }
}
