//! In-memory measurements, in dyad's internal units: times as Julian Dates,
//! angles in radians, separations and offsets in milliarcseconds, velocities
//! in km/s. Loading from CSV lives in `load`; these are the validated values.

/// How one astrometric epoch was measured (and hence how its residual is formed).
#[derive(Debug, Clone, PartialEq)]
pub enum RelativePosition {
    /// Separation rho (mas) and position angle theta (rad, North through East, in [0, 2 pi)).
    Polar {
        /// Separation, mas.
        sep_mas: f64,
        /// 1-sigma error of the separation, mas (> 0).
        sep_err_mas: f64,
        /// Position angle, radians.
        pa_rad: f64,
        /// 1-sigma error of the position angle, radians (> 0).
        pa_err_rad: f64,
        /// Correlation of the separation and position-angle errors, in (-1, 1).
        corr: f64,
    },
    /// Offsets dRA* = dRA cos Dec (east) and dDec (north), mas.
    Cartesian {
        /// dRA*, mas.
        dra_mas: f64,
        /// dDec, mas.
        ddec_mas: f64,
        /// 1-sigma error of dRA*, mas (> 0).
        dra_err_mas: f64,
        /// 1-sigma error of dDec, mas (> 0).
        ddec_err_mas: f64,
        /// Correlation of the dRA* and dDec errors, in (-1, 1).
        corr: f64,
    },
}

/// One relative-astrometry epoch: secondary relative to primary.
#[derive(Debug, Clone, PartialEq)]
pub struct AstrometryEpoch {
    /// Epoch, Julian Date.
    pub t_jd: f64,
    /// The measurement.
    pub position: RelativePosition,
    /// Free-text provenance, if given.
    pub source: Option<String>,
}

/// Which star a radial velocity belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Star {
    /// The primary (more massive, or brighter, by the user's labelling).
    Primary,
    /// The secondary (the companion whose relative position is measured).
    Secondary,
}

/// One radial-velocity measurement.
#[derive(Debug, Clone, PartialEq)]
pub struct VelocityPoint {
    /// Epoch, Julian Date.
    pub t_jd: f64,
    /// Radial velocity, km/s, positive receding.
    pub rv_kms: f64,
    /// 1-sigma error, km/s (> 0).
    pub rv_err_kms: f64,
    /// The star measured.
    pub star: Star,
    /// Index into `Dataset::instruments`.
    pub instrument: usize,
}

/// Everything measured of one binary.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Dataset {
    /// Relative astrometry, in file order.
    pub astrometry: Vec<AstrometryEpoch>,
    /// Radial velocities, in file order.
    pub velocities: Vec<VelocityPoint>,
    /// Instrument names, in order of first appearance; each gets an offset and a jitter.
    pub instruments: Vec<String>,
}
