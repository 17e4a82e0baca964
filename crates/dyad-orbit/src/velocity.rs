//! Line-of-sight velocities of the two stars from the relative velocity.
//!
//! Radial velocity is positive for a receding star. The relative velocity
//! `v_rel` is that of the secondary with respect to the primary,
//! `v_rel = K * rv_shape` (see [`crate::orbit::OrbitState::rv_shape`]). With
//! the mass ratio q = M2/M1 the centre of mass stays put, so (docs/DESIGN.md)
//! `v1 = gamma - q/(1+q) v_rel` and `v2 = gamma + 1/(1+q) v_rel`.

/// Velocity of the primary: `gamma - q/(1+q) * v_rel`.
pub fn primary_velocity(gamma: f64, mass_ratio: f64, v_rel: f64) -> f64 {
    gamma - mass_ratio / (1.0 + mass_ratio) * v_rel
}

/// Velocity of the secondary: `gamma + 1/(1+q) * v_rel`.
pub fn secondary_velocity(gamma: f64, mass_ratio: f64, v_rel: f64) -> f64 {
    gamma + v_rel / (1.0 + mass_ratio)
}
