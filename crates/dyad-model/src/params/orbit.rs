//! The orbital block of the sampled vector: the parameters every data term
//! shares (period, eccentricity and omega, phase) and the geometry and mass
//! parameters that the combination of terms can constrain (the rule is in
//! the module docs of [`crate::terms`]).

use std::f64::consts::{LN_2, PI, TAU};

use rand::Rng;
use rand_distr::Distribution;

use super::angles::{reduce_angle, AnglePair, WrappedAngle, RADIAL_SHAPE};
use super::priors::checked_uniform_circle;
use super::{check_domain, Coord, InclinationPrior, LayoutBuilder, ModelPriors, ScaledPrior};
use crate::error::ModelError;
use crate::terms::OrbitCoverage;
use dyad_orbit::{laws, velocity, CampbellElements};

#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum EccentricityBlock {
    /// (sqrt e cos w, sqrt e sin w) at (i, i + 1).
    Pair(usize),
    /// e sampled, omega fixed.
    EccentricityOnly(usize, f64),
    /// e fixed, omega sampled as an angle pair.
    OmegaOnly(f64, AnglePair),
    /// Both fixed.
    Fixed(f64, f64),
}

#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum NodeBlock {
    Fixed(f64),
    Pair(AnglePair),
}

/// Orbital and mass parameters of one sample, without the per-instrument
/// terms (so it is `Copy` and costs no allocation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrbitalParameters {
    /// Period, days.
    pub period_days: f64,
    /// Eccentricity.
    pub eccentricity: f64,
    /// The secondary's argument of periastron, radians in [0, 2 pi).
    pub omega_rad: f64,
    /// Mean longitude M + omega at the reference epoch, radians in [0, 2 pi).
    pub mean_longitude_rad: f64,
    /// A time of periastron, JD, within half a period of the reference epoch.
    pub t_peri_jd: f64,
    /// Inclination, radians in [0, pi] (astrometric modes).
    pub inclination_rad: Option<f64>,
    /// Position angle of the ascending node, radians (astrometric modes).
    pub node_rad: Option<f64>,
    /// Total mass M1 + M2, M_sun (astrometric modes).
    pub total_mass_msun: Option<f64>,
    /// Parallax, mas (astrometric modes).
    pub parallax_mas: Option<f64>,
    /// Relative semi-major axis, au (astrometric modes).
    pub semi_major_axis_au: Option<f64>,
    /// Relative semi-major axis, mas (astrometric modes).
    pub semi_major_axis_mas: Option<f64>,
    /// Mass ratio M2/M1 (joint mode; velocities-only with both stars: K1/K2).
    pub mass_ratio: Option<f64>,
    /// Semi-amplitude of the primary, km/s, when it can be computed.
    pub k1_kms: Option<f64>,
    /// Semi-amplitude of the secondary, km/s, when it can be computed.
    pub k2_kms: Option<f64>,
}

impl OrbitalParameters {
    /// The Campbell elements for `dyad_orbit::Orbit`, with `a` in mas.
    ///
    /// In velocities-only mode the geometric elements a, i and Omega are not
    /// defined; placeholders a = 1, i = 90 deg, Omega = 0 are used, which do
    /// not affect the velocity shape.
    pub fn campbell_elements(&self) -> CampbellElements {
        CampbellElements {
            period_days: self.period_days,
            t_peri_jd: self.t_peri_jd,
            e: self.eccentricity,
            a: self.semi_major_axis_mas.unwrap_or(1.0),
            inc_rad: self.inclination_rad.unwrap_or(PI / 2.0),
            omega_rad: self.omega_rad,
            node_rad: self.node_rad.unwrap_or(0.0),
        }
    }

