//! A starting-point search for the sampler.
//!
//! The period prior is usually wide, so a ball around one random prior draw
//! would start the walkers far from any orbit the data allow. Instead:
//!
//! 1. Candidates: many seeded prior draws, with ln P spread evenly
//!    (stratified) over the prior's support when it is bounded. For each
//!    candidate (P, e, T) the parameters that enter the model linearly are
//!    solved by weighted least squares: the Thiele-Innes constants A, B, F, G
//!    from the astrometry (dDec = A X + F Y, dRA* = B X + G Y; e.g. W. D.
//!    Heintz, Double Stars, 1978, ch. 5), converted to (a, i, omega, Omega)
//!    with `ThieleInnes::to_campbell`; and the velocity offsets and
//!    amplitudes from v = gamma_k + c_star * shape(t) (cf. Wright & Howard
//!    2009, ApJS 182, 205, for linear parameters of Keplerian fits). Both
//!    members of the (omega, Omega) / (omega + pi, Omega + pi) pair are
//!    tried, and with velocities of both stars also the parallax the orbit
//!    implies. Each candidate is scored by its log-posterior.
//! 2. The best candidates with distinct periods are polished with the
//!    downhill simplex method of Nelder & Mead (1965, Comput. J. 7, 308)
//!    on the negative log-posterior, restarted twice from the best vertex.
//! 3. The polished points are merged into distinct modes (by period) and
//!    returned best first.
//!
//! Deterministic: candidate `j` draws from its own generator seeded from
//! (seed, j), and everything runs in a fixed order, so the result depends
//! on the seed only (and never on threads).

use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

use dyad_orbit::kepler::solve_kepler;
use dyad_orbit::{laws, CampbellElements, Orbit, ThieleInnes};

use crate::config::StartValues;
use crate::data::{RelativePosition, Star};
use crate::likelihood::Model;
use crate::params::{InclinationPrior, PhysicalParameters};

/// Settings of the starting-point search.
#[derive(Debug, Clone, PartialEq)]
pub struct StartSettings {
    /// Seed of the candidate draws.
    pub seed: u64,
    /// Number of candidates scored (default 4000).
    pub candidates: usize,
    /// Number of candidates with distinct periods polished (default 8).
    pub polished: usize,
    /// Most log-posterior evaluations per simplex run (default 3000).
    pub max_evaluations: usize,
    /// Most modes returned (default 4).
    pub max_modes: usize,
    /// Modes whose log-posterior is more than this below the best are
    /// dropped (default 30).
    pub max_drop: f64,
}

impl Default for StartSettings {
    fn default() -> Self {
        Self {
            seed: 1,
            candidates: 4000,
            polished: 8,
            max_evaluations: 3000,
            max_modes: 4,
            max_drop: 30.0,
        }
    }
}

/// One starting point.
#[derive(Debug, Clone, PartialEq)]
pub struct StartPoint {
    /// Sampled coordinates.
    pub x: Vec<f64>,
    /// Log-posterior there.
    pub log_posterior: f64,
}

// SplitMix64 (Steele, Lea & Flood 2014) mixes (seed, index) into a seed.
use dyad_common::seed::mix_seed;

/// Solves the small dense system `m y = b` (row-major n x n) by Gaussian
/// elimination with partial pivoting; `None` if singular.
fn solve_dense(mut m: Vec<f64>, mut b: Vec<f64>) -> Option<Vec<f64>> {
    let n = b.len();
    for col in 0..n {
        let pivot =
            (col..n).max_by(|&i, &j| m[i * n + col].abs().total_cmp(&m[j * n + col].abs()))?;
        if m[pivot * n + col].abs() < 1e-300 {
            return None;
        }
        if pivot != col {
            for k in 0..n {
                m.swap(col * n + k, pivot * n + k);
            }
            b.swap(col, pivot);
        }
        for row in col + 1..n {
            let f = m[row * n + col] / m[col * n + col];
            for k in col..n {
                m[row * n + k] -= f * m[col * n + k];
            }
            b[row] -= f * b[col];
        }
    }
    let mut y = vec![0.0; n];
    for row in (0..n).rev() {
        let mut s = b[row];
        for k in row + 1..n {
            s -= m[row * n + k] * y[k];
        }
        y[row] = s / m[row * n + row];
    }
    y.iter().all(|v| v.is_finite()).then_some(y)
}

