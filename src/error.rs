//! The one error type of the library, grouped by who must act, and its mapping to exit codes.
//!
//! Every message names the file, the place in it (a key, a line, a tag) and what to do about it.
//! Finer reasons live in the message text; the public set of variants stays small on purpose.

use std::path::{Path, PathBuf};

/// Everything that can stop a job. Each variant carries the path it concerns.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The job file is wrong: a key, a value, a date. Fix the job file.
    #[error("{}: {place}: {message}", path.display())]
    Job {
        /// The job file.
        path: PathBuf,
        /// Where in the job file: a key path such as `surveys[2].date`, or `line 12 column 3`.
        place: String,
        /// What is wrong and how to fix it.
        message: String,
    },
    /// An input grid is missing, corrupt, unsupported or does not fit the others.
    #[error("{}: {message}", path.display())]
    Input {
        /// The grid file.
        path: PathBuf,
        /// What is wrong and how to fix it.
        message: String,
    },
    /// An output cannot be written, or would overwrite something the user has.
    #[error("{}: {message}", path.display())]
    Output {
        /// The output path.
        path: PathBuf,
        /// What is wrong and how to fix it.
        message: String,
    },
    /// The operating system refused a read or a write.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file concerned.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
}

/// Process exit codes, as listed in the README.
pub mod exit {
    /// Everything went well.
    pub const OK: u8 = 0;
    /// A failure while running (cannot write, out of space, an internal error).
    pub const RUN_FAILED: u8 = 1;
    /// The job file or an input grid is wrong; nothing was written.
    pub const BAD_INPUT: u8 = 2;
}

impl Error {
    /// Builds a [`Error::Job`].
    pub fn job(path: &Path, place: impl Into<String>, message: impl Into<String>) -> Self {
        Error::Job {
            path: path.to_path_buf(),
            place: place.into(),
            message: message.into(),
        }
    }
    /// Builds an [`Error::Input`].
    pub fn input(path: &Path, message: impl Into<String>) -> Self {
        Error::Input {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }
    /// Builds an [`Error::Output`].
    pub fn output(path: &Path, message: impl Into<String>) -> Self {
        Error::Output {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }
    /// Builds an [`Error::Io`].
    pub fn io(path: &Path, source: std::io::Error) -> Self {
        Error::Io {
            path: path.to_path_buf(),
            source,
        }
    }
    /// The exit code the CLI should return for this error.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Job { .. } | Error::Input { .. } => exit::BAD_INPUT,
            Error::Output { .. } | Error::Io { .. } => exit::RUN_FAILED,
        }
    }
}

/// Shorthand used across the crate.
pub type Result<T, E = Error> = std::result::Result<T, E>;