    /// The factors (c1, c2) with v_star = gamma + c_star * rv_shape: from
    /// the relative orbit's K and q when the sky projection is sampled
    /// (`velocity::primary_velocity(0, q, K) = -q/(1+q) K`, etc.), else from
    /// the sampled semi-amplitudes (v1 = gamma - K1 shape, v2 = gamma + K2
    /// shape); zero for a star without an amplitude.
    #[inline]
    pub fn velocity_factors(&self) -> (f64, f64) {
        match (self.semi_major_axis_au, self.inclination_rad) {
            (Some(a), Some(i)) => {
                let k =
                    laws::relative_semi_amplitude_kms(a, self.period_days, self.eccentricity, i);
                let q = self.mass_ratio.unwrap_or(0.0);
                (
                    velocity::primary_velocity(0.0, q, k),
                    velocity::secondary_velocity(0.0, q, k),
                )
            }
            _ => (-self.k1_kms.unwrap_or(0.0), self.k2_kms.unwrap_or(0.0)),
        }
    }
}

/// All physical parameters of one sample.
#[derive(Debug, Clone, PartialEq)]
pub struct PhysicalParameters {
    /// The orbit and masses.
    pub orbit: OrbitalParameters,
    /// Per instrument: systemic velocity as that instrument measures it, km/s.
    pub offsets_kms: Vec<f64>,
    /// Per instrument: jitter, km/s.
    pub jitters_kms: Vec<f64>,
}

/// Where the shared orbital parameters sit in the sampled vector.
#[derive(Debug, Clone)]
pub(crate) struct OrbitBlock {
    coverage: OrbitCoverage,
    reference_epoch_jd: f64,
    omega_wrapped: WrappedAngle,
    node_wrapped: WrappedAngle,
    phase_wrapped: WrappedAngle,
    period: Coord,
    eccentricity: EccentricityBlock,
    phase: AnglePair,
    cos_inclination: Option<Coord>,
    node: Option<NodeBlock>,
    total_mass: Option<Coord>,
    parallax: Option<Coord>,
    mass_ratio: Option<Coord>,
    k1: Option<Coord>,
    k2: Option<Coord>,
}