/// Weighted least-squares Thiele-Innes constants for given (P, e, T).
fn fit_thiele_innes(model: &Model, period: f64, e: f64, t_peri: f64) -> Option<ThieleInnes> {
    // Normal equations of (A, F) from dDec and (B, G) from dRA*.
    let (mut n_dec, mut n_ra) = ([0.0; 3], [0.0; 3]);
    let (mut r_dec, mut r_ra) = ([0.0; 2], [0.0; 2]);
    let root = (1.0 - e * e).sqrt();
    for epoch in &model.dataset().astrometry {
        let ea = solve_kepler(std::f64::consts::TAU * (epoch.t_jd - t_peri) / period, e);
        let x = ea.cos_e - e;
        let y = root * ea.sin_e;
        let (dra, ddec, w_ra, w_dec) = match epoch.position {
            RelativePosition::Polar {
                sep_mas,
                sep_err_mas,
                pa_rad,
                pa_err_rad,
                ..
            } => {
                // Isotropic approximation of the polar error ellipse.
                let var = 0.5 * (sep_err_mas.powi(2) + (sep_mas * pa_err_rad).powi(2));
                (
                    sep_mas * pa_rad.sin(),
                    sep_mas * pa_rad.cos(),
                    1.0 / var,
                    1.0 / var,
                )
            }
            RelativePosition::Cartesian {
                dra_mas,
                ddec_mas,
                dra_err_mas,
                ddec_err_mas,
                ..
            } => (
                dra_mas,
                ddec_mas,
                dra_err_mas.powi(-2),
                ddec_err_mas.powi(-2),
            ),
        };
        for (n, r, w, d) in [
            (&mut n_dec, &mut r_dec, w_dec, ddec),
            (&mut n_ra, &mut r_ra, w_ra, dra),
        ] {
            n[0] += w * x * x;
            n[1] += w * x * y;
            n[2] += w * y * y;
            r[0] += w * x * d;
            r[1] += w * y * d;
        }
    }
    let solve2 = |n: [f64; 3], r: [f64; 2]| -> Option<(f64, f64)> {
        let det = n[0] * n[2] - n[1] * n[1];
        if det == 0.0 || det.abs() <= 1e-12 * (n[0] * n[2]).abs() {
            return None;
        }
        Some((
            (n[2] * r[0] - n[1] * r[1]) / det,
            (n[0] * r[1] - n[1] * r[0]) / det,
        ))
    };
    let (a, f) = solve2(n_dec, r_dec)?;
    let (b, g) = solve2(n_ra, r_ra)?;
    Some(ThieleInnes { a, b, f, g })
}

/// Weighted least-squares offsets and amplitude factors (c1, c2) of
/// v = gamma_k + c_star * shape for a given orbit shape.
fn fit_velocities(model: &Model, orbit: &Orbit) -> Option<(Vec<f64>, f64, f64)> {
    let layout = model.layout();
    let n_inst = layout.instrument_count();
    let has1 = layout.has_velocities_of(Star::Primary);
    let has2 = layout.has_velocities_of(Star::Secondary);
    let i1 = n_inst;
    let i2 = n_inst + usize::from(has1);
    let n = n_inst + usize::from(has1) + usize::from(has2);
    let mut m = vec![0.0; n * n];
    let mut b = vec![0.0; n];
    for v in &model.dataset().velocities {
        let w = 1.0 / (v.rv_err_kms * v.rv_err_kms);
        let s = orbit.rv_shape(v.t_jd);
        let amp = match v.star {
            Star::Primary => i1,
            Star::Secondary => i2,
        };
        let cols = [(v.instrument, 1.0), (amp, s)];
        for &(r, vr) in &cols {
            b[r] += w * vr * v.rv_kms;
            for &(c, vc) in &cols {
                m[r * n + c] += w * vr * vc;
            }
        }
    }
    let y = solve_dense(m, b)?;
    let c1 = if has1 { y[i1] } else { 0.0 };
    let c2 = if has2 { y[i2] } else { 0.0 };
    Some((y[..n_inst].to_vec(), c1, c2))
}

