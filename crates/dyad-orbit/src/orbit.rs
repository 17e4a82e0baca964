//! Positions on the sky and the line-of-sight velocity shape of an orbit.
//!
//! Conventions (docs/DESIGN.md), all in one place:
//! - Offsets of the secondary from the primary: `ddec` towards North,
//!   `dra` = dRA cos(Dec) towards East, in the unit of the semi-major axis.
//! - Position angle theta from North through East: ddec = rho cos theta,
//!   dra = rho sin theta; i < 90 deg makes theta increase with time.
//! - Line of sight: z = r sin(nu + omega) sin i is the distance of the
//!   secondary behind the primary, positive away from the observer, so that
//!   the ascending node (nu + omega = 0, where z crosses zero upwards) is the
//!   node where the secondary recedes, and radial velocity (positive
//!   receding) is dz/dt. Together with (North, East) this is a left-handed
//!   frame, as usual for visual binaries.
//! - dz/dt = K (cos(nu + omega) + e cos omega) with
//!   K = 2 pi a sin i / (P sqrt(1 - e^2)) (e.g. Hilditch 2001, eq. 2.45);
//!   [`OrbitState::rv_shape`] is the bracket, so the relative velocity is
//!   `K * rv_shape` with K from [`crate::laws::relative_semi_amplitude_kms`].

use crate::elements::{CampbellElements, ThieleInnes};
use crate::error::OrbitError;
use crate::kepler::{EccentricAnomaly, KeplerSolver, Solved, GROUP, LANES};
use std::f64::consts::TAU;

/// Offset of the secondary from the primary on the sky.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SkyOffset {
    /// dRA* = dRA cos Dec, positive towards East.
    pub dra: f64,
    /// dDec, positive towards North.
    pub ddec: f64,
}

impl SkyOffset {
    /// The offset with separation `rho` at position angle `theta_rad` (N through E).
    pub fn from_polar(rho: f64, theta_rad: f64) -> Self {
        let (s, c) = theta_rad.sin_cos();
        Self {
            dra: rho * s,
            ddec: rho * c,
        }
    }

    /// Angular separation rho.
    pub fn separation(&self) -> f64 {
        self.dra.hypot(self.ddec)
    }

    /// Position angle in [0, 2 pi), measured from North through East.
    pub fn position_angle_rad(&self) -> f64 {
        let theta = self.dra.atan2(self.ddec);
        if theta < 0.0 {
            let t = theta + TAU;
            // theta tiny negative would round to exactly 2 pi.
            if t >= TAU {
                0.0
            } else {
                t
            }
        } else {
            theta
        }
    }
}

/// Position and line-of-sight velocity shape at one epoch (one Kepler solve).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct OrbitState {
    /// dRA* (East), unit of the semi-major axis.
    pub dra: f64,
    /// dDec (North), unit of the semi-major axis.
    pub ddec: f64,
    /// cos(nu + omega) + e cos omega: relative velocity over K.
    pub rv_shape: f64,
}

impl OrbitState {
    /// The sky offset part of this state.
    pub fn sky_offset(&self) -> SkyOffset {
        SkyOffset {
            dra: self.dra,
            ddec: self.ddec,
        }
    }
}

/// An orbit ready for fast evaluation: everything that depends only on the
/// elements is computed once in [`Orbit::new`] (including the Kepler
/// solver's tables: about 5 KB, ~0.3 us to build; pass it by reference).
#[derive(Debug, Clone, Copy)]
pub struct Orbit {
    elements: CampbellElements,
    thiele_innes: ThieleInnes,
    solver: KeplerSolver,
    inv_period: f64,
    sqrt_1me2: f64,
    cos_omega: f64,
    sin_omega: f64,
    e_cos_omega: f64,
}

/// 1.5 * 2^52: adding and subtracting it rounds to the nearest integer.
const ROUND_MAGIC: f64 = 6_755_399_441_055_744.0;