impl OrbitBlock {
    /// Declares the orbital coordinates (the first of the vector) for the
    /// union of what the data terms constrain.
    pub(crate) fn new(
        b: &mut LayoutBuilder,
        priors: &ModelPriors,
        coverage: OrbitCoverage,
        reference_epoch_jd: f64,
    ) -> Result<Self, ModelError> {
        let sky = coverage.sky_projection;
        let line_of_sight = coverage.line_of_sight();
        check_domain(&priors.period_days, "the period", 0.0, f64::INFINITY, false)?;
        check_domain(&priors.eccentricity, "the eccentricity", 0.0, 1.0, true)?;
        if let InclinationPrior::Angle(p) = &priors.inclination {
            check_domain(p, "the inclination", 0.0, PI, false)?;
        }
        if sky {
            check_domain(
                &priors.total_mass_msun,
                "the total mass",
                0.0,
                f64::INFINITY,
                false,
            )?;
            check_domain(
                &priors.parallax_mas,
                "the parallax",
                0.0,
                f64::INFINITY,
                false,
            )?;
            if line_of_sight {
                check_domain(
                    &priors.mass_ratio,
                    "the mass ratio",
                    0.0,
                    f64::INFINITY,
                    false,
                )?;
            }
        }

        let period = b.scalar(&priors.period_days, true, "ln_period_days", "ln(d)");
        let e_fixed = priors.eccentricity.fixed_value();
        // With e fixed at exactly 0 omega has no meaning: hold it at 0.
        let omega_fixed = match (e_fixed, priors.omega_rad.fixed_value()) {
            (_, Some(w)) => Some(w),
            (Some(0.0), None) => Some(0.0),
            _ => None,
        };
        let eccentricity = match (e_fixed, omega_fixed) {
            (None, None) => {
                let i = b.push("sqrt_e_cos_omega", "1");
                b.push("sqrt_e_sin_omega", "1");
                EccentricityBlock::Pair(i)
            }
            (None, Some(w)) => EccentricityBlock::EccentricityOnly(b.push("eccentricity", "1"), w),
            (Some(e), None) => EccentricityBlock::OmegaOnly(e, b.angle("omega", 1.0)),
            (Some(e), Some(w)) => EccentricityBlock::Fixed(e, w),
        };
        let phase = b.angle("phase", 1.0);
        // Without a view of the sky the data say nothing about i, but an
        // inclination known from elsewhere (eclipses, interferometry) turns
        // M sin^3 i into masses: then i is sampled from its prior.
        let known_inclination = matches!(priors.inclination, InclinationPrior::Angle(_));
        let cos_inclination = if sky || known_inclination {
            Some(match &priors.inclination {
                InclinationPrior::Isotropic => Coord::Linear(b.push("cos_inclination", "1")),
                InclinationPrior::Angle(p) => match p.fixed_value() {
                    Some(v) => Coord::Fixed(v.cos()),
                    None => Coord::Linear(b.push("cos_inclination", "1")),
                },
            })
        } else {
            None
        };
        let node_divisor = if coverage.node_folded() { 2.0 } else { 1.0 };
        let node = if sky {
            Some(match priors.node_rad.fixed_value() {
                Some(v) => NodeBlock::Fixed(reduce_angle(v, TAU / node_divisor)),
                None => NodeBlock::Pair(b.angle("node", node_divisor)),
            })
        } else {
            None
        };
        let total_mass = sky.then(|| {
            b.scalar(
                &priors.total_mass_msun,
                true,
                "ln_total_mass_msun",
                "ln(M_sun)",
            )
        });
        let parallax = sky.then(|| b.scalar(&priors.parallax_mas, false, "parallax_mas", "mas"));
        let mass_ratio =
            (sky && line_of_sight).then(|| b.scalar(&priors.mass_ratio, false, "mass_ratio", "1"));
        // Velocities without the sky projection: the semi-amplitudes.
        let amplitudes = !sky;
        let k1 = (amplitudes && coverage.primary_velocity)
            .then(|| b.scalar(&priors.k1_kms, true, "ln_k1_kms", "ln(km/s)"));
        let k2 = (amplitudes && coverage.secondary_velocity)
            .then(|| b.scalar(&priors.k2_kms, true, "ln_k2_kms", "ln(km/s)"));
        if amplitudes && line_of_sight {
            check_domain(&priors.k1_kms, "K1", 0.0, f64::INFINITY, false)?;
            check_domain(&priors.k2_kms, "K2", 0.0, f64::INFINITY, false)?;
        }
        Ok(Self {
            coverage,
            reference_epoch_jd,
            omega_wrapped: WrappedAngle::new(priors.omega_rad, TAU),
            node_wrapped: WrappedAngle::new(priors.node_rad, TAU / node_divisor),
            phase_wrapped: WrappedAngle::new(checked_uniform_circle(), TAU),
            period,
            eccentricity,
            phase,
            cos_inclination,
            node,
            total_mass,
            parallax,
            mass_ratio,
            k1,
            k2,
        })
    }

    /// What the data terms constrain together.
    pub(crate) fn coverage(&self) -> OrbitCoverage {
        self.coverage
    }

    /// The epoch at which the phase is defined, JD.
    pub(crate) fn reference_epoch_jd(&self) -> f64 {
        self.reference_epoch_jd
    }

    /// Whether the inclination is a parameter.
    pub(crate) fn has_inclination(&self) -> bool {
        self.cos_inclination.is_some()
    }

    /// The period coordinate.
    pub(crate) fn period(&self) -> Coord {
        self.period
    }

