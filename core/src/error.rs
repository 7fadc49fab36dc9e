//! The library's typed errors. Every error about user input names the file and, where there is
//! one, the line, the column or field, the offending text and what was expected.

use std::path::PathBuf;

/// Errors returned by fanmark-core. The library never panics on user data; the binary turns
/// these into messages and exit codes.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The file could not be opened or read.
    #[error("{path}: {source}")]
    Io {
        /// File concerned.
        path: PathBuf,
        /// Operating-system error.
        #[source]
        source: std::io::Error,
    },
    /// The path exists but is a directory.
    #[error("{path}: is a directory, expected a data file")]
    IsDirectory {
        /// The path given.
        path: PathBuf,
    },
    /// The file holds no data at all.
    #[error("{path}: the file is empty")]
    EmptyFile {
        /// File concerned.
        path: PathBuf,
    },
    /// A header but no data rows.
    #[error("{path}: the file has a header but no data rows")]
    HeaderOnly {
        /// File concerned.
        path: PathBuf,
    },
    /// A cell that should hold a number does not.
    #[error("{path}:{line}: column {column} holds `{text}`, expected a number")]
    NotANumber {
        /// File concerned.
        path: PathBuf,
        /// 1-based line number in the file.
        line: usize,
        /// Column name from the header (or its 1-based position).
        column: String,
        /// The cell's text.
        text: String,
    },
    /// A row with a different number of fields than the header.
    #[error("{path}:{line}: row has {found} fields, the header has {expected}")]
    FieldCount {
        /// File concerned.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// Fields in the header.
        expected: usize,
        /// Fields in this row.
        found: usize,
    },
    /// A matrix row whose length differs from the first data row's.
    #[error("{path}:{line}: row has {found} cells, but the first data row (line {first_line}) has {expected}; every row of a matrix needs the same length")]
    RaggedRow {
        /// File concerned.
        path: PathBuf,
        /// 1-based line number of the ragged row.
        line: usize,
        /// 1-based line number of the first data row.
        first_line: usize,
        /// Cells in the first data row.
        expected: usize,
        /// Cells in this row.
        found: usize,
    },
    /// More than one delimiter kind in the same file.
    #[error(
        "{path}:{line}: found `{found}` in a file delimited by `{expected}` (mixed delimiters)"
    )]
    MixedDelimiters {
        /// File concerned.
        path: PathBuf,
        /// 1-based line number.
        line: usize,
        /// The delimiter detected from the header.
        expected: String,
        /// The other delimiter found.
        found: String,
    },
    /// Required columns are missing or the header could not be understood.
    #[error("{path}: {message}; columns found: [{found}]; needed: {needed}")]
    Columns {
        /// File concerned.
        path: PathBuf,
        /// What went wrong.
        message: String,
        /// Header names found, comma separated.
        found: String,
        /// What the loader needs.
        needed: String,
    },
    /// Two or more measurements at the same (sweep, step) point where the policy forbids it.
    #[error("{path}: {count} duplicate points at the same ({axes}), first at line {line}; use the averaging policy to accept them")]
    DuplicatePoints {
        /// File concerned.
        path: PathBuf,
        /// Number of repeated points.
        count: usize,
        /// First line where a duplicate occurs.
        line: usize,
        /// Names of the two coordinates.
        axes: String,
    },
    /// An axis vector that is constant, non-monotonic, non-finite or of the wrong length.
    #[error("{context}: axis `{axis}`: {message}")]
    BadAxis {
        /// File or operation concerned.
        context: String,
        /// Axis name.
        axis: String,
        /// What is wrong and what was expected.
        message: String,
    },
    /// A binary array file whose header or body is malformed.
    #[error("{path}: {message}")]
    BadArrayFile {
        /// File concerned.
        path: PathBuf,
        /// What is wrong and what was expected.
        message: String,
    },
    /// The file's format is not one fanmark reads.
    #[error("{path}: {message}")]
    UnsupportedFormat {
        /// File concerned.
        path: PathBuf,
        /// What was found and what is supported.
        message: String,
    },
    /// A parameter or option given by the caller is out of its domain.
    #[error("invalid {what}: {message}")]
    InvalidInput {
        /// Which parameter.
        what: String,
        /// What is wrong and what was expected.
        message: String,
    },
    /// A map lacks what an operation needs (a channel, negative fields, a gate axis…).
    #[error("{0}")]
    MapRequirement(String),
    /// A JSON document (truth, calibration, project) is malformed.
    #[error("{path}: {source}")]
    Json {
        /// File concerned.
        path: PathBuf,
        /// Parser error with its line and column.
        #[source]
        source: serde_json::Error,
    },
}

impl Error {
    /// An [`Error::InvalidInput`] from two displayable parts.
    pub fn invalid(what: impl Into<String>, message: impl Into<String>) -> Error {
        Error::InvalidInput {
            what: what.into(),
            message: message.into(),
        }
    }
}

/// Result with the library's error type.
pub type Result<T> = std::result::Result<T, Error>;