impl Orbit {
    /// Checks the elements ([`CampbellElements::validate`]) and precomputes.
    #[inline]
    pub fn new(el: &CampbellElements) -> Result<Self, OrbitError> {
        el.validate()?;
        let (sin_omega, cos_omega) = el.omega_rad.sin_cos();
        Ok(Self {
            elements: *el,
            thiele_innes: el.thiele_innes(),
            // `validate` checked 0 <= e < 1.
            solver: KeplerSolver::for_valid_eccentricity(el.e),
            inv_period: 1.0 / el.period_days,
            sqrt_1me2: ((1.0 - el.e) * (1.0 + el.e)).sqrt(),
            cos_omega,
            sin_omega,
            e_cos_omega: el.e * cos_omega,
        })
    }

    /// The elements this orbit was built from.
    pub fn elements(&self) -> &CampbellElements {
        &self.elements
    }

    /// The Thiele-Innes constants of this orbit.
    pub fn thiele_innes(&self) -> &ThieleInnes {
        &self.thiele_innes
    }

    /// Mean anomaly 2 pi (t - T_peri) / P at `t_jd`, reduced to [-pi, pi].
    ///
    /// The reduction is done on the phase (t - T)/P, where taking away the
    /// nearest integer is exact, so nothing is lost for any number of cycles.
    #[inline(always)]
    pub fn mean_anomaly(&self, t_jd: f64) -> f64 {
        let phase = (t_jd - self.elements.t_peri_jd) * self.inv_period;
        let cycles = (phase + ROUND_MAGIC) - ROUND_MAGIC;
        TAU * (phase - cycles)
    }

    /// The eccentric anomaly at `t_jd`.
    #[inline]
    pub fn eccentric_anomaly(&self, t_jd: f64) -> EccentricAnomaly {
        self.solver.solve_reduced(self.mean_anomaly(t_jd))
    }

    /// Offset of the secondary from the primary at `t_jd`.
    #[inline]
    pub fn sky_offset(&self, t_jd: f64) -> SkyOffset {
        let s = self.state(t_jd);
        SkyOffset {
            dra: s.dra,
            ddec: s.ddec,
        }
    }

    /// cos(nu + omega) + e cos omega at `t_jd` (relative velocity over K).
    #[inline]
    pub fn rv_shape(&self, t_jd: f64) -> f64 {
        self.state(t_jd).rv_shape
    }

    /// Position and velocity shape at `t_jd`.
    #[inline]
    pub fn state(&self, t_jd: f64) -> OrbitState {
        self.state_from_anomaly(&self.eccentric_anomaly(t_jd))
    }

    /// Position and velocity shape for a given eccentric anomaly.
    #[inline(always)]
    pub fn state_from_anomaly(&self, ea: &EccentricAnomaly) -> OrbitState {
        self.state_from_sin_cos(ea.sin_e, ea.cos_e)
    }

    /// The same from sin E and cos E (products fused with `mul_add`,
    /// exactly rounded on any processor, so every path agrees bit for bit).
    #[inline(always)]
    fn state_from_sin_cos(&self, sin_e: f64, cos_e: f64) -> OrbitState {
        let offset = self.sky_offset_from_sin_cos(sin_e, cos_e);
        OrbitState {
            dra: offset.dra,
            ddec: offset.ddec,
            rv_shape: self.rv_shape_from_sin_cos(sin_e, cos_e),
        }
    }

    /// Offset of the secondary for a given sin E and cos E, as
    /// [`Orbit::sky_offset`] computes it (for callers of
    /// [`Orbit::for_each_block`]).
    #[inline(always)]
    pub fn sky_offset_from_sin_cos(&self, sin_e: f64, cos_e: f64) -> SkyOffset {
        // Elliptic rectangular coordinates in the orbital plane (units of a).
        let x = cos_e - self.elements.e;
        let y = self.sqrt_1me2 * sin_e;
        let ti = &self.thiele_innes;
        SkyOffset {
            dra: ti.b.mul_add(x, ti.g * y),
            ddec: ti.a.mul_add(x, ti.f * y),
        }
    }