    /// The orbit and masses of `x`, or `None` if `x` is outside the domain
    /// of the map (e >= 1, |cos i| > 1, a non-positive mass or parallax, a
    /// non-finite coordinate). Allocates nothing.
    #[inline]
    pub(crate) fn orbital(&self, x: &[f64]) -> Option<OrbitalParameters> {
        let period_days = self.period.value(x);
        let (eccentricity, omega_rad) = match self.eccentricity {
            EccentricityBlock::Pair(i) => {
                let (c, s) = (x[i], x[i + 1]);
                let e = c * c + s * s;
                // omega is undefined at e = 0; atan2(0, 0) = 0 is a fine choice.
                (e, reduce_angle(s.atan2(c), TAU))
            }
            EccentricityBlock::EccentricityOnly(i, w) => (x[i], reduce_angle(w, TAU)),
            EccentricityBlock::OmegaOnly(e, pair) => (e, pair.angle(x)),
            EccentricityBlock::Fixed(e, w) => (e, reduce_angle(w, TAU)),
        };
        if period_days <= 0.0 || !period_days.is_finite() || !(0.0..1.0).contains(&eccentricity) {
            return None;
        }
        let mean_longitude_rad = self.phase.angle(x);
        // T_peri = t_ref - (lambda - omega) P / (2 pi), taken within half a
        // period of t_ref.
        let mut m_ref = (mean_longitude_rad - omega_rad).rem_euclid(TAU);
        if m_ref > PI {
            m_ref -= TAU;
        }
        let t_peri_jd = self.reference_epoch_jd - m_ref / TAU * period_days;

        let mut out = OrbitalParameters {
            period_days,
            eccentricity,
            omega_rad,
            mean_longitude_rad,
            t_peri_jd,
            inclination_rad: None,
            node_rad: None,
            total_mass_msun: None,
            parallax_mas: None,
            semi_major_axis_au: None,
            semi_major_axis_mas: None,
            mass_ratio: None,
            k1_kms: None,
            k2_kms: None,
        };
        if let (Some(ci), Some(node), Some(m), Some(plx)) = (
            self.cos_inclination,
            self.node,
            self.total_mass,
            self.parallax,
        ) {
            let cos_i = ci.value(x);
            if !(-1.0..=1.0).contains(&cos_i) {
                return None;
            }
            let inc = cos_i.acos();
            let node_rad = match node {
                NodeBlock::Fixed(v) => v,
                NodeBlock::Pair(p) => p.angle(x),
            };
            let total_mass = m.value(x);
            let parallax = plx.value(x);
            if !(total_mass > 0.0 && parallax > 0.0 && total_mass.is_finite()) {
                return None;
            }
            let a_au = laws::semi_major_axis_au(total_mass, period_days);
            out.inclination_rad = Some(inc);
            out.node_rad = Some(node_rad);
            out.total_mass_msun = Some(total_mass);
            out.parallax_mas = Some(parallax);
            out.semi_major_axis_au = Some(a_au);
            out.semi_major_axis_mas = Some(a_au * parallax);
            if let Some(q) = self.mass_ratio {
                let q = q.value(x);
                if !(q >= 0.0 && q.is_finite()) {
                    return None;
                }
                let (k1, k2) = laws::semi_amplitudes_kms(a_au, period_days, eccentricity, inc, q);
                out.mass_ratio = Some(q);
                out.k1_kms = Some(k1);
                out.k2_kms = Some(k2);
            }
        } else {
            if let Some(ci) = self.cos_inclination {
                let cos_i = ci.value(x);
                if !(-1.0..=1.0).contains(&cos_i) {
                    return None;
                }
                out.inclination_rad = Some(cos_i.acos());
            }
            out.k1_kms = self.k1.map(|c| c.value(x));
            out.k2_kms = self.k2.map(|c| c.value(x));
            if let (Some(k1), Some(k2)) = (out.k1_kms, out.k2_kms) {
                // K1 / K2 = M2 / M1 (the centre of mass stays put).
                out.mass_ratio = Some(k1 / k2);
            }
        }
        Some(out)
    }

