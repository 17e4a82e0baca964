//! [`KeplerSolver`]: the tables built once per eccentricity (uniform
//! intervals in E, and the geometric corner table near periastron at high
//! e) and the portable lane code that solves from them. The AVX2 kernel
//! ([`super::simd`]) reads the same tables and shares [`KeplerSolver::refine`].

#[cfg(target_arch = "x86_64")]
use super::has_avx2_fma;
use super::{reduce_mean_anomaly, EccentricAnomaly, Solved, GROUP, LANES};
use crate::error::OrbitError;
use std::f64::consts::PI;
use std::sync::OnceLock;

/// Number of intervals of equal width in E over [0, pi] in [`KeplerSolver`]
/// (a power of two: indices are masked with INTERVALS - 1).
pub(super) const INTERVALS: usize = 16;
/// Width of one interval in E.
const STEP: f64 = PI / INTERVALS as f64;

/// The middles (E, sin, cos, E - sin E, 1 - cos E) and the ends (sin, cos)
/// of the uniform intervals, shared by all solvers (computed once).
#[derive(Debug, PartialEq)]
struct MidNodes {
    mids: [SmallAngle; INTERVALS],
    end_cos: [f64; INTERVALS + 1],
    end_sin: [f64; INTERVALS + 1],
}

fn mid_nodes() -> &'static MidNodes {
    static NODES: OnceLock<MidNodes> = OnceLock::new();
    NODES.get_or_init(|| {
        let mut mids = [SmallAngle::default(); INTERVALS];
        let mut end_sin = [0.0; INTERVALS + 1];
        let mut end_cos = [0.0; INTERVALS + 1];
        for (k, mid) in mids.iter_mut().enumerate() {
            *mid = SmallAngle::new((k as f64 + 0.5) * STEP);
        }
        for k in 0..=INTERVALS {
            (end_sin[k], end_cos[k]) = (k as f64 * STEP).sin_cos();
        }
        // Exact values at E = pi (libm gives sin(pi_f64) = 1.2e-16).
        (end_sin[INTERVALS], end_cos[INTERVALS]) = (0.0, -1.0);
        MidNodes {
            mids,
            end_sin,
            end_cos,
        }
    })
}

/// The corner where E(M) behaves like a cube root and the uniform intervals
/// are not accurate enough: for e above `CORNER_E` the first
/// `CORNER_INTERVALS` intervals (E < pi/4) use a second, geometric table.
const CORNER_E: f64 = 0.8;
const CORNER_INTERVALS: usize = 4;
/// Most intervals of the geometric corner table.
pub(super) const CORNER_MAX: usize = 42;
/// Ratio of consecutive ends of the geometric corner table.
const CORNER_RATIO: f64 = 0.7;
/// Fewest geometric ends, so that the first interval [0, (pi/4) 0.7^6] is
/// at most 0.093 wide.
const CORNER_MIN: usize = 7;

/// E, sin E, cos E, E - sin E and 1 - cos E, the last two free of
/// cancellation for small E.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
struct SmallAngle {
    e: f64,
    sin: f64,
    cos: f64,
    e_minus_sin: f64,
    one_minus_cos: f64,
}

impl SmallAngle {
    /// For 0 <= x <= pi: Taylor series up to pi/4 (see
    /// `corner_sin_cos_deviations`), the platform libm above.
    fn new(x: f64) -> Self {
        if x <= PI / 4.0 {
            let (sin_m_x, cos_m_1) = corner_sin_cos_deviations(x);
            Self {
                e: x,
                sin: x + sin_m_x,
                cos: 1.0 + cos_m_1,
                e_minus_sin: -sin_m_x,
                one_minus_cos: -cos_m_1,
            }
        } else {
            let (sin, cos) = x.sin_cos();
            let half_sin = (0.5 * x).sin();
            Self {
                e: x,
                sin,
                cos,
                e_minus_sin: x - sin,
                one_minus_cos: 2.0 * half_sin * half_sin,
            }
        }
    }
}

/// Ends E_j = (pi/4) 0.7^j of the geometric corner table and the middles
/// of consecutive ends, shared by all solvers.
#[derive(Debug, PartialEq)]
struct CornerNodes {
    ends: [SmallAngle; CORNER_MAX],
    mids: [SmallAngle; CORNER_MAX],
}