/// Clamps a value into the support of a prior (slightly inside).
fn clamp_into(v: f64, (lo, hi): (f64, f64)) -> f64 {
    let lo_in = if lo.is_finite() {
        lo + 1e-9 * (1.0 + lo.abs())
    } else {
        lo
    };
    let hi_in = if hi.is_finite() {
        hi - 1e-9 * (1.0 + hi.abs())
    } else {
        hi
    };
    v.max(lo_in).min(hi_in)
}

/// Candidate variants for one draw, with the linear parameters solved.
fn linear_variants(model: &Model, base: &PhysicalParameters, out: &mut Vec<Vec<f64>>) {
    let layout = model.layout();
    let priors = layout.priors();
    let o = &base.orbit;
    let coverage = model.coverage();
    let (p, e, t) = (o.period_days, o.eccentricity, o.t_peri_jd);
    let median_err = {
        let mut errs: Vec<f64> = model
            .dataset()
            .velocities
            .iter()
            .map(|v| v.rv_err_kms)
            .collect();
        errs.sort_by(f64::total_cmp);
        // The upper median, kept on purpose: it sets the starting points, so
        // the type-7 median (which averages the middle pair of an even count)
        // would change every chain of a data set with an even number of
        // velocities.
        errs.get(errs.len() / 2).copied().unwrap_or(0.1)
    };
    let mut geometries = Vec::new();
    if !coverage.sky_projection {
        geometries.push((None, o.omega_rad));
    } else if let Some(ti) = fit_thiele_innes(model, p, e, t) {
        let g = ti.to_campbell();
        geometries.push((Some(g), g.omega_rad));
        if coverage.ascending_node {
            let mut flipped = g;
            flipped.omega_rad += std::f64::consts::PI;
            flipped.node_rad += std::f64::consts::PI;
            geometries.push((Some(flipped), flipped.omega_rad));
        }
    } else {
        return;
    }
    for (geometry, omega) in geometries {
        let mut cand = base.clone();
        cand.orbit.omega_rad = omega;
        let mut parallaxes = vec![o.parallax_mas];
        if let (None, InclinationPrior::Angle(prior)) = (geometry, &priors.inclination) {
            // Velocities alone with a known inclination: the data say
            // nothing about i, so it starts where its prior is.
            if cand.orbit.inclination_rad.is_none() {
                cand.orbit.inclination_rad = Some(clamp_into(prior.mean(), prior.support()));
            }
        }
        if let Some(g) = geometry {
            cand.orbit.inclination_rad = Some(g.inc_rad);
            cand.orbit.node_rad = Some(g.node_rad);
            cand.orbit.semi_major_axis_mas = Some(g.a);
        }
        let elements = CampbellElements {
            period_days: p,
            t_peri_jd: t,
            e,
            a: geometry.map_or(1.0, |g| g.a.max(1e-12)),
            inc_rad: geometry.map_or(std::f64::consts::FRAC_PI_2, |g| g.inc_rad),
            omega_rad: omega,
            node_rad: geometry.map_or(0.0, |g| g.node_rad),
        };
        let Ok(orbit) = Orbit::new(&elements) else {
            continue;
        };
        let mut c = (0.0, 0.0);
        if !model.dataset().velocities.is_empty() {
            let Some((offsets, c1, c2)) = fit_velocities(model, &orbit) else {
                continue;
            };
            for (k, g) in offsets.iter().enumerate() {
                cand.offsets_kms[k] = clamp_into(*g, priors.offset_kms[k].support());
                cand.jitters_kms[k] = clamp_into(0.1 * median_err, priors.jitter_kms[k].support());
            }
            c = (c1, c2);
        }
        if !coverage.sky_projection {
            // v1 = gamma - K1 shape, v2 = gamma + K2 shape.
            cand.orbit.k1_kms = Some(clamp_into(-c.0, priors.k1_kms.support()).max(1e-6));
            cand.orbit.k2_kms = Some(clamp_into(c.1, priors.k2_kms.support()).max(1e-6));
        } else if coverage.line_of_sight() {
            let g = match geometry {
                Some(g) => g,
                None => continue,
            };
            let (c1, c2) = c;
            let both = layout.has_velocities_of(Star::Primary)
                && layout.has_velocities_of(Star::Secondary);
            if both && c2 - c1 > 0.0 && g.inc_rad.sin() > 1e-3 {
                // K = c2 - c1 gives a_au, hence the orbital parallax.
                let a_au = (c2 - c1) * p * 86_400.0 * (1.0 - e * e).sqrt()
                    / (std::f64::consts::TAU * g.inc_rad.sin() * dyad_orbit::constants::AU_KM);
                parallaxes.push(Some(g.a / a_au));
            }
            for plx in parallaxes {
                let Some(plx) = plx else { continue };
                let plx = clamp_into(plx, priors.parallax_mas.support());
                let a_au = g.a / plx;
                let m = clamp_into(
                    laws::total_mass_msun(a_au, p),
                    priors.total_mass_msun.support(),
                );
                let a_au = laws::semi_major_axis_au(m, p);
                let k = laws::relative_semi_amplitude_kms(a_au, p, e, g.inc_rad);
                let q = if both && c2 > 0.0 {
                    -c1 / c2
                } else if layout.has_velocities_of(Star::Primary) && k > 0.0 {
                    let r = (-c1 / k).clamp(0.0, 0.999);
                    r / (1.0 - r)
                } else {
                    let r = (1.0 - c2 / k.max(1e-300)).clamp(0.0, 0.999);
                    r / (1.0 - r)
                };
                let mut v = cand.clone();
                v.orbit.parallax_mas = Some(plx);
                v.orbit.total_mass_msun = Some(m);
                v.orbit.mass_ratio = Some(clamp_into(q.max(0.0), priors.mass_ratio.support()));
                if let Ok(x) = layout.from_physical(&v) {
                    out.push(x);
                }
            }
            continue;
        } else {
            let g = match geometry {
                Some(g) => g,
                None => continue,
            };
            let plx = clamp_into(o.parallax_mas.unwrap_or(1.0), priors.parallax_mas.support());
            let m = clamp_into(
                laws::total_mass_from_angular(g.a, plx, p),
                priors.total_mass_msun.support(),
            );
            cand.orbit.parallax_mas = Some(plx);
            cand.orbit.total_mass_msun = Some(m);
        }
        if let Ok(x) = layout.from_physical(&cand) {
            out.push(x);
        }
    }
}

