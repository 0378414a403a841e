//! Estimators of modal parameters from FRFs, independent of how the FRFs were measured: the
//! poles (LSCF, Guillaume et al. 2003), residues (LSFD), the local nonlinear refinement of a pole,
//! the circle fit, single-peak line shapes of autospectra, and the measures of a shape (MAC, MPC).
//! They take plain arrays of lines and complex values and know nothing of stations or sessions.

pub mod autospectrum;
pub mod circle;
pub mod lscf;
pub mod lsfd;
pub mod refine;
pub mod shape;