fn corner_nodes() -> &'static CornerNodes {
    static NODES: OnceLock<CornerNodes> = OnceLock::new();
    NODES.get_or_init(|| {
        let mut ends = [SmallAngle::default(); CORNER_MAX];
        let mut mids = [SmallAngle::default(); CORNER_MAX];
        let mut x = PI / 4.0;
        for j in 0..CORNER_MAX {
            ends[j] = SmallAngle::new(x);
            mids[j] = SmallAngle::new(0.5 * (x + CORNER_RATIO * x));
            x *= CORNER_RATIO;
        }
        CornerNodes { ends, mids }
    })
}

/// Quintic Hermite interpolation of E(M) on one interval of width `dm` in M
/// and `span` in E, from dE/dM (`d1`) and d2E/dM2 (`d2`) at both ends.
/// Returns the coefficients c of E - E_start = t (c0 + t (c1 + ... + t c4)).
/// With s = t/dm, the s^3, s^4, s^5 coefficients (A, B, C) solve
/// A + B + C = Y, 3A + 4B + 5C = D, 6A + 12B + 20C = G (matching value,
/// slope and curvature at the far end).
#[inline(always)]
fn hermite_quintic(dm: f64, span: f64, d1: (f64, f64), d2: (f64, f64)) -> [f64; 5] {
    let inv = 1.0 / dm;
    let y = span - d1.0 * dm - 0.5 * d2.0 * dm * dm;
    let d = (d1.1 - d1.0 - d2.0 * dm) * dm;
    let g = (d2.1 - d2.0) * dm * dm;
    let a3 = 10.0 * y - 4.0 * d + 0.5 * g;
    let a4 = -15.0 * y + 7.0 * d - g;
    let a5 = 6.0 * y - 3.0 * d + 0.5 * g;
    let inv3 = inv * inv * inv;
    [
        d1.0,
        0.5 * d2.0,
        a3 * inv3,
        a4 * inv3 * inv,
        a5 * inv3 * inv * inv,
    ]
}

/// The geometric corner table of one solver (used when e > 0.8).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct CornerTable {
    /// Number of intervals in use.
    pub(super) len: usize,
    /// M at the ends, ascending from M = 0; +inf past `len`.
    pub(super) m_ends: [f64; CORNER_MAX + 1],
    /// Per interval: start, Hermite coefficients (offset from the interval
    /// start), middle and half width, laid out as the uniform table's rows.
    pub(super) rows: [IntervalRow; CORNER_MAX],
}

impl CornerTable {
    /// Index of the interval holding m (branch-free count of the ends).
    #[inline(always)]
    fn interval(&self, m: f64) -> usize {
        let mut i = 0;
        for &end in &self.m_ends[1..] {
            i += (m >= end) as usize;
        }
        i.min(self.len.saturating_sub(1))
    }

    fn new(e: f64) -> Self {
        let nodes = corner_nodes();
        let one_minus_e = 1.0 - e;
        // Below E_lin = 0.3 sqrt(6(1-e)/e) Kepler's equation is nearly
        // linear, (1-e) E dominates e E^3/6, and one interval [0, E_lin]
        // is smooth enough; above it the ends are geometric.
        let e_lin = 0.3 * (6.0 * one_minus_e / e).sqrt();
        let geometric = nodes
            .ends
            .iter()
            .take_while(|n| n.e >= e_lin)
            .count()
            .max(CORNER_MIN);
        let len = geometric.min(CORNER_MAX);
        // Ascending ends: 0, E_{len-1}, ..., E_0 = pi/4.
        let mut ends = [SmallAngle::default(); CORNER_MAX + 1];
        for i in 0..len {
            ends[i + 1] = nodes.ends[len - 1 - i];
        }
        let mut m_ends = [f64::INFINITY; CORNER_MAX + 1];
        let mut d1 = [0.0; CORNER_MAX + 1];
        let mut d2 = [0.0; CORNER_MAX + 1];
        for i in 0..=len {
            let a = ends[i];
            // M = (1-e) E + e (E - sin E), dE/dM = 1/((1-e) + e (1 - cos E)).
            m_ends[i] = one_minus_e * a.e + e * a.e_minus_sin;
            let slope = 1.0 / (one_minus_e + e * a.one_minus_cos);
            d1[i] = slope;
            d2[i] = -e * a.sin * slope * slope * slope;
        }
        let mut rows = [IntervalRow([0.0; row::LEN]); CORNER_MAX];
        for (i, r) in rows.iter_mut().enumerate().take(len) {
            let span = ends[i + 1].e - ends[i].e;
            let coef = hermite_quintic(
                m_ends[i + 1] - m_ends[i],
                span,
                (d1[i], d1[i + 1]),
                (d2[i], d2[i + 1]),
            );
            // The first interval [0, E_len-1] has its own middle; the others
            // are the shared geometric middles.
            let mid = if i == 0 {
                SmallAngle::new(0.5 * ends[1].e)
            } else {
                nodes.mids[len - 1 - i]
            };
            *r = IntervalRow::new(m_ends[i], &coef, &mid, 0.5 * span);
        }
        Self { len, m_ends, rows }
    }
}

