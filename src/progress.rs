//! The progress bar of a sampling run: steps, acceptance, the current
//! autocorrelation estimate and the time left.

use dyad_sampler::Progress;

/// A progress bar on standard error (hidden when it is not a terminal, or
/// when asked to be quiet).
pub struct ProgressBar {
    bar: Option<indicatif::ProgressBar>,
}

impl ProgressBar {
    /// A bar for a run of at most `max_steps` steps.
    pub fn new(max_steps: u64, quiet: bool) -> Self {
        if quiet {
            return Self { bar: None };
        }
        let bar = indicatif::ProgressBar::new(max_steps);
        let style =
            indicatif::ProgressStyle::with_template("{bar:30.cyan/blue} {pos}/{len} steps  {msg}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar());
        bar.set_style(style);
        Self { bar: Some(bar) }
    }

    /// Shows a progress report.
    pub fn update(&mut self, p: &Progress) {
        let Some(bar) = &self.bar else { return };
        bar.set_length(p.max_steps);
        bar.set_position(p.step);
        let tau = p
            .tau_max
            .map_or_else(|| "tau: -".to_owned(), |t| format!("tau: {t:.0}"));
        let target = p
            .target_steps
            .map_or_else(String::new, |t| format!(" (stop at ~{t})"));
        let eta = p.eta.map_or_else(String::new, |d| {
            format!("  left: {}", indicatif::HumanDuration(d))
        });
        let ladder = if p.ladder_frozen {
            ""
        } else {
            "  tuning temperatures"
        };
        bar.set_message(format!(
            "accept: {:.2}  {tau}{target}{eta}{ladder}",
            p.acceptance
        ));
    }

    /// Removes the bar.
    pub fn finish(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}
