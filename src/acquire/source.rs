//! A stream of two-channel samples for the capture engine: a live device, or a generator.

use std::time::Duration;

/// Counters of trouble on the way in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Health {
    /// Frames dropped because the worker did not keep up (ring buffer full).
    pub overrun_frames: u64,
    /// Stream errors and xruns the host reported.
    pub stream_errors: u64,
}

/// Why samples stopped.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum SourceError {
    /// The device could not be opened or configured.
    #[error("{0}")]
    Device(String),
    /// The device went away mid-stream.
    #[error("{0}")]
    Lost(String),
    /// A generator or file ran out.
    #[error("end of input")]
    Ended,
}

/// Two channels (A, B) of f32 samples in full-scale units.
pub trait Source {
    /// Sample rate, Hz.
    fn sample_rate_hz(&self) -> u32;
    /// Appends the frames available now, waiting up to `wait` for some.
    fn read(&mut self, out: &mut Vec<[f32; 2]>, wait: Duration) -> Result<(), SourceError>;
    /// Trouble so far.
    fn health(&self) -> Health;
}