/// A fast Kepler solver for one eccentricity (checked at construction), for
/// evaluating many mean anomalies of the same orbit.
///
/// Method: a piecewise-polynomial starting value followed by one high-order
/// correction, the scheme of V. Raposo-Pulido & J. Pelaez, MNRAS 467, 1702
/// (2017) and T. D. Brandt et al., AJ 162, 186 (2021); the details here are
/// our own:
/// - [0, pi] is cut into 16 intervals of equal width in E. Their ends in M,
///   M_k = E_k - e sin E_k, need no solving; on each interval E(M) is
///   replaced by the quintic Hermite polynomial matching E, dE/dM =
///   1/(1 - e cos E) and d2E/dM2 = -e sin E (dE/dM)^3 at both ends (built
///   once per eccentricity, no trigonometry: sin and cos of the fixed E_k
///   come from a shared table). Starting error below 7e-5 rad.
/// - A solve finds its interval by counting the M_k at or below M (no
///   branches), evaluates the polynomial, gets sin and cos of the start from
///   those of the interval's middle by Taylor series in the offset (|offset|
///   <= pi/32), and applies one step of Householder's fourth-order method
///   (A. S. Householder, The Numerical Treatment of a Single Nonlinear
///   Equation, 1970), whose rational form needs one division.
/// - The corner e > 0.8, E < pi/4, where E(M) turns from linear
///   (E ~ M/(1-e)) to a cube root (E ~ (6M)^(1/3)) and no polynomial in M
///   on the uniform intervals is good: a second table with ends in E
///   falling geometrically by 0.7 from pi/4 down to 0.3 sqrt(6(1-e)/e),
///   below which one last interval reaches E = 0. Same quintic Hermite
///   start and correction; E - sin E and 1 - cos E are carried separately
///   so that nothing cancels as e -> 1 and E -> 0.
///
/// Measured accuracy: |E - e sin E - M| <= 4e-15 rad over dense grids for
/// 0 <= e <= 1 - 1e-12 (see the crate tests).
///
/// The tables make the solver about 6 KB (1.6 KB used when e <= 0.8);
/// [`KeplerSolver::new`] takes ~0.2 us (measured, PERFORMANCE.md), the
/// time of ~30 batch solves. With AVX2 and FMA (checked at run time) the
/// batch path runs a vector kernel; every path fuses the same products
/// with `f64::mul_add` (exactly rounded everywhere), so results are the
/// same bits on any processor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KeplerSolver {
    e: f64,
    one_minus_e: f64,
    /// Intervals k < corner_intervals use the corner table.
    pub(super) corner_intervals: usize,
    pub(super) corner: Option<CornerTable>,
    /// M at the interval ends E_k = k pi/16, k = 0..=16.
    pub(super) m_ends: [f64; INTERVALS + 1],
    /// Per interval k, everything a solve reads, in one row (see [`IntervalRow`]).
    pub(super) rows: [IntervalRow; INTERVALS],
}