/// Applies a user's starting guess over a physical parameter set.
fn apply_guess(p: &mut PhysicalParameters, g: &StartValues) {
    let o = &mut p.orbit;
    let set = |slot: &mut f64, v: Option<f64>| {
        if let Some(v) = v {
            *slot = v;
        }
    };
    set(&mut o.period_days, g.period_days);
    set(&mut o.eccentricity, g.eccentricity);
    set(&mut o.omega_rad, g.omega_rad);
    set(&mut o.t_peri_jd, g.t_peri_jd);
    let set_opt = |slot: &mut Option<f64>, v: Option<f64>| {
        if v.is_some() && slot.is_some() {
            *slot = v;
        }
    };
    set_opt(&mut o.inclination_rad, g.inclination_rad);
    set_opt(&mut o.node_rad, g.node_rad);
    set_opt(&mut o.total_mass_msun, g.total_mass_msun);
    set_opt(&mut o.parallax_mas, g.parallax_mas);
    set_opt(&mut o.mass_ratio, g.mass_ratio);
}

/// Minimises `f` by the simplex method of Nelder & Mead (1965) with the
/// usual coefficients (reflection 1, expansion 2, contraction 1/2,
/// shrink 1/2), from `x0` with initial steps `steps`.
pub fn nelder_mead(
    f: &dyn Fn(&[f64]) -> f64,
    x0: &[f64],
    steps: &[f64],
    max_evaluations: usize,
) -> (Vec<f64>, f64) {
    let n = x0.len();
    if n == 0 {
        return (x0.to_vec(), f(x0));
    }
    let mut simplex: Vec<Vec<f64>> = Vec::with_capacity(n + 1);
    simplex.push(x0.to_vec());
    for i in 0..n {
        let mut v = x0.to_vec();
        v[i] += steps[i];
        simplex.push(v);
    }
    let mut values: Vec<f64> = simplex.iter().map(|v| f(v)).collect();
    let mut evaluations = n + 1;
    let mut centroid = vec![0.0; n];
    let mut trial = vec![0.0; n];
    let mut trial2 = vec![0.0; n];
    while evaluations < max_evaluations {
        // Order: best first.
        let mut order: Vec<usize> = (0..=n).collect();
        order.sort_by(|&a, &b| values[a].total_cmp(&values[b]));
        simplex = order.iter().map(|&i| simplex[i].clone()).collect();
        values = order.iter().map(|&i| values[i]).collect();
        let (best, worst) = (values[0], values[n]);
        if best.is_finite() && (worst - best).abs() <= 1e-10 * (1.0 + best.abs()) {
            break;
        }
        centroid.iter_mut().for_each(|c| *c = 0.0);
        for v in &simplex[..n] {
            for (c, x) in centroid.iter_mut().zip(v) {
                *c += x / n as f64;
            }
        }
        let along = |t: &mut Vec<f64>, coef: f64, simplex: &Vec<Vec<f64>>| {
            for j in 0..n {
                t[j] = centroid[j] + coef * (simplex[n][j] - centroid[j]);
            }
        };
        along(&mut trial, -1.0, &simplex);
        let fr = f(&trial);
        evaluations += 1;
        if fr < values[0] {
            along(&mut trial2, -2.0, &simplex);
            let fe = f(&trial2);
            evaluations += 1;
            if fe < fr {
                simplex[n].clone_from(&trial2);
                values[n] = fe;
            } else {
                simplex[n].clone_from(&trial);
                values[n] = fr;
            }
        } else if fr < values[n - 1] {
            simplex[n].clone_from(&trial);
            values[n] = fr;
        } else {
            // Contraction: outside if the reflection helped, else inside.
            let coef = if fr < values[n] { -0.5 } else { 0.5 };
            along(&mut trial2, coef, &simplex);
            let fc = f(&trial2);
            evaluations += 1;
            if fc < values[n].min(fr) {
                simplex[n].clone_from(&trial2);
                values[n] = fc;
            } else {
                let (best, rest) = simplex.split_at_mut(1);
                for (vertex, value) in rest.iter_mut().zip(values[1..].iter_mut()) {
                    for (v, b) in vertex.iter_mut().zip(&best[0]) {
                        *v = b + 0.5 * (*v - b);
                    }
                    *value = f(vertex);
                }
                evaluations += n;
            }
        }
    }
    let best = (0..=n)
        .min_by(|&a, &b| values[a].total_cmp(&values[b]))
        .unwrap_or(0);
    (simplex[best].clone(), values[best])
}

