//! Finite-length plain journal bearing: the Reynolds equation by finite differences.

use super::bearing::{PlainBearing, PlainResult};

/// Operating point and coefficients of a finite-length plain bearing.
pub fn plain_finite(_b: &PlainBearing, _speed_rpm: f64) -> Result<PlainResult, String> {
    Err("the finite-length solution is not available yet".into())
}
