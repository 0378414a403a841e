//! Sources of two-channel samples: WAV files and WAV sets (folders of one WAV per station), and
//! live audio interfaces (`live`, the only module that knows cpal).
//!
//! Samples leave this layer as `f64` in digital full-scale units (±1.0); scaling to volts and
//! engineering units happens in the signal chain, where the setup is known.

pub mod live;
pub mod source;
pub mod wav;
pub mod wavset;

use std::path::{Path, PathBuf};
use thiserror::Error;

/// Bad input from a user: names the file and the problem.
#[derive(Debug, Error, Clone, PartialEq)]
#[error("{}: {problem}", path.display())]
pub struct InputError {
    /// The file or folder at fault.
    pub path: PathBuf,
    /// What is wrong with it, as a sentence.
    pub problem: String,
}

impl InputError {
    /// Builds an error for `path`.
    pub fn new(path: impl AsRef<Path>, problem: impl Into<String>) -> Self {
        Self {
            path: path.as_ref().to_path_buf(),
            problem: problem.into(),
        }
    }
}