    /// Writes the orbital coordinates of physical parameters (the rest of
    /// [`super::ParameterLayout::from_physical`]).
    pub(crate) fn set_from_physical(
        &self,
        o: &OrbitalParameters,
        x: &mut [f64],
    ) -> Result<(), ModelError> {
        let need = |v: Option<f64>, what: &str| {
            v.ok_or_else(|| ModelError::InvalidModel(format!("{what} is needed but not given")))
        };
        let mut omega = o.omega_rad;
        let mut node = o.node_rad;
        if self.coverage.node_folded() {
            if let Some(n) = node {
                let n = reduce_angle(n, TAU);
                if n >= PI {
                    node = Some(n - PI);
                    omega += PI;
                }
            }
        }
        self.period.set(x, o.period_days, "the period")?;
        match self.eccentricity {
            EccentricityBlock::Pair(i) => {
                let r = o.eccentricity.sqrt();
                x[i] = r * omega.cos();
                x[i + 1] = r * omega.sin();
            }
            EccentricityBlock::EccentricityOnly(i, _) => x[i] = o.eccentricity,
            EccentricityBlock::OmegaOnly(_, pair) => pair.set(x, reduce_angle(omega, TAU), 1.0),
            EccentricityBlock::Fixed(..) => {}
        }
        // lambda = M(t_ref) + omega with M(t_ref) = 2 pi (t_ref - T) / P.
        let lambda = TAU * (self.reference_epoch_jd - o.t_peri_jd) / o.period_days + omega;
        self.phase.set(x, reduce_angle(lambda, TAU), 1.0);
        if let Some(c) = self.cos_inclination {
            c.set(
                x,
                need(o.inclination_rad, "the inclination")?.cos(),
                "cos i",
            )?;
        }
        if let Some(NodeBlock::Pair(pair)) = self.node {
            let n = need(node, "the node")?;
            pair.set(x, reduce_angle(n, TAU / pair.divisor), 1.0);
        }
        if let Some(c) = self.total_mass {
            c.set(
                x,
                need(o.total_mass_msun, "the total mass")?,
                "the total mass",
            )?;
        }
        if let Some(c) = self.parallax {
            c.set(x, need(o.parallax_mas, "the parallax")?, "the parallax")?;
        }
        if let Some(c) = self.mass_ratio {
            c.set(x, need(o.mass_ratio, "the mass ratio")?, "the mass ratio")?;
        }
        if let Some(c) = self.k1 {
            c.set(x, need(o.k1_kms, "K1")?, "K1")?;
        }
        if let Some(c) = self.k2 {
            c.set(x, need(o.k2_kms, "K2")?, "K2")?;
        }
        Ok(())
    }