/// Positions in an [`IntervalRow`]: the start M_k, the Hermite coefficients
/// c0..c4 of E - E_mid = -h + t (c0 + t (c1 + ... + t c4)) with t = M - M_k,
/// then the middle's E, sin E, cos E, E - sin E, 1 - cos E, and the half
/// width h. The order is the vector kernel's: it loads a row as three
/// groups of four.
pub(super) mod row {
    pub const START: usize = 0;
    pub const COEF: usize = 1;
    pub const MID_E: usize = 6;
    pub const MID_SIN: usize = 7;
    pub const MID_COS: usize = 8;
    pub const MID_E_MINUS_SIN: usize = 9;
    pub const MID_ONE_MINUS_COS: usize = 10;
    pub const HALF: usize = 11;
    pub const LEN: usize = 12;
}

/// One interval's data, aligned so that the vector kernel's loads never
/// straddle a cache line.
#[derive(Debug, Clone, Copy, PartialEq)]
#[repr(C, align(32))]
pub(super) struct IntervalRow(pub(super) [f64; row::LEN]);

impl IntervalRow {
    #[inline(always)]
    fn new(start: f64, coef: &[f64; 5], mid: &SmallAngle, half: f64) -> Self {
        let mut r = [0.0; row::LEN];
        r[row::START] = start;
        r[row::COEF..row::COEF + 5].copy_from_slice(coef);
        r[row::MID_E] = mid.e;
        r[row::MID_SIN] = mid.sin;
        r[row::MID_COS] = mid.cos;
        r[row::MID_E_MINUS_SIN] = mid.e_minus_sin;
        r[row::MID_ONE_MINUS_COS] = mid.one_minus_cos;
        r[row::HALF] = half;
        Self(r)
    }
}

impl KeplerSolver {
    /// A solver for eccentricity `e`, which must be finite and in [0, 1).
    // Inlined so that the solver (about 6 KB) is built where it is kept
    // instead of being copied there.
    #[inline]
    pub fn new(e: f64) -> Result<Self, OrbitError> {
        if !(0.0..1.0).contains(&e) {
            return Err(OrbitError::Eccentricity(e));
        }
        Ok(Self::for_valid_eccentricity(e))
    }

    /// [`Self::new`] for an eccentricity already checked to be in [0, 1).
    #[inline]
    pub(crate) fn for_valid_eccentricity(e: f64) -> Self {
        let mid = mid_nodes();
        let mut m_ends = [0.0; INTERVALS + 1];
        let mut d1 = [0.0; INTERVALS + 1];
        let mut d2 = [0.0; INTERVALS + 1];
        for k in 0..=INTERVALS {
            let (s, c) = (mid.end_sin[k], mid.end_cos[k]);
            m_ends[k] = k as f64 * STEP - e * s;
            let slope = 1.0 / (1.0 - e * c);
            d1[k] = slope;
            d2[k] = -e * s * slope * slope * slope;
        }
        m_ends[INTERVALS] = PI;
        let rows = std::array::from_fn(|k| {
            let coef = hermite_quintic(
                m_ends[k + 1] - m_ends[k],
                STEP,
                (d1[k], d1[k + 1]),
                (d2[k], d2[k + 1]),
            );
            IntervalRow::new(m_ends[k], &coef, &mid.mids[k], 0.5 * STEP)
        });
        let mut solver = Self {
            e,
            one_minus_e: 1.0 - e,
            corner_intervals: 0,
            corner: None,
            m_ends,
            rows,
        };
        // Only solvers that need it carry (and pay to build) the corner
        // table; it is written in place (moving it would copy 4 KB).
        if e > CORNER_E {
            solver.corner_intervals = CORNER_INTERVALS;
            solver.corner = Some(CornerTable::new(e));
        }
        solver
    }

    /// The eccentricity.
    pub fn eccentricity(&self) -> f64 {
        self.e
    }

    /// Solves Kepler's equation for any real mean anomaly (see [`super::solve_kepler`]).
    #[inline]
    pub fn solve(&self, mean_anomaly: f64) -> EccentricAnomaly {
        self.solve_reduced(reduce_mean_anomaly(mean_anomaly))
    }

    /// Solves for a mean anomaly already in [-pi, pi] (no reduction; values
    /// slightly outside, by rounding, are fine).
    #[inline]
    pub fn solve_reduced(&self, mean_anomaly: f64) -> EccentricAnomaly {
        #[cfg(target_arch = "x86_64")]
        if has_avx2_fma() {
            // SAFETY: the processor has AVX2 and FMA, checked just above.
            return unsafe { self.solve_one_fma(mean_anomaly) };
        }
        self.solve_group(&[mean_anomaly]).get(0)
    }

