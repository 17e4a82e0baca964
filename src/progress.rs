//! What the terminal shows while a workflow runs. The progress line of a
//! sampling run says how many effective draws the worst parameter still
//! lacks, how far split R-hat is from its bound, and the time left at the
//! current rate.

use dyad_fit::{Observer, Progress};

use crate::terminal::note;

/// What the terminal shows of a running workflow: messages (unless
/// quiet), warnings (always), the progress line of a sampling run and the
/// bar of a calibration, on standard error. Progress is hidden when standard
/// error is not a terminal.
pub struct Terminal {
    quiet: bool,
    sampling: Option<indicatif::ProgressBar>,
    items: Option<indicatif::ProgressBar>,
}

impl Terminal {
    /// A terminal observer; `quiet` hides messages and the progress line.
    pub fn new(quiet: bool) -> Self {
        Self {
            quiet,
            sampling: None,
            items: None,
        }
    }
}

impl Observer for Terminal {
    fn message(&mut self, text: &str) {
        if !self.quiet {
            note!("{text}");
        }
    }

    fn warning(&mut self, text: &str) {
        note!("warning: {text}");
    }

    fn sampling_started(&mut self, max_steps: u64) {
        if self.quiet {
            return;
        }
        let bar = indicatif::ProgressBar::new(max_steps);
        // No bar: the step count is no measure of how far the run is, the
        // effective draws still wanted are.
        let style = indicatif::ProgressStyle::with_template("step {pos} of at most {len} | {msg}")
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner());
        bar.set_style(style);
        self.sampling = Some(bar);
    }

    fn sampling_progress(&mut self, p: &Progress) {
        let Some(bar) = &self.sampling else { return };
        bar.set_length(p.max_steps);
        bar.set_position(p.step);
        bar.set_message(describe(p));
    }

    fn sampling_finished(&mut self) {
        if let Some(bar) = self.sampling.take() {
            bar.finish_and_clear();
        }
    }

    fn items_done(&mut self, done: usize, total: usize) {
        let bar = self.items.get_or_insert_with(|| {
            let bar = indicatif::ProgressBar::new(total as u64);
            bar.set_style(
                indicatif::ProgressStyle::with_template(
                    "{bar:30.cyan/blue} {pos}/{len} systems  {elapsed_precise} (left ~{eta})",
                )
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
            );
            bar
        });
        bar.set_position(done as u64);
        if done >= total {
            bar.finish_and_clear();
            self.items = None;
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
            if let Some(w) = check.watched {
                parts.push(if check.watched_met(rule) {
                    format!("mode weights settled (+- {:.3})", w.largest_error)
                } else if !w.long_enough {
                    format!(
                        "mode weights still settling (they wander over ~{:.0} steps)",
                        w.largest_tau
                    )
                } else {
                    format!(
                        "mode weights known to +- {:.3} (want <= {})",
                        w.largest_error, rule.max_watched_error
                    )
                });
            }
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
