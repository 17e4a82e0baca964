//! The per-source astrometric error model: which quoted errors the data
//! may rescale or widen, and by what distribution the residuals scatter.
//!
//! Real astrometry mixes sources (micrometer, photographic, speckle,
//! adaptive optics, space) whose quoted errors can be wrong by factors of
//! several. Each value of the `source` column (one group when the column is
//! absent) can get
//!
//! - an error-scale factor s (both quoted errors of the pair times s, so the
//!   covariance times s^2), and/or
//! - a jitter j in mas added in quadrature, isotropic on the sky: to both
//!   offsets of a Cartesian epoch, and to a polar epoch's separation (j) and
//!   position angle (j / rho_obs radians, rho_obs the measured separation).
//!
//! The covariance of an epoch is then C = s^2 C_quoted + j^2 diag(1, g)
//! with g = 1 / rho_obs^2 (polar) or 1 (Cartesian). The residual r
//! (docs/DESIGN.md, as in [`crate::likelihood`]) follows either
//!
//! - the bivariate normal, ln p = -ln(2 pi) - 0.5 ln det C - 0.5 Q, or
//! - the bivariate Student t with nu degrees of freedom and scale matrix C
//!   (Lange, Little & Taylor 1989, JASA 84, 881, eq. 1 with p = 2, where
//!   Gamma((nu + 2)/2) / (Gamma(nu/2) nu pi) = 1 / (2 pi)):
//!   ln p = -ln(2 pi) - 0.5 ln det C - (nu + 2)/2 ln(1 + Q / nu),
//!
//! with Q = r^T C^-1 r. Both are normalised densities of the residual, so
//! evidences stay meaningful. The t's weight of an epoch in the fit,
//! (nu + 2) / (nu + Q) (the weight of its iteratively reweighted
//! least-squares form, Lange et al. 1989 sec. 3), is 1 for a typical epoch
//! and small for an outlier.
//!
//! The default ("errors as given") samples nothing and leaves the
//! likelihood exactly as it was: s = 1, j = 0, normal.

use rand::Rng;

use crate::data::Dataset;
use crate::error::ModelError;
use crate::params::{Builder, ScaledPrior};
use crate::prior::Prior;

/// The distribution of the astrometric residuals.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ResidualDistribution {
    /// Bivariate normal.
    Normal,
    /// Bivariate Student t; the prior (or fixed value) of the degrees of freedom.
    StudentT(ScaledPrior),
}

/// Degrees of freedom of the Student t when none are given: 4, a common
/// robust choice (used by Lange, Little & Taylor 1989; from memory).
pub const DEFAULT_DEGREES_OF_FREEDOM: f64 = 4.0;

/// Priors of the astrometric error model, per source (index of
/// [`astrometry_sources`]).
#[derive(Debug, Clone, PartialEq)]
pub struct AstrometryErrorPriors {
    /// Error-scale factor per source (fixed at 1 by default).
    pub scale: Vec<ScaledPrior>,
    /// Added jitter per source, mas (fixed at 0 by default).
    pub jitter_mas: Vec<ScaledPrior>,
    /// The residual distribution.
    pub distribution: ResidualDistribution,
}

fn fixed(v: f64) -> ScaledPrior {
    ScaledPrior::internal(Prior::fixed(v).expect("a finite constant is a valid fixed prior"))
}

impl AstrometryErrorPriors {
    /// Errors as given: scale 1, no jitter, normal, for every source.
    pub fn as_given(sources: usize) -> Self {
        Self {
            scale: vec![fixed(1.0); sources],
            jitter_mas: vec![fixed(0.0); sources],
            distribution: ResidualDistribution::Normal,
        }
    }

    /// Whether the errors are used exactly as quoted.
    pub fn is_as_given(&self) -> bool {
        self.distribution == ResidualDistribution::Normal
            && self.scale.iter().all(|p| p.fixed_value() == Some(1.0))
            && self.jitter_mas.iter().all(|p| p.fixed_value() == Some(0.0))
    }
}

/// Name of the one group of astrometric epochs that have no `source`.
pub const UNNAMED_SOURCE: &str = "unnamed";

/// The astrometric sources of a data set in order of first appearance,
/// and each epoch's index into them. Epochs without a source form one
/// group, [`UNNAMED_SOURCE`].
pub fn astrometry_sources(dataset: &Dataset) -> (Vec<String>, Vec<usize>) {
    let mut names: Vec<String> = Vec::new();
    let index = dataset
        .astrometry
        .iter()
        .map(|e| {
            let name = e.source.as_deref().unwrap_or(UNNAMED_SOURCE);
            match names.iter().position(|n| n == name) {
                Some(k) => k,
                None => {
                    names.push(name.to_owned());
                    names.len() - 1
                }
            }
        })
        .collect();
    (names, index)
}

/// Where the error-model parameters sit in the sampled vector: a block of
/// its own after the velocity jitters.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct ErrorBlock {
    scale: Vec<crate::params::Coord>,
    jitter: Vec<crate::params::Coord>,
    dof: Option<crate::params::Coord>,
    priors: AstrometryErrorPriors,
}

