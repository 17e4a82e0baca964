//! Shared helpers for the physics tests.

use dyad_model::data::{AstrometryEpoch, Dataset, RelativePosition, Star, VelocityPoint};
use dyad_model::params::{OrbitalParameters, PhysicalParameters};

/// A small joint data set: two polar and two Cartesian epochs, velocities of
/// both stars from two instruments. Values are arbitrary placeholders; tests
/// that need consistent data overwrite them.
pub fn small_joint_dataset() -> Dataset {
    let polar = |t: f64, sep: f64, pa_deg: f64| AstrometryEpoch {
        t_jd: t,
        position: RelativePosition::Polar {
            sep_mas: sep,
            sep_err_mas: 2.0,
            pa_rad: pa_deg.to_radians(),
            pa_err_rad: 0.5f64.to_radians(),
            corr: 0.0,
        },
        source: None,
    };
    let cart = |t: f64, dra: f64, ddec: f64| AstrometryEpoch {
        t_jd: t,
        position: RelativePosition::Cartesian {
            dra_mas: dra,
            ddec_mas: ddec,
            dra_err_mas: 1.5,
            ddec_err_mas: 2.5,
            corr: 0.3,
        },
        source: None,
    };
    let rv = |t: f64, v: f64, star: Star, instrument: usize| VelocityPoint {
        t_jd: t,
        rv_kms: v,
        rv_err_kms: 0.3,
        star,
        instrument,
    };
    Dataset {
        astrometry: vec![
            polar(2_450_000.0, 120.0, 30.0),
            polar(2_451_000.0, 150.0, 80.0),
            cart(2_452_000.0, 100.0, -40.0),
            cart(2_453_000.0, 20.0, -90.0),
        ],
        velocities: vec![
            rv(2_450_100.0, 3.0, Star::Primary, 0),
            rv(2_450_900.0, -2.0, Star::Secondary, 0),
            rv(2_451_500.0, 1.0, Star::Primary, 1),
            rv(2_452_500.0, -4.0, Star::Secondary, 1),
        ],
        instruments: vec!["north".into(), "south".into()],
    }
}

/// Physical parameters of an invented joint orbit (P = 3000 d).
pub fn invented_physical() -> PhysicalParameters {
    PhysicalParameters {
        orbit: OrbitalParameters {
            period_days: 3000.0,
            eccentricity: 0.4,
            omega_rad: 1.1,
            mean_longitude_rad: 0.0, // not read by from_physical
            t_peri_jd: 2_451_200.0,
            inclination_rad: Some(0.9),
            node_rad: Some(2.2),
            total_mass_msun: Some(2.5),
            parallax_mas: Some(40.0),
            semi_major_axis_au: None,
            semi_major_axis_mas: None,
            mass_ratio: Some(0.7),
            k1_kms: None,
            k2_kms: None,
        },
        offsets_kms: vec![12.0, 12.8],
        jitters_kms: vec![0.2, 0.5],
    }
}