    /// cos(nu + omega) + e cos omega for a given sin E and cos E, as
    /// [`Orbit::rv_shape`] computes it.
    #[inline(always)]
    pub fn rv_shape_from_sin_cos(&self, sin_e: f64, cos_e: f64) -> f64 {
        let e = self.elements.e;
        let x = cos_e - e;
        let y = self.sqrt_1me2 * sin_e;
        // r/a = 1 - e cos E; cos nu = x / (r/a), sin nu = y / (r/a).
        let r_over_a = (-e).mul_add(cos_e, 1.0);
        x.mul_add(self.cos_omega, -(y * self.sin_omega)) / r_over_a + self.e_cos_omega
    }

    /// States at many epochs without allocation: fills `out[k]` for
    /// `times_jd[k]` with exactly the values of [`Orbit::state`]. If the
    /// slices differ in length only the common prefix is filled.
    pub fn states_into(&self, times_jd: &[f64], out: &mut [OrbitState]) {
        struct Fill<'a> {
            orbit: &'a Orbit,
            out: &'a mut [OrbitState],
        }
        impl BlockVisitor for Fill<'_> {
            #[inline(always)]
            fn visit(&mut self, first: usize, sin_e: &[f64; LANES], cos_e: &[f64; LANES]) {
                let end = (first + LANES).min(self.out.len());
                for (i, o) in self.out[first..end].iter_mut().enumerate() {
                    *o = self.orbit.state_from_sin_cos(sin_e[i], cos_e[i]);
                }
            }
        }
        let n = times_jd.len().min(out.len());
        self.for_each_block(
            &times_jd[..n],
            &mut Fill {
                orbit: self,
                out: &mut out[..n],
            },
        );
    }

    /// Solves Kepler's equation at every epoch of `times_jd`, [`LANES`]
    /// epochs at a time, and calls `visitor.visit(first, sin_e, cos_e)`
    /// once per block, `first` being the index of the block's first epoch.
    /// In the last block, lanes past the end of `times_jd` hold E = 0
    /// (sin E = 0, cos E = 1); the visitor ignores or masks them.
    ///
    /// The visitor's code is compiled into the solving loop (with AVX2 and
    /// FMA where the processor has them), so arithmetic it does lane by
    /// lane over the arrays vectorises. The solutions are those of
    /// [`Orbit::eccentric_anomaly`], bit for bit. No allocation.
    #[inline]
    pub fn for_each_block<V: BlockVisitor>(&self, times_jd: &[f64], visitor: &mut V) {
        #[cfg(target_arch = "x86_64")]
        if crate::kepler::has_avx2_fma() {
            // SAFETY: the processor has AVX2 and FMA, checked just above.
            unsafe { self.for_each_block_avx2(times_jd, visitor) };
            return;
        }
        self.for_each_block_with::<V, Portable>(times_jd, visitor);
    }

    /// [`Orbit::for_each_block`] with the solver's AVX2 kernel; the same
    /// operations in the same order, so bit for bit the same results as the
    /// portable path.
    ///
    /// # Safety
    /// The processor must have AVX2 and FMA ([`crate::kepler::has_avx2_fma`]):
    /// the body, with the AVX2 kernel inlined into it, is compiled for them.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2,fma")]
    unsafe fn for_each_block_avx2<V: BlockVisitor>(&self, times_jd: &[f64], visitor: &mut V) {
        self.for_each_block_with::<V, Avx2>(times_jd, visitor);
    }

    #[inline(always)]
    fn for_each_block_with<V: BlockVisitor, S: LaneSolver>(
        &self,
        times_jd: &[f64],
        visitor: &mut V,
    ) {
        let mut chunks = times_jd.chunks_exact(LANES);
        let mut first = 0;
        for tc in &mut chunks {
            let ea = S::solve_lanes(&self.solver, &self.mean_anomalies(tc));
            visitor.visit(first, &ea.sin_e, &ea.cos_e);
            first += LANES;
        }
        // The last partial block: padded with E = 0; only one group of
        // four is solved when that holds every remaining epoch.
        let rest = chunks.remainder();
        if rest.is_empty() {
            return;
        }
        let n = rest.len();
        // Lanes at and past n are set to E = 0 by a select over the whole
        // block (a copy of n lanes would be a call to memcpy).
        let keep = |solved: &[f64], pad: f64| -> [f64; LANES] {
            std::array::from_fn(|i| if i < n { solved[i] } else { pad })
        };
        let (sin_e, cos_e) = if n <= GROUP {
            let ea = S::solve_four(&self.solver, &self.mean_anomalies(rest));
            (keep(&ea.sin_e, 0.0), keep(&ea.cos_e, 1.0))
        } else {
            let ea = S::solve_lanes(&self.solver, &self.mean_anomalies(rest));
            (keep(&ea.sin_e, 0.0), keep(&ea.cos_e, 1.0))
        };
        visitor.visit(first, &sin_e, &cos_e);
    }

    /// Mean anomalies of up to L epochs, padded with M = 0.
    #[inline(always)]
    fn mean_anomalies<const L: usize>(&self, times_jd: &[f64]) -> [f64; L] {
        let mut m = [0.0; L];
        for (mi, &t) in m.iter_mut().zip(times_jd) {
            *mi = self.mean_anomaly(t);
        }
        m
    }
}