/// Initial simplex steps per coordinate, by name.
fn simplex_steps(model: &Model, x: &[f64]) -> Vec<f64> {
    model
        .parameter_names()
        .iter()
        .zip(x)
        .map(|(name, v)| {
            if name == "ln_period_days" {
                2e-3
            } else if name.starts_with("offset_kms") {
                0.3
            } else if name == "parallax_mas" {
                0.02 * v.abs().max(0.1)
            } else {
                0.03
            }
        })
        .collect()
}

/// Finds starting points: returns distinct modes, best first (at least one
/// if any candidate has a finite log-posterior). `guess` (from the
/// configuration's `[start]`) is tried besides the candidates.
pub fn find_starting_points(
    model: &Model,
    settings: &StartSettings,
    guess: Option<&StartValues>,
) -> Vec<StartPoint> {
    let layout = model.layout();
    let dim = model.dim();
    let period_index = layout.period_index();
    let (p_lo, p_hi) = layout.priors().period_days.support();
    let stratified = p_lo > 0.0 && p_hi.is_finite();
    let mut scored: Vec<StartPoint> = Vec::new();
    let mut variants = Vec::new();
    let n = settings.candidates.max(1);
    for j in 0..=n {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(mix_seed(settings.seed, j as u64));
        let mut x = layout.sample_prior(&mut rng);
        if j < n && stratified {
            if let Some(i) = period_index {
                let u: f64 = rng.gen();
                x[i] = p_lo.ln() + (j as f64 + u) / n as f64 * (p_hi.ln() - p_lo.ln());
            }
        }
        let Some(mut physical) = layout.to_physical(&x) else {
            continue;
        };
        if j == n {
            // The last candidate is the user's guess, if any.
            match guess {
                Some(g) if !g.is_empty() => apply_guess(&mut physical, g),
                _ => continue,
            }
            if let Ok(y) = layout.from_physical(&physical) {
                x = y;
            }
        }
        variants.clear();
        variants.push(x);
        linear_variants(model, &physical, &mut variants);
        for v in variants.drain(..) {
            let lp = model.log_posterior(&v);
            if lp.is_finite() {
                scored.push(StartPoint {
                    x: v,
                    log_posterior: lp,
                });
            }
        }
    }
    scored.sort_by(|a, b| b.log_posterior.total_cmp(&a.log_posterior));
    // Pick the best candidates with distinct periods.
    let ln_p = |x: &[f64]| layout.orbital(x).map_or(f64::NAN, |o| o.period_days.ln());
    let mut chosen: Vec<StartPoint> = Vec::new();
    for c in scored {
        if chosen.len() >= settings.polished.max(1) {
            break;
        }
        let lp = ln_p(&c.x);
        if chosen.iter().all(|d| (ln_p(&d.x) - lp).abs() > 0.02) {
            chosen.push(c);
        }
    }
    let f = |x: &[f64]| {
        let v = -model.log_posterior(x);
        if v.is_nan() {
            f64::INFINITY
        } else {
            v
        }
    };
    let mut polished: Vec<StartPoint> = Vec::with_capacity(chosen.len());
    for c in chosen {
        let mut x = c.x;
        let mut value = -c.log_posterior;
        let mut steps = simplex_steps(model, &x);
        for _round in 0..3 {
            let (y, v) = nelder_mead(&f, &x, &steps, settings.max_evaluations);
            if v <= value {
                x = y;
                value = v;
            }
            steps.iter_mut().for_each(|s| *s *= 0.3);
        }
        if dim > 0 && value.is_finite() {
            polished.push(StartPoint {
                x,
                log_posterior: -value,
            });
        }
    }
    polished.sort_by(|a, b| b.log_posterior.total_cmp(&a.log_posterior));
    // Merge modes with the same period (within 1 per cent).
    let mut modes: Vec<StartPoint> = Vec::new();
    let top = polished
        .first()
        .map_or(f64::NEG_INFINITY, |p| p.log_posterior);
    for p in polished {
        if p.log_posterior < top - settings.max_drop {
            break;
        }
        let lp = ln_p(&p.x);
        if modes.iter().all(|m| (ln_p(&m.x) - lp).abs() > 0.01) {
            modes.push(p);
        }
        if modes.len() >= settings.max_modes.max(1) {
            break;
        }
    }
    modes
}