impl ErrorBlock {
    /// Adds the sampled coordinates (`ln_error_scale[NAME]`,
    /// `ln_astrometric_jitter_mas[NAME]`, `ln_degrees_of_freedom`).
    pub(crate) fn new(
        b: &mut Builder,
        names: &[String],
        priors: &AstrometryErrorPriors,
    ) -> Result<Self, ModelError> {
        if priors.scale.len() != names.len() || priors.jitter_mas.len() != names.len() {
            return Err(ModelError::InvalidModel(format!(
                "{} astrometric sources but {} scale and {} jitter priors",
                names.len(),
                priors.scale.len(),
                priors.jitter_mas.len()
            )));
        }
        let positive = |p: &ScaledPrior, what: &str, allow_zero: bool| {
            let (lo, hi) = p.support();
            let ok = match p.fixed_value() {
                Some(v) => v > 0.0 || (allow_zero && v == 0.0),
                None => hi > 0.0 && lo >= 0.0,
            };
            if ok {
                Ok(())
            } else {
                Err(ModelError::InvalidPrior(format!(
                    "the prior on {what} ({}) must lie in [0, inf){}",
                    p.prior().describe(),
                    if allow_zero {
                        ""
                    } else {
                        " and exclude 0 when fixed"
                    }
                )))
            }
        };
        let mut scale = Vec::with_capacity(names.len());
        for (p, name) in priors.scale.iter().zip(names) {
            positive(p, &format!("the error scale of source '{name}'"), false)?;
            scale.push(b.scalar(p, true, &format!("ln_error_scale[{name}]"), "ln(1)"));
        }
        let mut jitter = Vec::with_capacity(names.len());
        for (p, name) in priors.jitter_mas.iter().zip(names) {
            positive(
                p,
                &format!("the astrometric jitter of source '{name}'"),
                true,
            )?;
            jitter.push(b.scalar(
                p,
                true,
                &format!("ln_astrometric_jitter_mas[{name}]"),
                "ln(mas)",
            ));
        }
        let dof = match &priors.distribution {
            ResidualDistribution::Normal => None,
            ResidualDistribution::StudentT(p) => {
                positive(p, "the degrees of freedom", false)?;
                Some(b.scalar(p, true, "ln_degrees_of_freedom", "ln(1)"))
            }
        };
        Ok(Self {
            scale,
            jitter,
            dof,
            priors: priors.clone(),
        })
    }

    /// The priors the block was built with.
    pub(crate) fn priors(&self) -> &AstrometryErrorPriors {
        &self.priors
    }

    /// Error scale of source `k`.
    #[inline]
    pub(crate) fn scale(&self, x: &[f64], k: usize) -> f64 {
        self.scale[k].value(x)
    }

    /// Jitter of source `k`, mas.
    #[inline]
    pub(crate) fn jitter_mas(&self, x: &[f64], k: usize) -> f64 {
        self.jitter[k].value(x)
    }

    /// Degrees of freedom of the t (None: normal residuals).
    #[inline]
    pub(crate) fn degrees_of_freedom(&self, x: &[f64]) -> Option<f64> {
        self.dof.map(|c| c.value(x))
    }

    /// Calls `term` with each prior term of the block.
    pub(crate) fn for_each_prior_term(&self, x: &[f64], term: &mut impl FnMut(&'static str, f64)) {
        for (c, p) in self.scale.iter().zip(&self.priors.scale) {
            term("error scale", c.ln_prior(x, p));
        }
        for (c, p) in self.jitter.iter().zip(&self.priors.jitter_mas) {
            term("astrometric jitter", c.ln_prior(x, p));
        }
        if let (Some(c), ResidualDistribution::StudentT(p)) = (self.dof, &self.priors.distribution)
        {
            term("degrees of freedom", c.ln_prior(x, p));
        }
    }

    /// Draws the block's coordinates from the prior.
    pub(crate) fn sample_prior<R: Rng + ?Sized>(
        &self,
        rng: &mut R,
        x: &mut [f64],
        draw: &impl Fn(&mut R, &ScaledPrior, f64, f64) -> f64,
    ) {
        let coords = self.coords_and_priors();
        for (c, p) in coords {
            if let Some(i) = c.log_index() {
                x[i] = draw(rng, p, f64::MIN_POSITIVE, f64::INFINITY).ln();
            }
        }
    }

    /// Sets the block's coordinates to a typical value of each prior (1 for
    /// a scale whose prior allows it, else the geometric middle of the
    /// support or the mean): physical parameter sets do not carry them.
    pub(crate) fn set_typical(&self, x: &mut [f64]) {
        for (c, p) in self.coords_and_priors() {
            if let Some(i) = c.log_index() {
                x[i] = typical_value(p).ln();
            }
        }
        for (c, p) in self.scale.iter().zip(&self.priors.scale) {
            if let (Some(i), true) = (c.log_index(), p.contains(1.0)) {
                x[i] = 0.0;
            }
        }
    }

    fn coords_and_priors(&self) -> Vec<(crate::params::Coord, &ScaledPrior)> {
        let mut out: Vec<_> = self
            .scale
            .iter()
            .copied()
            .zip(&self.priors.scale)
            .chain(self.jitter.iter().copied().zip(&self.priors.jitter_mas))
            .collect();
        if let (Some(c), ResidualDistribution::StudentT(p)) = (self.dof, &self.priors.distribution)
        {
            out.push((c, p));
        }
        out
    }
}

/// A typical positive value of a prior: the geometric middle of a bounded
/// positive support, else the mean (or 1).
fn typical_value(p: &ScaledPrior) -> f64 {
    let (lo, hi) = p.support();
    let v = if lo > 0.0 && hi.is_finite() {
        (lo * hi).sqrt()
    } else {
        p.mean()
    };
    if v > 0.0 && v.is_finite() {
        v
    } else {
        1.0
    }
}
