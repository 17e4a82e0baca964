//! Keplerian kinematics of a binary star.
//!
//! For: solving Kepler's equation fast and to machine precision, converting
//! between Campbell elements and Thiele-Innes constants, predicting the
//! relative sky position of the secondary and the line-of-sight velocity
//! shape at many epochs without allocation, Kepler's third law and the
//! spectroscopic mass relations with IAU nominal constants, and the time
//! scales accepted in input files.
//!
//! Not for: reading files, priors, likelihoods or sampling (those live in
//! dyad-model and dyad-sampler), light-time effects, relativistic terms,
//! perturbations by third bodies, or unbound (e >= 1) orbits.
//!
//! Brief overview:
//! - [`kepler::KeplerSolver`] (fast, per eccentricity, with a batch
//!   [`kepler::KeplerSolver::solve_many`]) and [`kepler::solve_kepler`]
//!   (no set-up): E, sin E, cos E to machine precision.
//! - [`elements::CampbellElements`], [`elements::ThieleInnes`]: the orbit.
//! - [`orbit::Orbit`]: precomputed orbit, positions and velocity shape
//!   ([`orbit::OrbitState`]) at one epoch or a batch.
//! - [`velocity`], [`laws`], [`constants`], [`time`].
//!
//! ```
//! use dyad_orbit::{CampbellElements, Orbit};
//! let el = CampbellElements {
//!     period_days: 1000.0, t_peri_jd: 2_451_545.0, e: 0.3, a: 100.0,
//!     inc_rad: 0.5, omega_rad: 1.0, node_rad: 2.0,
//! };
//! let orbit = Orbit::new(&el).unwrap();
//! let p = orbit.sky_offset(2_451_700.0);
//! assert!(p.separation() > 0.0 && p.separation() < 130.0 * 1.0001);
//! ```
#![deny(missing_docs)]
#![deny(unsafe_op_in_unsafe_fn)]

pub mod constants;
pub mod elements;
mod error;
pub mod kepler;
pub mod laws;
pub mod orbit;
pub mod time;
pub mod velocity;

pub use elements::{CampbellElements, OrbitGeometry, ThieleInnes};
pub use error::OrbitError;
pub use kepler::{solve_kepler, EccentricAnomaly, KeplerSolver};
pub use orbit::{BlockVisitor, Orbit, OrbitState, SkyOffset};
pub use time::TimeScale;