    /// Solves many mean anomalies (any real values, as in [`Self::solve`]):
    /// `out[i]` for `mean_anomalies[i]`. Gives the same values as calling
    /// [`Self::solve`] on each, but works on groups of mean anomalies at a
    /// time in vector registers. If the slices differ in length only the
    /// common prefix is filled. No allocation.
    pub fn solve_many(&self, mean_anomalies: &[f64], out: &mut [EccentricAnomaly]) {
        #[cfg(target_arch = "x86_64")]
        if has_avx2_fma() {
            // SAFETY: the processor has AVX2 and FMA, checked just above.
            unsafe { self.solve_many_avx2(mean_anomalies, out) };
            return;
        }
        self.solve_many_portable(mean_anomalies, out);
    }

    #[inline(always)]
    pub(super) fn solve_many_portable(&self, mean_anomalies: &[f64], out: &mut [EccentricAnomaly]) {
        let n = mean_anomalies.len().min(out.len());
        let (ms, out) = (&mean_anomalies[..n], &mut out[..n]);
        let mut ms_chunks = ms.chunks_exact(LANES);
        let mut out_chunks = out.chunks_exact_mut(LANES);
        for (mc, oc) in (&mut ms_chunks).zip(&mut out_chunks) {
            let mut reduced = [0.0; LANES];
            for (r, &m) in reduced.iter_mut().zip(mc) {
                *r = reduce_mean_anomaly(m);
            }
            oc.copy_from_slice(&self.solve_group(&reduced).to_array());
        }
        for (o, &m) in out_chunks
            .into_remainder()
            .iter_mut()
            .zip(ms_chunks.remainder())
        {
            *o = self.solve_group(&[reduce_mean_anomaly(m)]).get(0);
        }
    }

    /// [`Self::solve_reduced`] for [`LANES`] mean anomalies at once, on the
    /// portable path.
    #[inline(always)]
    pub(crate) fn solve_lanes(&self, mean_anomaly: &[f64; LANES]) -> Solved<LANES> {
        self.solve_group(mean_anomaly)
    }

    /// [`Self::solve_lanes`] for the first [`GROUP`] lanes only (a short
    /// last block), on the portable path.
    #[inline(always)]
    pub(crate) fn solve_group_of_four(&self, mean_anomaly: &[f64; GROUP]) -> Solved<GROUP> {
        self.solve_group(mean_anomaly)
    }

    /// The solver proper, for L mean anomalies in [-pi, pi] at once, written
    /// lane by lane so that it compiles to vector instructions; the scalar
    /// and batch interfaces both run this code (or the AVX2 kernel, which
    /// shares [`Self::refine`]), so they agree bit for bit.
    #[inline(always)]
    pub(super) fn solve_group<const L: usize>(&self, mean_anomaly: &[f64; L]) -> Solved<L> {
        // E(-M) = -E(M): solve for |M| in [0, pi], restore the sign at the end.
        let mut lanes = Lanes::<L>::default();
        for (i, &m) in mean_anomaly.iter().enumerate() {
            lanes.sign[i] = m.to_bits() & SIGN_BIT;
            lanes.m[i] = m.abs();
        }
        let m = lanes.m;
        // Interval per lane: count the interior ends at or below m, one end
        // at a time across the lanes (no branches).
        let mut kk = [0usize; L];
        for &end in &self.m_ends[1..INTERVALS] {
            for i in 0..L {
                kk[i] += (m[i] >= end) as usize;
            }
        }
        // Gather each lane's interval row (from the corner table near
        // periastron at high e). The mask keeps indices provably in range.
        for i in 0..L {
            let k = kk[i] & (INTERVALS - 1);
            let r = match &self.corner {
                Some(corner) if k < self.corner_intervals => {
                    lanes.near_periastron[i] = true;
                    &corner.rows[corner.interval(m[i])].0
                }
                _ => &self.rows[k].0,
            };
            lanes.start[i] = r[row::START];
            for (c, coef) in lanes.coef.iter_mut().enumerate() {
                coef[i] = r[row::COEF + c];
            }
            lanes.half[i] = r[row::HALF];
            lanes.mid_e[i] = r[row::MID_E];
            lanes.mid_sin[i] = r[row::MID_SIN];
            lanes.mid_cos[i] = r[row::MID_COS];
            lanes.mid_e_minus_sin[i] = r[row::MID_E_MINUS_SIN];
            lanes.mid_one_minus_cos[i] = r[row::MID_ONE_MINUS_COS];
        }
        self.refine(&lanes)
    }

