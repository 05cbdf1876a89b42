//! The one error type of the library.

use std::path::PathBuf;

/// Everything that can go wrong in the library. Messages are lowercase, say
/// what was wrong and where, and what would be valid.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A file could not be opened, read or written.
    #[error("{path}: {action}: {source}")]
    Io {
        /// The file involved.
        path: PathBuf,
        /// What was being done ("cannot open", "cannot write", ...).
        action: &'static str,
        /// The operating system's error.
        #[source]
        source: std::io::Error,
    },
    /// The input as a whole cannot be used (empty file, missing column, bad
    /// encoding, ...). `line` is 1-based; 0 when the problem has no line.
    #[error("{}", location_message(.file, *.line, .column.as_deref(), .message))]
    Input {
        /// Input file as given by the user.
        file: String,
        /// 1-based line number, 0 when not tied to a line.
        line: u64,
        /// Column name, when the problem is tied to one.
        column: Option<String>,
        /// What was wrong and what would be valid.
        message: String,
    },
    /// A workbook, or the sheet read from it, cannot be used (no such
    /// sheet, no header, every row refused, ...). `row` is 1-based; 0 when
    /// the problem has no row.
    #[error("{}", sheet_message(.file, .sheet.as_deref(), *.row, .column.as_deref(), .message))]
    Sheet {
        /// Workbook file as given by the user.
        file: String,
        /// The sheet, once one is chosen.
        sheet: Option<String>,
        /// 1-based row of the sheet, 0 when not tied to a row.
        row: u64,
        /// The column as a spreadsheet shows it: "column C (consumed)".
        column: Option<String>,
        /// What was wrong and what would be valid.
        message: String,
    },
    /// A setting is out of its valid range.
    #[error("invalid setting {name}: {message}")]
    Setting {
        /// The setting's name as the user writes it.
        name: &'static str,
        /// What was wrong and what would be valid.
        message: String,
    },
    /// A model cannot apply to a series (too short, zeros for a
    /// multiplicative form, ...).
    #[error("model {model} does not apply: {reason}")]
    NotApplicable {
        /// Model name.
        model: String,
        /// Why not.
        reason: String,
    },
    /// A model failed while fitting or forecasting.
    #[error("model {model} failed: {message}")]
    Model {
        /// Model name.
        model: String,
        /// What went wrong.
        message: String,
    },
    /// A chart could not be drawn.
    #[error("cannot draw the chart of {what}: {message}")]
    Chart {
        /// Which chart (product name or "overview").
        what: String,
        /// What went wrong.
        message: String,
    },
    /// The run configuration file is malformed or holds an unknown key or
    /// a value out of range. `line` and `column` are 1-based; 0 when the
    /// problem has no place in the file.
    #[error("{}", config_message(.file, *.line, *.column, .message))]
    Config {
        /// Configuration file as given by the user.
        file: String,
        /// 1-based line number, 0 when unknown.
        line: u64,
        /// 1-based column (in characters), 0 when unknown.
        column: u64,
        /// What was wrong and what would be valid.
        message: String,
    },
    /// Another run is writing the same output folder (or its lock cannot
    /// be checked); the message names that run and the way out.
    #[error("{message}")]
    Busy {
        /// Which run holds the folder, and what to do.
        message: String,
    },
    /// Writing CSV or JSON output failed.
    #[error("{path}: cannot write output: {message}")]
    Output {
        /// The output file.
        path: PathBuf,
        /// What went wrong.
        message: String,
    },
}

fn location_message(file: &str, line: u64, column: Option<&str>, message: &str) -> String {
    let mut out = file.to_string();
    if line > 0 {
        out.push_str(&format!(":{line}"));
    }
    if let Some(c) = column {
        out.push_str(&format!(": column '{c}'"));
    }
    out.push_str(": ");
    out.push_str(message);
    out
}

fn config_message(file: &str, line: u64, column: u64, message: &str) -> String {
    if line == 0 {
        format!("{file}: {message}")
    } else {
        format!("{file} line {line}, column {column}: {message}")
    }
}

fn sheet_message(
    file: &str,
    sheet: Option<&str>,
    row: u64,
    column: Option<&str>,
    message: &str,
) -> String {
    let mut place = Vec::new();
    if let Some(s) = sheet {
        place.push(format!("sheet '{s}'"));
    }
    if row > 0 {
        place.push(format!("row {row}"));
    }
    if let Some(c) = column {
        place.push(c.to_string());
    }
    if place.is_empty() {
        format!("{file}: {message}")
    } else {
        format!("{file}: {}: {message}", place.join(", "))
    }
}

/// Result alias used across the library.
pub type Result<T> = std::result::Result<T, Error>;

impl Error {
    /// Shorthand for a setting error.
    pub fn setting(name: &'static str, message: impl Into<String>) -> Self {
        Error::Setting {
            name,
            message: message.into(),
        }
    }
}
