//! The log-density the sampler explores.

/// A target density, split into prior and likelihood so that tempered
/// chains can scale the likelihood alone (target = log_prior + beta * log_likelihood).
///
/// Both functions return natural logarithms. A log-prior of `-inf` (or NaN)
/// marks a point outside the support; the sampler then never evaluates the
/// likelihood there. A log-likelihood of `-inf` or NaN rejects the point at
/// every temperature, including beta = 0 (the power posterior
/// p(x) L(x)^beta vanishes wherever L does for every beta > 0, and beta = 0 is
/// taken as that limit).
///
/// Implementations are called from several threads at once, so they must be
/// `Send + Sync` and should not rely on interior mutability for their result.
pub trait LogDensity: Send + Sync {
    /// Number of parameters.
    fn dim(&self) -> usize;
    /// Log prior density (up to a constant, unless evidence is wanted, in which
    /// case it must be normalised).
    fn log_prior(&self, x: &[f64]) -> f64;
    /// Log likelihood; only called where the log prior is finite.
    fn log_likelihood(&self, x: &[f64]) -> f64;
}

/// Adapter that turns two closures into a [`LogDensity`] (handy in tests and
/// small programs).
///
/// ```
/// use dyad_sampler::{FnDensity, LogDensity};
/// let gauss = FnDensity::new(2, |_x: &[f64]| 0.0, |x: &[f64]| -0.5 * (x[0] * x[0] + x[1] * x[1]));
/// assert_eq!(gauss.dim(), 2);
/// assert_eq!(gauss.log_likelihood(&[0.0, 0.0]), 0.0);
/// ```
#[derive(Clone, Debug)]
pub struct FnDensity<P, L> {
    dim: usize,
    prior: P,
    likelihood: L,
}

impl<P, L> FnDensity<P, L>
where
    P: Fn(&[f64]) -> f64 + Send + Sync,
    L: Fn(&[f64]) -> f64 + Send + Sync,
{
    /// Wraps a log-prior closure and a log-likelihood closure over `dim` parameters.
    pub fn new(dim: usize, prior: P, likelihood: L) -> Self {
        Self {
            dim,
            prior,
            likelihood,
        }
    }
}

impl<P, L> LogDensity for FnDensity<P, L>
where
    P: Fn(&[f64]) -> f64 + Send + Sync,
    L: Fn(&[f64]) -> f64 + Send + Sync,
{
    fn dim(&self) -> usize {
        self.dim
    }
    fn log_prior(&self, x: &[f64]) -> f64 {
        (self.prior)(x)
    }
    fn log_likelihood(&self, x: &[f64]) -> f64 {
        (self.likelihood)(x)
    }
}

/// Adapter for a single log-density closure with a flat (improper, constant)
/// prior: the whole density is treated as likelihood. Useful for untempered
/// runs and tests; do not use it for evidence.
#[derive(Clone, Debug)]
pub struct FnLogPdf<F> {
    dim: usize,
    log_pdf: F,
}

impl<F> FnLogPdf<F>
where
    F: Fn(&[f64]) -> f64 + Send + Sync,
{
    /// Wraps `log_pdf` over `dim` parameters. Return `-inf` outside the support.
    pub fn new(dim: usize, log_pdf: F) -> Self {
        Self { dim, log_pdf }
    }
}

impl<F> LogDensity for FnLogPdf<F>
where
    F: Fn(&[f64]) -> f64 + Send + Sync,
{
    fn dim(&self) -> usize {
        self.dim
    }
    fn log_prior(&self, _x: &[f64]) -> f64 {
        0.0
    }
    fn log_likelihood(&self, x: &[f64]) -> f64 {
        (self.log_pdf)(x)
    }
}
