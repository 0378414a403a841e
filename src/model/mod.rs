//! The shaft model: Timoshenko beam finite elements of a stepped shaft with discs and supports.

pub mod beam;
pub mod correlate;
pub mod margin;
pub mod plan;
pub mod run;
pub mod study;