    /// From each lane's interval data to the solution: the polynomial
    /// start, its sine and cosine from the middle's by the addition
    /// theorem, and one Householder correction. Shared by every path;
    /// products are fused (`mul_add`, exactly rounded on any processor).
    #[inline(always)]
    pub(super) fn refine<const L: usize>(&self, lanes: &Lanes<L>) -> Solved<L> {
        let e = self.e;
        let one_minus_e = self.one_minus_e;
        let (mut ea, mut se, mut ce) = ([0.0; L], [0.0; L], [0.0; L]);
        for i in 0..L {
            let c = |k: usize| lanes.coef[k][i];
            let (sm, cm) = (lanes.mid_sin[i], lanes.mid_cos[i]);
            let omc = lanes.mid_one_minus_cos[i];
            // Start: offset d0 from the middle, by Estrin's scheme.
            let ti = lanes.m[i] - lanes.start[i];
            let t2 = ti * ti;
            let p = t2.mul_add(
                t2.mul_add(c(4), ti.mul_add(c(3), c(2))),
                ti.mul_add(c(1), c(0)),
            );
            let d0 = ti.mul_add(p, -lanes.half[i]);
            let e0 = lanes.mid_e[i] + d0;
            // sin and cos of the start by the addition theorem.
            let (sin_m_x, cos_m_1) = small_sin_cos_deviations(d0);
            let sin_d = d0 + sin_m_x;
            let s0 = sm + sm.mul_add(cos_m_1, cm * sin_d);
            // Near periastron on the corner table (e > 0.8, E < pi/4):
            // E0 - sin E0 = (Em - sin Em) + d0 (1 - cos Em) - cos Em (sin d - d)
            //   - sin Em (cos d - 1), and 1 - cos E0 = (1 - cos Em)
            //   - (cos Em (cos d - 1) - sin Em sin d) have no cancellation as
            // E -> 0, so f0 = E0 - e sin E0 - M and f1 = 1 - e cos E0 stay
            // accurate when e -> 1. Elsewhere f1 >= 0.2 (e <= 0.8, or
            // E >= pi/4), and the plain forms' rounding (~1e-16) costs
            // nothing. Both are computed and one is selected, so the lanes
            // stay branch-free (where the flags are constants, as for groups
            // away from the corner table, the compiler drops the unused form).
            let e_minus_sin =
                lanes.mid_e_minus_sin[i] + (-sm).mul_add(cos_m_1, d0.mul_add(omc, -(cm * sin_m_x)));
            let one_minus_cos = omc - cm.mul_add(cos_m_1, -(sm * sin_d));
            let near = (
                1.0 - one_minus_cos,
                one_minus_e.mul_add(e0, e * e_minus_sin) - lanes.m[i],
                e.mul_add(one_minus_cos, one_minus_e),
            );
            let c0 = cm + cm.mul_add(cos_m_1, -(sm * sin_d));
            let plain = (c0, (-e).mul_add(s0, e0) - lanes.m[i], (-e).mul_add(c0, 1.0));
            let (c0, f0, f1) = if lanes.near_periastron[i] {
                near
            } else {
                plain
            };
            let sol = correct(e0, s0, c0, f0, f1, e);
            ea[i] = f64::from_bits(sol.e_anom.to_bits() ^ lanes.sign[i]);
            se[i] = f64::from_bits(sol.sin_e.to_bits() ^ lanes.sign[i]);
            ce[i] = sol.cos_e;
        }
        Solved {
            e_anom: ea,
            sin_e: se,
            cos_e: ce,
        }
    }
}

/// The sign bit of an f64.
const SIGN_BIT: u64 = 1 << 63;

