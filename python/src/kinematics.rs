//! Positions and velocities for given elements, vectorised over NumPy
//! arrays, computed by `dyad-orbit` exactly as the fits compute them.
//!
//! Every element is an array of one value (the same orbit at every epoch)
//! or of one value per epoch. With one orbit the epochs go through
//! [`Orbit::for_each_block`] (the batch Kepler solver, bit for bit the
//! single-epoch values); otherwise every epoch gets its own [`Orbit`].
//! Angles are degrees, converted by `f64::to_radians`.

use dyad_orbit::kepler::LANES;
use dyad_orbit::{BlockVisitor, CampbellElements, Orbit};
use numpy::PyArray1;
use pyo3::prelude::*;

use crate::convert::{numbers, Numbers};
use crate::errors::bad;

/// Two arrays of the same length: (dRA*, dDec) or (v1, v2).
type ArrayPair<'py> = (Bound<'py, PyArray1<f64>>, Bound<'py, PyArray1<f64>>);

/// Epochs from which the GIL is released while computing (below, the
/// release costs more than it frees).
const RELEASE_GIL_FROM: usize = 4096;

/// The element arrays of one call, checked for length.
struct Elements<'a> {
    names: &'a [&'a str],
    values: Vec<&'a [f64]>,
}

impl Elements<'_> {
    /// Whether every element is a single value.
    fn one_orbit(&self) -> bool {
        self.values.iter().all(|v| v.len() == 1)
    }

    /// Element `k` at epoch `i`.
    fn at(&self, k: usize, i: usize) -> f64 {
        let v = self.values[k];
        if v.len() == 1 {
            v[0]
        } else {
            v[i]
        }
    }
}

/// Checks that every element array has one value or one per epoch, all finite.
fn check_elements(names: &[&str], values: &[&[f64]], epochs: usize) -> PyResult<()> {
    for (name, v) in names.iter().zip(values) {
        if let Some(i) = v.iter().position(|x| !x.is_finite()) {
            let place = if v.len() == 1 {
                name.to_string()
            } else {
                format!("{name}[{i}]")
            };
            return Err(bad(place, format!("{} is not a finite number", v[i])));
        }
        if v.len() != 1 && v.len() != epochs {
            return Err(bad(
                name,
                format!(
                    "has {} values; give one value, or one per epoch ({epochs})",
                    v.len()
                ),
            ));
        }
    }
    Ok(())
}

/// The index of the first non-finite epoch, if any.
fn check_epochs(t: &[f64]) -> PyResult<()> {
    match t.iter().position(|x| !x.is_finite()) {
        Some(i) => Err(bad(
            format!("t_jd[{i}]"),
            format!("{} is not a finite epoch", t[i]),
        )),
        None => Ok(()),
    }
}

/// The orbit of elements (P, T, e, a, i, omega, Omega) in file units; an
/// invalid one is a `ValueError` naming the element and the index.
fn orbit(names: &[&str], [p, t, e, a, i, w, n]: [f64; 7], index: Option<usize>) -> PyResult<Orbit> {
    let el = CampbellElements {
        period_days: p,
        t_peri_jd: t,
        e,
        a,
        inc_rad: i.to_radians(),
        omega_rad: w.to_radians(),
        node_rad: n.to_radians(),
    };
    Orbit::new(&el).map_err(|err| {
        // Name the first element that is not valid.
        let which = if !(p.is_finite() && p > 0.0) {
            0
        } else if !(0.0..1.0).contains(&e) {
            2
        } else if !(a.is_finite() && a > 0.0) {
            3
        } else {
            [1, 4, 5, 6]
                .into_iter()
                .find(|&k| ![p, t, e, a, i, w, n][k].is_finite())
                .unwrap_or(0)
        };
        let place = match index {
            Some(i) => format!("{}[{i}]", names[which]),
            None => names[which].to_owned(),
        };
        bad(place, err)
    })
}

/// Fills `dra`, `ddec` (positions) or `v1`, `v2` (velocities) from one orbit.
struct Fill<'a> {
    orbit: &'a Orbit,
    out: [&'a mut [f64]; 2],
    /// `Some((gamma, k1, k2))` for velocities, `None` for positions.
    velocity: Option<(f64, f64, f64)>,
}

impl BlockVisitor for Fill<'_> {
    #[inline(always)]
    fn visit(&mut self, first: usize, sin_e: &[f64; LANES], cos_e: &[f64; LANES]) {
        let end = (first + LANES).min(self.out[0].len());
        let [x, y] = &mut self.out;
        for k in 0..end - first {
            let (a, b) = match self.velocity {
                None => {
                    let s = self.orbit.sky_offset_from_sin_cos(sin_e[k], cos_e[k]);
                    (s.dra, s.ddec)
                }
                Some((gamma, k1, k2)) => {
                    let shape = self.orbit.rv_shape_from_sin_cos(sin_e[k], cos_e[k]);
                    dyad_orbit::velocity::velocities_from_semi_amplitudes(gamma, k1, k2, shape)
                }
            };
            x[first + k] = a;
            y[first + k] = b;
        }
    }
}