    /// Calls `term` with each prior term of the orbital block, in order.
    pub(crate) fn for_each_prior_term(
        &self,
        x: &[f64],
        pr: &ModelPriors,
        term: &mut impl FnMut(&'static str, f64),
    ) {
        term("period", self.period.ln_prior(x, &pr.period_days));
        term(
            "eccentricity and omega",
            match self.eccentricity {
                EccentricityBlock::Pair(i) => {
                    let (c, s) = (x[i], x[i + 1]);
                    let e = c * c + s * s;
                    if e >= 1.0 {
                        f64::NEG_INFINITY
                    } else {
                        // p(x, y) = 2 p(e) p(omega): dx dy = de domega / 2.
                        LN_2 + pr.eccentricity.ln_pdf(e)
                            + match self.omega_wrapped.constant {
                                Some(k) => k,
                                None => self.omega_wrapped.ln_pdf(reduce_angle(s.atan2(c), TAU)),
                            }
                    }
                }
                EccentricityBlock::EccentricityOnly(i, _) => {
                    if (0.0..1.0).contains(&x[i]) {
                        pr.eccentricity.ln_pdf(x[i])
                    } else {
                        f64::NEG_INFINITY
                    }
                }
                EccentricityBlock::OmegaOnly(_, pair) => pair.ln_prior(x, &self.omega_wrapped),
                EccentricityBlock::Fixed(..) => 0.0,
            },
        );
        term("phase", self.phase.ln_prior(x, &self.phase_wrapped));
        if let Some(Coord::Linear(i)) = self.cos_inclination {
            let c = x[i];
            term(
                "inclination",
                if !(-1.0..=1.0).contains(&c) {
                    f64::NEG_INFINITY
                } else {
                    match &pr.inclination {
                        // p(c) = 1/2 on [-1, 1].
                        InclinationPrior::Isotropic => -LN_2,
                        // p(c) = p(i) |di/dc| = p(i) / sin i.
                        InclinationPrior::Angle(p) => {
                            let i = c.acos();
                            p.ln_pdf(i) - i.sin().ln()
                        }
                    }
                },
            );
        }
        if let Some(NodeBlock::Pair(pair)) = self.node {
            term("node", pair.ln_prior(x, &self.node_wrapped));
        }
        if let Some(c) = self.total_mass {
            term("total mass", c.ln_prior(x, &pr.total_mass_msun));
        }
        if let Some(c) = self.parallax {
            term("parallax", c.ln_prior(x, &pr.parallax_mas));
        }
        if let Some(c) = self.mass_ratio {
            let v = c.ln_prior(x, &pr.mass_ratio);
            term(
                "mass ratio",
                if c.value(x) < 0.0 {
                    f64::NEG_INFINITY
                } else {
                    v
                },
            );
        }
        if let Some(c) = self.k1 {
            term("K1", c.ln_prior(x, &pr.k1_kms));
        }
        if let Some(c) = self.k2 {
            term("K2", c.ln_prior(x, &pr.k2_kms));
        }
    }

    /// Draws the orbital coordinates from the prior (the first part of
    /// [`super::ParameterLayout::sample_prior_into`]).
    pub(crate) fn sample_prior<R: Rng + ?Sized>(
        &self,
        rng: &mut R,
        pr: &ModelPriors,
        x: &mut [f64],
    ) {
        let gamma =
            rand_distr::Gamma::new(RADIAL_SHAPE, 1.0 / RADIAL_SHAPE).expect("valid constants");
        let radius = |rng: &mut R| gamma.sample(rng).sqrt();
        let draw =
            |rng: &mut R, p: &ScaledPrior, lo: f64, hi: f64| super::draw_within(rng, p, lo, hi);
        let set = |x: &mut [f64], c: Coord, v: f64| match c {
            Coord::Fixed(_) => {}
            Coord::Linear(i) => x[i] = v,
            Coord::Log(i) => x[i] = v.ln(),
        };
        set(
            x,
            self.period,
            draw(rng, &pr.period_days, f64::MIN_POSITIVE, f64::INFINITY),
        );
        match self.eccentricity {
            EccentricityBlock::Pair(i) => {
                let e = draw(rng, &pr.eccentricity, 0.0, 1.0);
                let w = self.omega_wrapped.sample(rng);
                x[i] = e.sqrt() * w.cos();
                x[i + 1] = e.sqrt() * w.sin();
            }
            EccentricityBlock::EccentricityOnly(i, _) => {
                x[i] = draw(rng, &pr.eccentricity, 0.0, 1.0)
            }
            EccentricityBlock::OmegaOnly(_, pair) => {
                let w = self.omega_wrapped.sample(rng);
                let r = radius(rng);
                pair.set(x, w, r);
            }
            EccentricityBlock::Fixed(..) => {}
        }
        {
            let r = radius(rng);
            let t = rng.gen::<f64>() * TAU;
            x[self.phase.u] = r * t.cos();
            x[self.phase.v] = r * t.sin();
        }
        if let Some(Coord::Linear(i)) = self.cos_inclination {
            x[i] = match &pr.inclination {
                InclinationPrior::Isotropic => rng.gen_range(-1.0..=1.0),
                InclinationPrior::Angle(p) => draw(rng, p, 0.0, PI).cos(),
            };
        }
        if let Some(NodeBlock::Pair(pair)) = self.node {
            let w = self.node_wrapped.sample(rng);
            let r = radius(rng);
            pair.set(x, w, r);
        }
        if let Some(c) = self.total_mass {
            set(
                x,
                c,
                draw(rng, &pr.total_mass_msun, f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
        if let Some(c) = self.parallax {
            set(
                x,
                c,
                draw(rng, &pr.parallax_mas, f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
        if let Some(c) = self.mass_ratio {
            set(x, c, draw(rng, &pr.mass_ratio, 0.0, f64::INFINITY));
        }
        if let Some(c) = self.k1 {
            set(
                x,
                c,
                draw(rng, &pr.k1_kms, f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
        if let Some(c) = self.k2 {
            set(
                x,
                c,
                draw(rng, &pr.k2_kms, f64::MIN_POSITIVE, f64::INFINITY),
            );
        }
    }
}