/// Per-lane inputs of [`KeplerSolver::refine`]: |M|, the sign bit of M,
/// and the data of the lane's interval.
pub(super) struct Lanes<const L: usize> {
    /// Lanes on the near-periastron corner table (e > 0.8, E < pi/4).
    pub(super) near_periastron: [bool; L],
    pub(super) m: [f64; L],
    pub(super) sign: [u64; L],
    pub(super) start: [f64; L],
    pub(super) coef: [[f64; L]; 5],
    pub(super) half: [f64; L],
    pub(super) mid_e: [f64; L],
    pub(super) mid_sin: [f64; L],
    pub(super) mid_cos: [f64; L],
    pub(super) mid_e_minus_sin: [f64; L],
    pub(super) mid_one_minus_cos: [f64; L],
}

impl<const L: usize> Default for Lanes<L> {
    fn default() -> Self {
        Self {
            near_periastron: [false; L],
            m: [0.0; L],
            sign: [0; L],
            start: [0.0; L],
            coef: [[0.0; L]; 5],
            half: [0.0; L],
            mid_e: [0.0; L],
            mid_sin: [0.0; L],
            mid_cos: [0.0; L],
            mid_e_minus_sin: [0.0; L],
            mid_one_minus_cos: [0.0; L],
        }
    }
}

/// One step of Householder's fourth-order method from e0, with
/// f0 = e0 - e sin e0 - M, f1 = 1 - e cos e0, f2 = e sin e0, f3 = e cos e0:
/// d = -f0 (f1^2 - f0 f2/2) / (f1^3 - f0 f1 f2 + f0^2 f3/6)
/// (Householder 1970; error ~ (f2 d / f1)^3 d). Then sin and cos of e0 + d
/// by the addition theorem (|d| < 2e-4: sin d = d - d^3/6, cos d - 1 = -d^2/2
/// to better than 1e-17).
#[inline(always)]
fn correct(e0: f64, s0: f64, c0: f64, f0: f64, f1: f64, e: f64) -> EccentricAnomaly {
    let f2 = e * s0;
    let f3 = e * c0;
    let num = f0 * f1.mul_add(f1, -0.5 * f0 * f2);
    let den = f1.mul_add(f1.mul_add(f1, -(f0 * f2)), f0 * f0 * f3 * (1.0 / 6.0));
    let d = -num / den;
    let d2 = d * d;
    let sin_d = (d * d2).mul_add(-1.0 / 6.0, d);
    let cos_d_m1 = -0.5 * d2;
    EccentricAnomaly {
        e_anom: e0 + d,
        sin_e: s0 + s0.mul_add(cos_d_m1, c0 * sin_d),
        cos_e: c0 + c0.mul_add(cos_d_m1, -(s0 * sin_d)),
    }
}

/// (sin x - x, cos x - 1) by Taylor series, for |x| <= 0.12 (truncation
/// below 2e-18 there), in Estrin's scheme.
#[inline(always)]
fn small_sin_cos_deviations(x: f64) -> (f64, f64) {
    let z = x * x;
    let z2 = z * z;
    let sin_m_x = -x
        * z
        * z2.mul_add(
            z.mul_add(-1.0 / 362_880.0, 1.0 / 5040.0),
            z.mul_add(-1.0 / 120.0, 1.0 / 6.0),
        );
    let cos_m_1 = -z
        * z2.mul_add(
            z2.mul_add(1.0 / 3_628_800.0, z.mul_add(-1.0 / 40_320.0, 1.0 / 720.0)),
            z.mul_add(-1.0 / 24.0, 0.5),
        );
    (sin_m_x, cos_m_1)
}

/// (sin x - x, cos x - 1) by Taylor series, for |x| <= pi/4 (truncation
/// below 3e-18 there).
#[inline]
fn corner_sin_cos_deviations(x: f64) -> (f64, f64) {
    // 1/n! for n = 0..=17.
    const F: [f64; 18] = {
        let mut f = [1.0; 18];
        let mut n = 1;
        while n < 18 {
            f[n] = f[n - 1] / n as f64;
            n += 1;
        }
        f
    };
    let z = x * x;
    let sin_m_x = -x
        * z
        * (F[3]
            - z * (F[5]
                - z * (F[7] - z * (F[9] - z * (F[11] - z * (F[13] - z * (F[15] - z * F[17])))))));
    let cos_m_1 = -z
        * (F[2]
            - z * (F[4]
                - z * (F[6] - z * (F[8] - z * (F[10] - z * (F[12] - z * (F[14] - z * F[16])))))));
    (sin_m_x, cos_m_1)
}
