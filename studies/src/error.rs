//! The error type of the command line: bad input (exit 2) or a runtime failure (exit 1).

use std::fmt;
use std::path::{Path, PathBuf};

/// Everything a `stria` command can fail with.
#[derive(Debug, Clone, PartialEq)]
pub enum CliError {
    /// Bad user input: names the file, the line, the field, what was wrong and what is allowed.
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
    /// A failure that is not the user's input (I/O, model failure of the baseline, ...).
    Runtime(String),
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

    /// A runtime failure.
    pub fn runtime(message: impl Into<String>) -> CliError {
        CliError::Runtime(message.into())
    }

    /// Process exit code: 2 for bad input, 1 for a runtime failure.
    pub fn exit_code(&self) -> u8 {
        match self {
            CliError::Input { .. } => 2,
            CliError::Runtime(_) => 1,
        }
    }
}

impl fmt::Display for CliError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CliError::Input {
                file,
                line,
                field,
                message,
                allowed,
            } => {
                write!(f, "error: {}", file.display())?;
                if let Some(line) = line {
                    write!(f, ":{line}")?;
                }
                write!(f, ": {field}: {message}")?;
                if !allowed.is_empty() {
                    write!(f, "\n  allowed: {allowed}")?;
                }
                Ok(())
            }
            CliError::Runtime(message) => write!(f, "error: {message}"),
        }
    }
}

impl std::error::Error for CliError {}

/// A runtime error for an I/O failure on a path.
pub fn io_error(action: &str, path: &Path, err: std::io::Error) -> CliError {
    CliError::Runtime(format!("could not {action} {}: {err}", path.display()))
}

#[cfg(test)]
mod tests {
    use super::*;

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
        assert!(text.contains("s.toml:7"), "{text}");
        assert!(text.contains("channel.gap_mm"), "{text}");
        assert!(text.contains("0.05 to 5"), "{text}");
        assert_eq!(CliError::runtime("x").exit_code(), 1);
    }
}
