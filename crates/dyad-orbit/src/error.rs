//! The error type of this crate.

/// Why a set of orbital elements (or a solver) cannot be built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum OrbitError {
    /// Eccentricity outside [0, 1) or not finite.
    #[error("eccentricity must be finite and in [0, 1), got {0}")]
    Eccentricity(f64),
    /// Period not finite or not positive.
    #[error("period must be finite and positive, got {0} days")]
    Period(f64),
    /// Semi-major axis not finite or not positive.
    #[error("semi-major axis must be finite and positive, got {0}")]
    SemiMajorAxis(f64),
    /// Some other element is not a finite number.
    #[error("{name} must be finite, got {value}")]
    NotFinite {
        /// Which element.
        name: &'static str,
        /// Its value.
        value: f64,
    },
}
