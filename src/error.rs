//! The crate's one error type. Every variant names what the user must look at: the file, the
//! frame where known, or the parameter and the value received. Messages are one line.

use std::fmt;
use std::path::{Path, PathBuf};

/// Result alias used across the crate.
pub type Result<T> = std::result::Result<T, Error>;

/// Everything that can stop a command.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// An input file (or folder) that cannot be used as it is.
    #[error("{}{}: {problem}", path.display(), FrameNote(*frame))]
    Input {
        /// The offending file or folder.
        path: PathBuf,
        /// The frame (0-based) where the problem was found, when known.
        frame: Option<usize>,
        /// What is wrong, in words a user can act on.
        problem: String,
    },
    /// A parameter value that is out of range or cannot be parsed.
    #[error("parameter {name} = {value:?}: {problem}")]
    Parameter {
        /// The flag or key name.
        name: String,
        /// The value as received.
        value: String,
        /// Why it is refused.
        problem: String,
    },
    /// An output could not be written (full disk, permissions, ...).
    #[error("{}: cannot write: {source}", path.display())]
    Output {
        /// The output path.
        path: PathBuf,
        /// The operating-system error.
        source: std::io::Error,
    },
}

struct FrameNote(Option<usize>);

impl fmt::Display for FrameNote {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0 {
            Some(frame) => write!(f, ", frame {frame}"),
            None => Ok(()),
        }
    }
}

impl Error {
    /// An input problem without a known frame.
    pub fn input(path: &Path, problem: impl Into<String>) -> Self {
        Error::Input {
            path: path.to_path_buf(),
            frame: None,
            problem: problem.into(),
        }
    }

    /// An input problem at a given frame.
    pub fn input_at(path: &Path, frame: usize, problem: impl Into<String>) -> Self {
        Error::Input {
            path: path.to_path_buf(),
            frame: Some(frame),
            problem: problem.into(),
        }
    }

    /// A refused parameter value.
    pub fn parameter(name: &str, value: impl ToString, problem: impl Into<String>) -> Self {
        Error::Parameter {
            name: name.to_string(),
            value: value.to_string(),
            problem: problem.into(),
        }
    }

    /// An output write failure.
    pub fn output(path: &Path, source: std::io::Error) -> Self {
        Error::Output {
            path: path.to_path_buf(),
            source,
        }
    }

    /// The documented process exit code for this error: 2 for bad input or parameters,
    /// 3 when an output cannot be written.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input { .. } | Error::Parameter { .. } => 2,
            Error::Output { .. } => 3,
        }
    }
}
