//! The progress line of a sampling run: how many effective draws the worst
//! parameter still lacks, how far split R-hat is from its bound, and the time
//! left at the current rate.

use dyad_sampler::Progress;

/// A progress line on standard error (hidden when it is not a terminal, or
/// when asked to be quiet).
pub struct ProgressBar {
    bar: Option<indicatif::ProgressBar>,
}

impl ProgressBar {
    /// A line for a run of at most `max_steps` steps.
    pub fn new(max_steps: u64, quiet: bool) -> Self {
        if quiet {
            return Self { bar: None };
        }
        let bar = indicatif::ProgressBar::new(max_steps);
        // No bar: the step count is no measure of how far the run is, the
        // effective draws still wanted are.
        let style = indicatif::ProgressStyle::with_template("step {pos} of at most {len} | {msg}")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner());
        bar.set_style(style);
        Self { bar: Some(bar) }
    }

    /// Shows a progress report.
    pub fn update(&mut self, p: &Progress) {
        let Some(bar) = &self.bar else { return };
        bar.set_length(p.max_steps);
        bar.set_position(p.step);
        bar.set_message(describe(p));
    }

    /// Removes the line.
    pub fn finish(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}

/// The message of a progress report.
fn describe(p: &Progress) -> String {
    let mut parts = Vec::new();
    if !p.ladder_frozen {
        parts.push("tuning temperatures".to_owned());
    }
    match (&p.rule, &p.last_check) {
        (Some(rule), Some(check)) => {
            let short = (rule.min_effective_draws - check.fewest()).max(0.0);
            parts.push(if short > 0.0 {
                format!(
                    "{:.0} of {:.0} effective draws ({short:.0} to go)",
                    check.fewest(),
                    rule.min_effective_draws
                )
            } else {
                format!("{:.0} effective draws: enough", check.fewest())
            });
            parts.push(format!(
                "walkers agree to R-hat {:.3} (want <= {})",
                check.largest_rhat, rule.max_split_rhat
            ));
        }
        (Some(_), None) => parts.push("counting effective draws".to_owned()),
        (None, _) => {}
    }
    parts.push(format!("{:.0} % of moves accepted", 100.0 * p.acceptance));
    if let Some(d) = p.eta {
        let until = match p.target_steps {
            Some(t) if t < p.max_steps => format!(" (done near step {t})"),
            _ => " (to the step cap)".to_owned(),
        };
        parts.push(format!("about {} left{until}", indicatif::HumanDuration(d)));
    }
    parts.join(" | ")
}
