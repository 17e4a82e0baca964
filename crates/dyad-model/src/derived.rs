//! Derived quantities of one parameter vector: those of the orbital block
//! (masses, semi-major axis, semi-amplitudes, ...), then each data term's
//! own ([`crate::terms::DataTerm::derived`]).
//!
//! Which orbital quantities exist depends on what the terms constrain
//! ([`crate::terms::OrbitCoverage`]); the list is fixed per model, so a
//! table of samples has the same columns throughout.
//! Relations: Kepler's third law and the spectroscopic-binary relations of
//! `dyad_orbit::laws` (Hilditch, An Introduction to Close Binary Stars,
//! 2001, ch. 2); M1 = M / (1 + q), M2 = q M / (1 + q); the primary's
//! spectroscopic argument of periastron is omega + 180 deg (docs/DESIGN.md).

use dyad_orbit::constants::JULIAN_YEAR_DAYS;
use dyad_orbit::{laws, Orbit, TimeScale};

use crate::data::Star;
use crate::likelihood::Model;
use crate::params::OrbitalParameters;

/// One derived quantity of the orbital block.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Quantity {
    PeriastronJd,
    PeriastronJyear,
    PeriodDays,
    PeriodYears,
    Eccentricity,
    OmegaSecondary,
    OmegaPrimary,
    Inclination,
    Node,
    AxisMas,
    AxisAu,
    TotalMass,
    Parallax,
    MassRatio,
    MassPrimary,
    MassSecondary,
    K1,
    K2,
    M1Sin3i,
    M2Sin3i,
    MassFunction,
    OrbitalParallax,
    ASiniAu,
}

impl Model {
    fn quantities(&self) -> Vec<Quantity> {
        use Quantity::*;
        let coverage = self.coverage();
        let layout = self.layout();
        let primary = layout.has_velocities_of(Star::Primary);
        let secondary = layout.has_velocities_of(Star::Secondary);
        let mut q = vec![
            PeriastronJd,
            PeriastronJyear,
            PeriodDays,
            PeriodYears,
            Eccentricity,
            OmegaSecondary,
            OmegaPrimary,
        ];
        if coverage.sky_projection {
            q.extend([Inclination, Node, AxisMas, AxisAu, TotalMass, Parallax]);
            if coverage.line_of_sight() {
                q.extend([
                    MassRatio,
                    MassPrimary,
                    MassSecondary,
                    K1,
                    K2,
                    M1Sin3i,
                    M2Sin3i,
                    MassFunction,
                ]);
                if primary && secondary {
                    q.push(OrbitalParallax);
                }
            }
        } else {
            if primary {
                q.push(K1);
            }
            if secondary {
                q.push(K2);
            }
            let inclined = layout.has_inclination();
            if inclined {
                q.push(Inclination);
            }
            if primary && secondary {
                q.extend([MassRatio, M1Sin3i, M2Sin3i]);
                if inclined {
                    q.extend([MassPrimary, MassSecondary, TotalMass, AxisAu]);
                }
            }
            if primary {
                q.push(MassFunction);
            }
            q.push(ASiniAu);
        }
        q
    }

