//! Error types: one flat enum for the library, named by who is at fault.

use std::path::PathBuf;

/// Everything the library can fail with. Each variant's message names the
/// file or the parameter and, where possible, what to do about it.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A parameter is outside its valid range (the user can fix the call).
    #[error("invalid parameter: {0}")]
    Params(#[from] ParamsError),

    /// The input file does not exist or cannot be opened.
    #[error("{path}: cannot open: {source}")]
    Open {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },

    /// The input file exists but cannot be decoded.
    #[error("{path}: {message}")]
    Decode { path: PathBuf, message: String },

    /// The input is well formed but asks for more than the limits allow.
    #[error("{path}: {message}")]
    LimitExceeded { path: PathBuf, message: String },

    /// The input is valid but of a kind this tool does not handle.
    #[error("{path}: unsupported input: {message}")]
    Unsupported { path: PathBuf, message: String },

    /// An output cannot be written where asked.
    #[error("{path}: {message}")]
    Output { path: PathBuf, message: String },

    /// An operating-system error while writing an output.
    #[error("{path}: {source}")]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },

    /// The input decoded but holds nothing usable (e.g. every pixel transparent).
    #[error("{path}: {message}")]
    InputData { path: PathBuf, message: String },

    /// An ink library (or another table the user supplies) has a problem at a line.
    #[error("{path}: {}{message}", line.map(|l| format!("line {l}: ")).unwrap_or_default())]
    Table {
        path: PathBuf,
        line: Option<usize>,
        message: String,
    },

    /// The data gave the algorithm nothing to work with.
    #[error("{0}")]
    Data(String),
}

/// Parameter rules, one variant per rule.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ParamsError {
    #[error("k must be at least 1 (got {0})")]
    KTooSmall(usize),
    /// K above the most this use of it allows; `why` says what sets the bound.
    #[error("k must be at most {max} (got {got}){why}")]
    KTooLarge {
        got: usize,
        max: usize,
        why: &'static str,
    },
    #[error("beta must be a positive finite number (got {0})")]
    BadBeta(f64),
    #[error("{0}")]
    BadTarget(String),
    #[error("annealing schedule: {0}")]
    BadAnneal(String),
    #[error("shift tolerance must be a finite number >= 0 (got {0})")]
    BadShiftTolerance(f64),
    #[error("tolerance must be a finite number >= 0 (got {0})")]
    BadTolerance(f64),
    #[error("max-iter must be between 1 and 100000 (got {0})")]
    BadMaxIter(usize),
    #[error("restarts must be between 1 and 1000 (got {0})")]
    BadRestarts(usize),
    #[error("rows have {got} values each but the dimension is {dim}")]
    RaggedRows { got: usize, dim: usize },
    #[error("dimension must be at least 1")]
    ZeroDimension,
    #[error("{what} must be a finite number (row {row})")]
    NonFinite { what: &'static str, row: usize },
    #[error("weights must be finite and >= 0 (row {0})")]
    BadWeight(usize),
    #[error("there are {rows} rows but {weights} weights")]
    WeightCount { rows: usize, weights: usize },
    #[error("initial means: expected {expected} values, got {got}")]
    BadInitialMeans { expected: usize, got: usize },
    #[error("pinned colours: {0}")]
    BadPinned(String),
    #[error("{0}")]
    Other(String),
}

/// Result alias for the library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

impl Error {
    /// Shorthand for an I/O error on an output path.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            source,
        }
    }

    /// Shorthand for an output-placement problem.
    pub fn output(path: impl Into<PathBuf>, message: impl Into<String>) -> Self {
        Error::Output {
            path: path.into(),
            message: message.into(),
        }
    }

    /// True when the fault lies with the caller's input or parameters (exit code 2),
    /// rather than with the environment.
    pub fn is_usage(&self) -> bool {
        matches!(self, Error::Params(_))
    }
}
