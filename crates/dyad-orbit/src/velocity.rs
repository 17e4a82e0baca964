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

/// Velocities (primary, secondary) from the systemic velocity `gamma`, the
/// semi-amplitudes `k1`, `k2` (> 0) and the shape
/// cos(nu + omega) + e cos omega: `v1 = gamma - k1 shape`,
/// `v2 = gamma + k2 shape`, as the model evaluates them
/// (`v_star = gamma + c_star shape` with `c1 = -K1`, `c2 = K2`).
pub fn velocities_from_semi_amplitudes(gamma: f64, k1: f64, k2: f64, shape: f64) -> (f64, f64) {
    (gamma + (-k1) * shape, gamma + k2 * shape)
}