    /// Names and units of the derived quantities, in the order of
    /// [`Model::derived`].
    pub fn derived_names_units(&self) -> Vec<(String, String)> {
        let mut out: Vec<(String, String)> = self
            .quantities()
            .into_iter()
            .map(|q| {
                let (n, u): (String, &str) = match q {
                    Quantity::PeriastronJd => ("periastron_time_jd".into(), "d"),
                    Quantity::PeriastronJyear => ("periastron_time_jyear".into(), "yr"),
                    Quantity::PeriodDays => ("period_days".into(), "d"),
                    Quantity::PeriodYears => ("period_years".into(), "yr"),
                    Quantity::Eccentricity => ("eccentricity".into(), "1"),
                    Quantity::OmegaSecondary => ("omega_secondary_deg".into(), "deg"),
                    Quantity::OmegaPrimary => ("omega_primary_deg".into(), "deg"),
                    Quantity::Inclination => ("inclination_deg".into(), "deg"),
                    Quantity::Node => ("node_deg".into(), "deg"),
                    Quantity::AxisMas => ("semi_major_axis_mas".into(), "mas"),
                    Quantity::AxisAu => ("semi_major_axis_au".into(), "au"),
                    Quantity::TotalMass => ("total_mass_msun".into(), "M_sun"),
                    Quantity::Parallax => ("parallax_mas".into(), "mas"),
                    Quantity::MassRatio => ("mass_ratio".into(), "1"),
                    Quantity::MassPrimary => ("mass_primary_msun".into(), "M_sun"),
                    Quantity::MassSecondary => ("mass_secondary_msun".into(), "M_sun"),
                    Quantity::K1 => ("k1_kms".into(), "km/s"),
                    Quantity::K2 => ("k2_kms".into(), "km/s"),
                    Quantity::M1Sin3i => ("m1_sin3i_msun".into(), "M_sun"),
                    Quantity::M2Sin3i => ("m2_sin3i_msun".into(), "M_sun"),
                    Quantity::MassFunction => ("mass_function_msun".into(), "M_sun"),
                    Quantity::OrbitalParallax => ("orbital_parallax_mas".into(), "mas"),
                    Quantity::ASiniAu => (
                        if self.layout().has_velocities_of(Star::Secondary)
                            && self.layout().has_velocities_of(Star::Primary)
                        {
                            "a_sini_au".into()
                        } else if self.layout().has_velocities_of(Star::Primary) {
                            "a1_sini_au".into()
                        } else {
                            "a2_sini_au".into()
                        },
                        "au",
                    ),
                };
                (n, u.to_owned())
            })
            .collect();
        for t in self.layout().terms() {
            out.extend(t.derived_names_units());
        }
        out
    }

    /// Derived quantities of `x`, in the order of
    /// [`Model::derived_names_units`]; all `NaN` if `x` is outside the domain.
    pub fn derived(&self, x: &[f64]) -> Vec<f64> {
        let quantities = self.quantities();
        let n_terms: usize = self.derived_per_term().iter().sum();
        let mut out = vec![f64::NAN; quantities.len() + n_terms];
        let Some(o) = self.layout().orbital(x) else {
            return out;
        };
        let (orbital, mut rest) = out.split_at_mut(quantities.len());
        for (slot, q) in orbital.iter_mut().zip(&quantities) {
            *slot = self.quantity(&o, x, *q);
        }
        for (t, &n) in self.layout().terms().iter().zip(self.derived_per_term()) {
            let (mine, later) = rest.split_at_mut(n);
            t.derived(&o, x, mine);
            rest = later;
        }
        out
    }

