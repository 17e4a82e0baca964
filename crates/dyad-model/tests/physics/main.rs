//! Tests of the model physics: likelihood, parameter maps and Jacobians,
//! configuration errors, simulation and the starting-point search. One test
//! binary (submodules) to keep link time down.

mod common;
mod config_errors;
mod errors;
mod jacobians;
mod likelihood;
mod modes;
mod simulate;
mod start;
mod toy_term;
mod velocities_only;
