//! The verdicts of a calibration and their table (`calibration.txt`).

use serde::Serialize;

use super::statistics::Coverage;

/// The calibration verdict of one quantity.
#[derive(Debug, Clone, Serialize)]
pub(super) struct ParameterVerdict {
    pub(super) parameter: String,
    pub(super) systems: usize,
    pub(super) chi_square: f64,
    pub(super) degrees_of_freedom: usize,
    pub(super) p_value: f64,
    pub(super) counts: Vec<usize>,
    pub(super) expected: Vec<f64>,
    pub(super) coverage_68: Coverage,
    pub(super) coverage_95: Coverage,
    /// chi-square p > 0.01 and both coverages within 2 standard errors.
    pub(super) passes: bool,
}

#[derive(Debug, Clone, Serialize)]
pub(super) struct Summary {
    pub(super) settings: String,
    pub(super) seed: u64,
    pub(super) systems: usize,
    pub(super) fitted: usize,
    pub(super) failed: usize,
    pub(super) hit_step_cap: usize,
    /// Fits with fewer roughly independent draws than L (their L draws are
    /// then correlated, which piles ranks up at the ends).
    pub(super) short_of_independent_draws: usize,
    pub(super) draws_per_system: usize,
    pub(super) rank_bins: usize,
    pub(super) median_steps: f64,
    pub(super) median_tau_max: f64,
    pub(super) parameters: Vec<ParameterVerdict>,
    pub(super) failures: Vec<(usize, String)>,
    pub(super) all_pass: bool,
}

pub(super) fn summary_text(s: &Summary) -> String {
    use std::fmt::Write as _;
    let mut t = String::new();
    let _ = writeln!(
        t,
        "Simulation-based calibration (Talts et al. 2018) of {}",
        s.settings
    );
    let _ = writeln!(
        t,
        "seed {}; {} systems, {} fitted, {} failed, {} at the step cap, {} short of {} independent draws",
        s.seed, s.systems, s.fitted, s.failed, s.hit_step_cap, s.short_of_independent_draws,
        s.draws_per_system
    );
    let _ = writeln!(
        t,
        "ranks among L = {} thinned draws in {} bins; median steps {:.0}, median largest tau {:.1}",
        s.draws_per_system, s.rank_bins, s.median_steps, s.median_tau_max
    );
    let _ = writeln!(t);
    let _ = writeln!(
        t,
        "{:<10} {:>4} {:>9} {:>4} {:>8}   {:>16}   {:>16}  verdict",
        "parameter", "n", "chi2", "df", "p", "68% coverage", "95% coverage"
    );
    for p in &s.parameters {
        let cov =
            |c: &Coverage| format!("{:.3}±{:.3} ({:+.1}σ)", c.fraction, c.standard_error, c.z);
        let _ = writeln!(
            t,
            "{:<10} {:>4} {:>9.2} {:>4} {:>8.4}   {:>16}   {:>16}  {}",
            p.parameter,
            p.systems,
            p.chi_square,
            p.degrees_of_freedom,
            p.p_value,
            cov(&p.coverage_68),
            cov(&p.coverage_95),
            if p.passes { "ok" } else { "MISCALIBRATED?" }
        );
    }
    let _ = writeln!(t);
    let _ = writeln!(
        t,
        "verdict: {} (pass = chi-square p > 0.01 and both coverages within 2 binomial standard errors)",
        if s.all_pass {
            "every parameter passes"
        } else {
            "some parameter fails"
        }
    );
    for (i, why) in &s.failures {
        let _ = writeln!(t, "system {i} failed: {why}");
    }
    t
}