    fn quantity(&self, o: &OrbitalParameters, x: &[f64], q: Quantity) -> f64 {
        let nan = f64::NAN;
        let deg = |r: f64| r.to_degrees();
        let p = o.period_days;
        let e = o.eccentricity;
        let k1 = o.k1_kms.unwrap_or(nan);
        let k2 = o.k2_kms.unwrap_or(nan);
        let m = o.total_mass_msun.unwrap_or(nan);
        let ratio = o.mass_ratio.unwrap_or(nan);
        let sin_i = o.inclination_rad.map_or(nan, f64::sin);
        let sin3i = sin_i.powi(3);
        let velocities_only = !self.coverage().sky_projection;
        // Velocities alone give M sin^3 i and a sin i (laws::msini3_msun,
        // laws::a_sini_km); a known inclination turns them into M and a.
        let msini3 = || laws::msini3_msun(k1, k2, p, e);
        let a_sini_au = || {
            let k = match (o.k1_kms, o.k2_kms) {
                (Some(a), Some(b)) => a + b,
                (Some(a), None) => a,
                (None, Some(b)) => b,
                (None, None) => nan,
            };
            laws::a_sini_km(k, p, e) / dyad_orbit::constants::AU_KM
        };
        match q {
            Quantity::PeriastronJd => o.t_peri_jd,
            Quantity::PeriastronJyear => TimeScale::JulianYear.from_jd(o.t_peri_jd),
            Quantity::PeriodDays => p,
            Quantity::PeriodYears => p / JULIAN_YEAR_DAYS,
            Quantity::Eccentricity => e,
            Quantity::OmegaSecondary => deg(o.omega_rad),
            Quantity::OmegaPrimary => {
                deg((o.omega_rad + std::f64::consts::PI).rem_euclid(std::f64::consts::TAU))
            }
            Quantity::Inclination => o.inclination_rad.map_or(nan, deg),
            Quantity::Node => o.node_rad.map_or(nan, deg),
            Quantity::AxisMas => o.semi_major_axis_mas.unwrap_or(nan),
            Quantity::AxisAu if velocities_only => a_sini_au() / sin_i,
            Quantity::AxisAu => o.semi_major_axis_au.unwrap_or(nan),
            Quantity::TotalMass if velocities_only => {
                let (m1, m2) = msini3();
                (m1 + m2) / sin3i
            }
            Quantity::TotalMass => m,
            Quantity::Parallax => o.parallax_mas.unwrap_or(nan),
            Quantity::MassRatio => ratio,
            Quantity::MassPrimary if velocities_only => msini3().0 / sin3i,
            Quantity::MassSecondary if velocities_only => msini3().1 / sin3i,
            Quantity::MassPrimary => m / (1.0 + ratio),
            Quantity::MassSecondary => m * ratio / (1.0 + ratio),
            Quantity::K1 => k1,
            Quantity::K2 => k2,
            Quantity::M1Sin3i if velocities_only => msini3().0,
            Quantity::M2Sin3i if velocities_only => msini3().1,
            Quantity::M1Sin3i => m / (1.0 + ratio) * sin3i,
            Quantity::M2Sin3i => m * ratio / (1.0 + ratio) * sin3i,
            Quantity::MassFunction => laws::mass_function_msun(k1, p, e),
            Quantity::OrbitalParallax => self.velocity_implied_parallax(o, x),
            Quantity::ASiniAu => a_sini_au(),
        }
    }

    /// The parallax the orbit and the velocities imply, without the
    /// parallax prior, for one draw (joint model with both stars'
    /// velocities).
    ///
    /// In the joint model K1 and K2 follow from the parallax (through
    /// a_au = a_mas / parallax), so a_mas / a_au of the draw's own K1 + K2
    /// would be the sampled parallax again. Instead the semi-amplitudes are
    /// taken from the velocities alone: with the draw's orbit shape
    /// (P, e, omega, T) and jitters the velocities are linear in
    /// (K1, K2, offsets) (v1 = gamma_k - K1 shape, v2 = gamma_k + K2 shape),
    /// so their likelihood is Gaussian in them; (K1, K2) is drawn from it
    /// (flat prior; weighted least squares and its covariance), and then
    /// parallax = a_mas sin i / (a sin i in au), with
    /// a sin i = (K1 + K2) P sqrt(1 - e^2) / (2 pi) (K in km/s, P in s,
    /// a sin i in km, divided by the au in km; Hilditch 2001, eq. 2.46-2.47;
    /// `laws::orbital_parallax_mas`). The normal deviates come from a hash
    /// of the draw's coordinates, so the value is a function of the draw
    /// alone (the same on every thread count and every rerun). This is the
    /// conditional posterior of the parallax given the draw's geometry;
    /// the geometry itself comes mostly from the astrometry, which the
    /// catalogue prior touches only through its weak coupling.
    fn velocity_implied_parallax(&self, o: &OrbitalParameters, x: &[f64]) -> f64 {
        let (Some(a_mas), Some(inc)) = (o.semi_major_axis_mas, o.inclination_rad) else {
            return f64::NAN;
        };
        let Some((k_hat, cov)) = self.semi_amplitudes_from_velocities(o, x) else {
            return f64::NAN;
        };
        let [z1, z2] = hashed_normals(x);
        // Cholesky factor of the 2x2 covariance.
        let l11 = cov[0].sqrt();
        let l21 = cov[1] / l11;
        let l22 = (cov[2] - l21 * l21).max(0.0).sqrt();
        let k1 = k_hat[0] + l11 * z1;
        let k2 = k_hat[1] + l21 * z1 + l22 * z2;
        if (k1 + k2).is_nan() || k1 + k2 <= 0.0 {
            return f64::NAN;
        }
        laws::orbital_parallax_mas(a_mas, inc, k1, k2, o.period_days, o.eccentricity)
    }

