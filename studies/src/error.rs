//! The error type of the command line: bad input (exit 2) or a runtime failure (exit 1).
//!
//! A runtime failure keeps what caused it: the I/O error with the path and what was being done,
//! the model's or the optimiser's error, the serialiser's error. `Display` prints one message
//! (`error: ...`) with the cause's text in it; [`std::error::Error::source`] gives the cause.

use std::path::{Path, PathBuf};

/// Everything a `stria` command can fail with.
#[derive(Debug, thiserror::Error)]
pub enum CliError {
    /// Bad user input: names the file, the line, the field, what was wrong and what is allowed.
    #[error("{}", input_text(file, *line, field, message, allowed))]
    Input {
        /// The file (or "command line" for options and `--set`).
        file: PathBuf,
        /// 1-based line in that file, when known.
        line: Option<usize>,
        /// The field, e.g. `channel.gap_mm`.
        field: String,
        /// What was wrong.
        message: String,
        /// What is allowed.
        allowed: String,
    },
    /// A file or directory could not be read, written, created, ...
    #[error("error: could not {action} {}: {source}", path.display())]
    Io {
        /// What was being done: "read", "write", "append to", ...
        action: String,
        /// The file or directory.
        path: PathBuf,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// The model refused or failed on a design that passed the study's checks.
    #[error("error: {context}: {source}")]
    Model {
        /// Which evaluation, e.g. "design_12: the model failed".
        context: String,
        /// The model's error.
        #[source]
        source: model::ModelError,
    },
    /// The optimiser refused a saved run state.
    #[error("error: {}: {source}; start afresh with --fresh", path.display())]
    Optimizer {
        /// The checkpoint file the state came from.
        path: PathBuf,
        /// The optimiser's error.
        #[source]
        source: optimizer::ConfigError,
    },
    /// A JSON document could not be written or read back.
    #[error("error: {context}: {source}")]
    Json {
        /// Which document, e.g. "checkpoint" or "case.json".
        context: String,
        /// The serialiser's error.
        #[source]
        source: serde_json::Error,
    },
    /// A saved JSON file of a run directory cannot be read back.
    #[error("error: {} is damaged ({source}); start afresh with --fresh", path.display())]
    Damaged {
        /// The file.
        path: PathBuf,
        /// The parser's error.
        #[source]
        source: serde_json::Error,
    },
    /// A TOML document could not be written.
    #[error("error: {context}: {source}")]
    Toml {
        /// Which document.
        context: String,
        /// The serialiser's error.
        #[source]
        source: toml::ser::Error,
    },
    /// A figure could not be drawn.
    #[error("error: {0}")]
    Figure(#[from] crate::figures::FigureError),
    /// The worker threads could not be started.
    #[error("error: could not start {threads} worker threads: {source}")]
    Threads {
        /// How many were asked for.
        threads: usize,
        /// Rayon's error.
        #[source]
        source: rayon::ThreadPoolBuildError,
    },
    /// A runtime failure with no underlying error to keep: a run directory in a state it
    /// cannot be in after a clean write (shorter than its last commit, a layout this version
    /// does not write), a model result without the part asked for.
    #[error("error: {0}")]
    Runtime(String),
}

fn input_text(
    file: &Path,
    line: Option<usize>,
    field: &str,
    message: &str,
    allowed: &str,
) -> String {
    let mut text = format!("error: {}", file.display());
    if let Some(line) = line {
        text.push_str(&format!(":{line}"));
    }
    text.push_str(&format!(": {field}: {message}"));
    if !allowed.is_empty() {
        text.push_str(&format!("\n  allowed: {allowed}"));
    }
    text
}

impl CliError {
    /// A bad-input error.
    pub fn input(
        file: impl AsRef<Path>,
        line: Option<usize>,
        field: impl Into<String>,
        message: impl Into<String>,
        allowed: impl Into<String>,
    ) -> CliError {
        CliError::Input {
            file: file.as_ref().to_path_buf(),
            line,
            field: field.into(),
            message: message.into(),
            allowed: allowed.into(),
        }
    }

    /// A runtime failure with no underlying error (see [`CliError::Runtime`]).
    pub fn runtime(message: impl Into<String>) -> CliError {
        CliError::Runtime(message.into())
    }

    /// The model failed; `context` says on what.
    pub fn model(context: impl Into<String>, source: model::ModelError) -> CliError {
        CliError::Model {
            context: context.into(),
            source,
        }
    }

    /// A JSON document failed; `context` says which.
    pub fn json(context: impl Into<String>, source: serde_json::Error) -> CliError {
        CliError::Json {
            context: context.into(),
            source,
        }
    }

    /// Process exit code: 2 for bad input, 1 for a runtime failure.
    pub fn exit_code(&self) -> u8 {
        match self {
            CliError::Input { .. } => 2,
            CliError::Io { .. }
            | CliError::Model { .. }
            | CliError::Optimizer { .. }
            | CliError::Json { .. }
            | CliError::Damaged { .. }
            | CliError::Toml { .. }
            | CliError::Figure(_)
            | CliError::Threads { .. }
            | CliError::Runtime(_) => 1,
        }
    }
}

/// A runtime error for an I/O failure on a path: "could not {action} {path}: {err}".
pub fn io_error(action: &str, path: &Path, err: std::io::Error) -> CliError {
    CliError::Io {
        action: action.to_string(),
        path: path.to_path_buf(),
        source: err,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::error::Error;

    #[test]
    fn input_error_names_file_line_field_and_exits_2() {
        let e = CliError::input(
            "s.toml",
            Some(7),
            "channel.gap_mm",
            "-1 is negative",
            "0.05 to 5",
        );
        assert_eq!(e.exit_code(), 2);
        let text = e.to_string();
        assert_eq!(
            text,
            "error: s.toml:7: channel.gap_mm: -1 is negative\n  allowed: 0.05 to 5"
        );
        assert_eq!(CliError::runtime("x").exit_code(), 1);
    }

    #[test]
    fn an_io_error_keeps_its_path_and_source() {
        let e = io_error(
            "read",
            Path::new("runs/x/front.csv"),
            std::io::Error::new(std::io::ErrorKind::NotFound, "gone"),
        );
        assert_eq!(e.exit_code(), 1);
        assert_eq!(
            e.to_string(),
            "error: could not read runs/x/front.csv: gone"
        );
        let CliError::Io { path, .. } = &e else {
            panic!("{e:?}")
        };
        assert_eq!(path, Path::new("runs/x/front.csv"));
        let source = e.source().expect("the I/O error is kept");
        assert_eq!(source.to_string(), "gone");
    }
}
