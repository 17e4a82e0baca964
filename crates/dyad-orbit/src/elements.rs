//! Campbell elements of the relative orbit and the Thiele-Innes constants.
//!
//! Conventions (docs/DESIGN.md):
//! - The relative orbit is that of the secondary about the primary;
//!   `omega_rad` is the secondary's argument of periastron (the primary's
//!   spectroscopic omega is `omega + pi`).
//! - `node_rad` (Omega) is the position angle, measured from North through
//!   East, of the ascending node, defined as the node at which the
//!   secondary moves away from the observer.
//! - `inc_rad` in [0, pi]: i < 90 deg is direct motion (position angle
//!   increasing with time), i > 90 deg retrograde.
//! - Thiele-Innes constants (e.g. W. D. Heintz, Double Stars, 1978, ch. 5;
//!   docs/DESIGN.md): A = a(cos w cos W - sin w sin W cos i),
//!   B = a(cos w sin W + sin w cos W cos i), F = a(-sin w cos W - cos w sin W cos i),
//!   G = a(-sin w sin W + cos w cos W cos i), so that with X = cos E - e and
//!   Y = sqrt(1-e^2) sin E the offsets are dDec = A X + F Y (north) and
//!   dRA* = B X + G Y (east).

use crate::error::OrbitError;
use std::f64::consts::{PI, TAU};

/// Campbell elements of the relative orbit (secondary about primary).
///
/// `a` may be in any unit (mas, arcsec, au): positions come out in that unit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CampbellElements {
    /// Orbital period in days.
    pub period_days: f64,
    /// Julian Date of a periastron passage.
    pub t_peri_jd: f64,
    /// Eccentricity, 0 <= e < 1.
    pub e: f64,
    /// Semi-major axis of the relative orbit (any unit, > 0).
    pub a: f64,
    /// Inclination in radians (i < pi/2: direct motion).
    pub inc_rad: f64,
    /// The secondary's argument of periastron in radians.
    pub omega_rad: f64,
    /// Position angle of the ascending node (secondary receding) in radians.
    pub node_rad: f64,
}

impl CampbellElements {
    /// Checks that every element is finite, 0 <= e < 1, P > 0 and a > 0.
    pub fn validate(&self) -> Result<(), OrbitError> {
        if !(self.period_days.is_finite() && self.period_days > 0.0) {
            return Err(OrbitError::Period(self.period_days));
        }
        if !(0.0..1.0).contains(&self.e) {
            return Err(OrbitError::Eccentricity(self.e));
        }
        if !(self.a.is_finite() && self.a > 0.0) {
            return Err(OrbitError::SemiMajorAxis(self.a));
        }
        for (name, value) in [
            ("t_peri_jd", self.t_peri_jd),
            ("inc_rad", self.inc_rad),
            ("omega_rad", self.omega_rad),
            ("node_rad", self.node_rad),
        ] {
            if !value.is_finite() {
                return Err(OrbitError::NotFinite { name, value });
            }
        }
        Ok(())
    }

    /// The Thiele-Innes constants of this orbit (formulas in the module docs).
    pub fn thiele_innes(&self) -> ThieleInnes {
        let (sw, cw) = self.omega_rad.sin_cos();
        let (sn, cn) = self.node_rad.sin_cos();
        let ci = self.inc_rad.cos();
        let a = self.a;
        ThieleInnes {
            a: a * (cw * cn - sw * sn * ci),
            b: a * (cw * sn + sw * cn * ci),
            f: a * (-sw * cn - cw * sn * ci),
            g: a * (-sw * sn + cw * cn * ci),
        }
    }

    /// The geometric part (a, i, omega, Omega) of these elements.
    pub fn geometry(&self) -> OrbitGeometry {
        OrbitGeometry {
            a: self.a,
            inc_rad: self.inc_rad,
            omega_rad: self.omega_rad,
            node_rad: self.node_rad,
        }
    }
}

/// Thiele-Innes constants A, B, F, G (same unit as the semi-major axis).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ThieleInnes {
    /// A = a(cos w cos W - sin w sin W cos i).
    pub a: f64,
    /// B = a(cos w sin W + sin w cos W cos i).
    pub b: f64,
    /// F = a(-sin w cos W - cos w sin W cos i).
    pub f: f64,
    /// G = a(-sin w sin W + cos w cos W cos i).
    pub g: f64,
}

/// The geometric Campbell elements: semi-major axis and the three angles.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrbitGeometry {
    /// Semi-major axis (unit of the Thiele-Innes constants).
    pub a: f64,
    /// Inclination in [0, pi].
    pub inc_rad: f64,
    /// Argument of periastron of the secondary, in [0, 2 pi).
    pub omega_rad: f64,
    /// Position angle of the ascending node, in [0, pi).
    pub node_rad: f64,
}

impl ThieleInnes {
    /// Back to (a, i, omega, Omega).
    ///
    /// Astrometry alone cannot tell (omega, Omega) from (omega + pi,
    /// Omega + pi): both give the same A, B, F, G. This returns the member of
    /// the pair with Omega in [0, pi) and omega in [0, 2 pi); radial
    /// velocities decide which one is real (flip both by pi if the velocities
    /// say the other node is the receding one).
    ///
    /// Method: A + G = a(1 + cos i) cos(w + W), B - F = a(1 + cos i) sin(w + W),
    /// A - G = a(1 - cos i) cos(w - W), -B - F = a(1 - cos i) sin(w - W)
    /// (follows from the definitions; cf. Heintz 1978). With
    /// p = a(1 + cos i) and m = a(1 - cos i): a = (p + m)/2 and
    /// tan(i/2) = sqrt(m/p), which is accurate for every i. For i = 0 (or
    /// pi) only w + W (or w - W) is defined; the other is set to zero.
    pub fn to_campbell(&self) -> OrbitGeometry {
        let (a_, b_, f_, g_) = (self.a, self.b, self.f, self.g);
        let p = (a_ + g_).hypot(b_ - f_);
        let m = (a_ - g_).hypot(b_ + f_);
        let a = 0.5 * (p + m);
        let inc_rad = 2.0 * m.sqrt().atan2(p.sqrt());
        let sum = if p > 0.0 {
            (b_ - f_).atan2(a_ + g_)
        } else {
            0.0
        };
        let diff = if m > 0.0 {
            (-b_ - f_).atan2(a_ - g_)
        } else {
            0.0
        };
        let mut omega = 0.5 * (sum + diff);
        let mut node = 0.5 * (sum - diff);
        // sum and diff are each defined modulo 2 pi, so (omega, node) are
        // defined modulo (pi, pi) jointly: normalise node to [0, pi).
        node = node.rem_euclid(TAU);
        if node >= PI {
            node -= PI;
            omega += PI;
        }
        omega = omega.rem_euclid(TAU);
        if omega >= TAU {
            omega = 0.0;
        }
        OrbitGeometry {
            a,
            inc_rad,
            omega_rad: omega,
            node_rad: node,
        }
    }
}