    /// Weighted least-squares (K1, K2) from the velocities alone, with the
    /// draw's orbit shape and jitters and free offsets, and the covariance
    /// (c11, c12, c22) of the two; `None` when they are not determined.
    fn semi_amplitudes_from_velocities(
        &self,
        o: &OrbitalParameters,
        x: &[f64],
    ) -> Option<([f64; 2], [f64; 3])> {
        let orbit = Orbit::new(&o.campbell_elements()).ok()?;
        let layout = self.layout();
        let m = 2 + layout.instrument_count();
        let mut normal = vec![0.0; m * m];
        let mut rhs = vec![0.0; m];
        let mut row = vec![0.0; m];
        for v in &self.dataset().velocities {
            let shape = orbit.state(v.t_jd).rv_shape;
            let jitter = layout.jitter_kms(x, v.instrument);
            let w = 1.0 / (v.rv_err_kms * v.rv_err_kms + jitter * jitter);
            row.iter_mut().for_each(|r| *r = 0.0);
            match v.star {
                Star::Primary => row[0] = -shape,
                Star::Secondary => row[1] = shape,
            }
            row[2 + v.instrument] = 1.0;
            for a in 0..m {
                rhs[a] += w * row[a] * v.rv_kms;
                for b in 0..m {
                    normal[a * m + b] += w * row[a] * row[b];
                }
            }
        }
        let solution = solve_symmetric(&normal, &rhs, m)?;
        // The (K1, K2) block of the inverse: solve for the first two unit vectors.
        let mut unit = vec![0.0; m];
        unit[0] = 1.0;
        let col0 = solve_symmetric(&normal, &unit, m)?;
        unit[0] = 0.0;
        unit[1] = 1.0;
        let col1 = solve_symmetric(&normal, &unit, m)?;
        let cov = [col0[0], col0[1], col1[1]];
        (cov[0] > 0.0 && cov[2] > 0.0 && cov[0] * cov[2] > cov[1] * cov[1])
            .then_some(([solution[0], solution[1]], cov))
    }
}

/// Solves the symmetric positive-definite system `a y = b` (n x n,
/// row-major) by Cholesky decomposition; `None` if `a` is not positive
/// definite (common practice, e.g. Press et al., Numerical Recipes, 2007,
/// sec. 2.9).
fn solve_symmetric(a: &[f64], b: &[f64], n: usize) -> Option<Vec<f64>> {
    let mut l = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..=i {
            let mut sum = a[i * n + j];
            for k in 0..j {
                sum -= l[i * n + k] * l[j * n + k];
            }
            if i == j {
                if sum.is_nan() || sum <= 0.0 {
                    return None;
                }
                l[i * n + i] = sum.sqrt();
            } else {
                l[i * n + j] = sum / l[j * n + j];
            }
        }
    }
    let mut y = b.to_vec();
    for i in 0..n {
        for k in 0..i {
            y[i] -= l[i * n + k] * y[k];
        }
        y[i] /= l[i * n + i];
    }
    for i in (0..n).rev() {
        for k in i + 1..n {
            y[i] -= l[k * n + i] * y[k];
        }
        y[i] /= l[i * n + i];
    }
    Some(y)
}

/// Two standard normal deviates that are a function of the bits of `x`
/// alone: SplitMix64 (Steele, Lea & Flood 2014) over the coordinates, then
/// the Box-Muller transform (Box & Muller 1958).
fn hashed_normals(x: &[f64]) -> [f64; 2] {
    let mix = |mut z: u64| {
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    };
    let mut h: u64 = 0x9e37_79b9_7f4a_7c15;
    for v in x {
        h = mix(h
            .wrapping_add(v.to_bits())
            .wrapping_add(0x9e37_79b9_7f4a_7c15));
    }
    let a = mix(h.wrapping_add(1));
    let b = mix(h.wrapping_add(2));
    // Uniforms in (0, 1] and [0, 1) from the top 53 bits.
    let u1 = ((a >> 11) as f64 + 1.0) / (1u64 << 53) as f64;
    let u2 = (b >> 11) as f64 / (1u64 << 53) as f64;
    let r = (-2.0 * u1.ln()).sqrt();
    let t = std::f64::consts::TAU * u2;
    [r * t.cos(), r * t.sin()]
}