/// What [`Orbit::for_each_block`] hands each block of solutions to.
/// Implement `visit` with `#[inline(always)]`: it is then compiled into the
/// solving loop, with the vector instructions the loop is compiled for (a
/// closure would not be inlined reliably there).
pub trait BlockVisitor {
    /// Called once per block: `sin_e[i]`, `cos_e[i]` belong to epoch `first + i`.
    fn visit(&mut self, first: usize, sin_e: &[f64; LANES], cos_e: &[f64; LANES]);
}

/// The solver's two lane paths, chosen at compile time inside
/// [`Orbit::for_each_block_with`].
trait LaneSolver {
    fn solve_lanes(solver: &KeplerSolver, m: &[f64; LANES]) -> Solved<LANES>;
    fn solve_four(solver: &KeplerSolver, m: &[f64; GROUP]) -> Solved<GROUP>;
}

/// The portable lane code.
struct Portable;

impl LaneSolver for Portable {
    #[inline(always)]
    fn solve_lanes(solver: &KeplerSolver, m: &[f64; LANES]) -> Solved<LANES> {
        solver.solve_lanes(m)
    }
    #[inline(always)]
    fn solve_four(solver: &KeplerSolver, m: &[f64; GROUP]) -> Solved<GROUP> {
        solver.solve_group_of_four(m)
    }
}

/// The AVX2 kernel; only used inside functions compiled for AVX2 and FMA
/// on processors that have them.
#[cfg(target_arch = "x86_64")]
struct Avx2;

#[cfg(target_arch = "x86_64")]
impl LaneSolver for Avx2 {
    #[inline(always)]
    fn solve_lanes(solver: &KeplerSolver, m: &[f64; LANES]) -> Solved<LANES> {
        // SAFETY: `Avx2` is only used by `Orbit::for_each_block_avx2`,
        // which is compiled for AVX2 and FMA and only called where they
        // are present (checked by `Orbit::for_each_block`).
        unsafe { solver.solve_lanes_avx2(m) }
    }
    #[inline(always)]
    fn solve_four(solver: &KeplerSolver, m: &[f64; GROUP]) -> Solved<GROUP> {
        // SAFETY: as above.
        unsafe { solver.solve_group_of_four_avx2(m) }
    }
}
