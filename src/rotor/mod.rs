//! The rotor at speed: the bench-validated shaft model spinning on bearings whose stiffness and
//! damping change with speed — damped whirl modes, Campbell diagram, critical speeds, stability
//! threshold and unbalance response. Advisory figures for a linearised model (no foundation, no
//! seals); decisions on a machine rest with the applicable standard and licensed practice.

pub mod bearing;
pub mod campbell;
pub mod eigen;
pub mod file;
pub mod model;
pub mod reynolds;
pub mod run;
pub mod unbalance;