/// The two output arrays for `t` and the elements, velocity factors
/// `(gamma, k1, k2)` at index 7..10 of `elements` when `velocity`.
fn evaluate(t: &[f64], elements: &Elements<'_>, velocity: bool) -> PyResult<(Vec<f64>, Vec<f64>)> {
    let n = t.len();
    let mut x = vec![0.0; n];
    let mut y = vec![0.0; n];
    let seven = |i: usize| std::array::from_fn(|k| elements.at(k, i));
    let factors = |i: usize| (elements.at(7, i), elements.at(8, i), elements.at(9, i));
    if elements.one_orbit() {
        let orbit = orbit(elements.names, seven(0), None)?;
        let mut fill = Fill {
            orbit: &orbit,
            out: [&mut x, &mut y],
            velocity: velocity.then(|| factors(0)),
        };
        orbit.for_each_block(t, &mut fill);
    } else {
        for i in 0..n {
            let orbit = orbit(elements.names, seven(i), Some(i))?;
            let state = orbit.state(t[i]);
            (x[i], y[i]) = if velocity {
                let (gamma, k1, k2) = factors(i);
                dyad_orbit::velocity::velocities_from_semi_amplitudes(gamma, k1, k2, state.rv_shape)
            } else {
                (state.dra, state.ddec)
            };
        }
    }
    Ok((x, y))
}

/// Reads the arguments, checks them and evaluates, releasing the GIL for
/// many epochs.
fn kinematics<'py>(
    py: Python<'py>,
    t_jd: &Bound<'py, PyAny>,
    names: &[&str],
    args: &[&Bound<'py, PyAny>],
    velocity: bool,
) -> PyResult<ArrayPair<'py>> {
    let t = numbers("t_jd", t_jd)?;
    let arrays: Vec<Numbers<'py>> = names
        .iter()
        .zip(args)
        .map(|(name, value)| numbers(name, value))
        .collect::<PyResult<_>>()?;
    let t = t.as_slice()?;
    let values: Vec<&[f64]> = arrays
        .iter()
        .map(Numbers::as_slice)
        .collect::<PyResult<_>>()?;
    check_epochs(t)?;
    check_elements(names, &values, t.len())?;
    let elements = Elements { names, values };
    let (x, y) = if t.len() >= RELEASE_GIL_FROM {
        py.detach(|| evaluate(t, &elements, velocity).map_err(|e| e.to_string()))
            .map_err(pyo3::exceptions::PyValueError::new_err)?
    } else {
        evaluate(t, &elements, velocity)?
    };
    Ok((PyArray1::from_vec(py, x), PyArray1::from_vec(py, y)))
}

/// The Campbell elements, in the order [`orbit`] takes them.
const ELEMENTS: [&str; 7] = [
    "period_days",
    "t_peri_jd",
    "eccentricity",
    "semi_major_axis",
    "inclination_deg",
    "omega_deg",
    "node_deg",
];

/// Offsets (dRA*, dDec) of the secondary from the primary, in the unit of
/// `semi_major_axis`, at the epochs `t_jd`.
#[pyfunction]
#[allow(clippy::too_many_arguments)]
pub(crate) fn positions<'py>(
    py: Python<'py>,
    t_jd: Bound<'py, PyAny>,
    period_days: Bound<'py, PyAny>,
    t_peri_jd: Bound<'py, PyAny>,
    eccentricity: Bound<'py, PyAny>,
    semi_major_axis: Bound<'py, PyAny>,
    inclination_deg: Bound<'py, PyAny>,
    omega_deg: Bound<'py, PyAny>,
    node_deg: Bound<'py, PyAny>,
) -> PyResult<ArrayPair<'py>> {
    let args = [
        &period_days,
        &t_peri_jd,
        &eccentricity,
        &semi_major_axis,
        &inclination_deg,
        &omega_deg,
        &node_deg,
    ];
    kinematics(py, &t_jd, &ELEMENTS, &args, false)
}

/// Radial velocities (primary, secondary) in km/s at the epochs `t_jd`.
#[pyfunction]
#[allow(clippy::too_many_arguments)]
pub(crate) fn velocities<'py>(
    py: Python<'py>,
    t_jd: Bound<'py, PyAny>,
    period_days: Bound<'py, PyAny>,
    t_peri_jd: Bound<'py, PyAny>,
    eccentricity: Bound<'py, PyAny>,
    omega_deg: Bound<'py, PyAny>,
    k1_kms: Bound<'py, PyAny>,
    k2_kms: Bound<'py, PyAny>,
    gamma_kms: Bound<'py, PyAny>,
) -> PyResult<ArrayPair<'py>> {
    // The velocity shape does not depend on a, i or Omega: fixed values
    // make a valid orbit.
    let one = pyo3::types::PyFloat::new(py, 1.0).into_any();
    let zero = pyo3::types::PyFloat::new(py, 0.0).into_any();
    let [p, t, e, a, i, w, n] = ELEMENTS;
    let names = [p, t, e, a, i, w, n, "gamma_kms", "k1_kms", "k2_kms"];
    let args = [
        &period_days,
        &t_peri_jd,
        &eccentricity,
        &one,
        &zero,
        &omega_deg,
        &zero,
        &gamma_kms,
        &k1_kms,
        &k2_kms,
    ];
    kinematics(py, &t_jd, &names, &args, true)
}
