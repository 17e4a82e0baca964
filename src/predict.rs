//! `dyad predict RUN EPOCHS...`: where the companion will be. For each epoch,
//! the posterior of its separation, position angle and offsets, from the
//! run's posterior draws; written as a table and a sky plot with the
//! predicted positions marked.

use std::path::Path;

use anyhow::{bail, Context, Result};

use dyad_model::likelihood::Model;
use dyad_model::params::FitMode;
use dyad_orbit::time::TimeScale;
use dyad_report::stats::quantile_sorted as quantile;
use dyad_report::SkyPrediction;

use crate::fit::Outcome;
use crate::posterior::{orbit_track, read_draws, sky_measurement};
use crate::run_folder::{write_text, ExistingRun};
use crate::terminal::{say, say_raw};

/// Circular median-centred statistics of position angles (degrees): the
/// draws are unwrapped around their circular mean first.
fn pa_interval(pa_deg: &[f64]) -> (f64, f64, f64) {
    let (s, c) = pa_deg.iter().fold((0.0, 0.0), |(s, c), a| {
        (s + a.to_radians().sin(), c + a.to_radians().cos())
    });
    let centre = s.atan2(c).to_degrees();
    let mut unwrapped: Vec<f64> = pa_deg
        .iter()
        .map(|a| centre + (a - centre + 540.0).rem_euclid(360.0) - 180.0)
        .collect();
    unwrapped.sort_by(f64::total_cmp);
    let q = |p| quantile(&unwrapped, p).rem_euclid(360.0);
    (q(0.5), q(0.16), q(0.84))
}

/// `dyad predict`.
pub fn predict(folder: &Path, epochs: &[f64], scale: &str) -> Result<()> {
    let scale = TimeScale::from_column_name(scale)
        .with_context(|| format!("unknown time scale '{scale}': use jyear, byear, jd or mjd"))?;
    let run = ExistingRun::open(folder)?;
    let model = Model::from_config(&run.config)?;
    if model.mode() == FitMode::VelocitiesOnly {
        bail!("the run has no astrometry, so it predicts no positions on the sky");
    }
    if let Some(bad) = epochs.iter().find(|e| !e.is_finite()) {
        bail!("epoch {bad} is not a number");
    }
    let outcome = Outcome::read(&run.files)?;
    let draws = read_draws(&run.files, &model, outcome.burn_in)?;
    let dim = model.dim();
    let n = draws.sampled.len() / dim;
    let mut table = format!(
        "Predicted position of the companion relative to the primary ({n} posterior draws)\n\
         epoch ({})    separation [mas] (68 %)        position angle [deg] (68 %)     dRA* [mas]  dDec [mas]\n",
        scale.column_name()
    );
    let mut predictions = Vec::new();
    for &epoch in epochs {
        let t = scale.to_jd(epoch);
        let offsets: Vec<(f64, f64)> = (0..n)
            .filter_map(|d| model.predict_position(&draws.sampled[d * dim..(d + 1) * dim], t))
            .map(|s| (s.dra, s.ddec))
            .collect();
        if offsets.is_empty() {
            bail!("no posterior draw gives a position at epoch {epoch}");
        }
        let mut sep: Vec<f64> = offsets.iter().map(|(x, y)| x.hypot(*y)).collect();
        sep.sort_by(f64::total_cmp);
        let pa: Vec<f64> = offsets
            .iter()
            .map(|(x, y)| x.atan2(*y).to_degrees().rem_euclid(360.0))
            .collect();
        let (pa_med, pa_lo, pa_hi) = pa_interval(&pa);
        let m = offsets.len() as f64;
        let (mx, my) = offsets
            .iter()
            .fold((0.0, 0.0), |(a, b), (x, y)| (a + x / m, b + y / m));
        let (mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0);
        for (x, y) in &offsets {
            sxx += (x - mx) * (x - mx) / m;
            sxy += (x - mx) * (y - my) / m;
            syy += (y - my) * (y - my) / m;
        }
        table.push_str(&format!(
            "{epoch:<14} {:>9.2} [{:.2}, {:.2}]      {:>8.2} [{:.2}, {:.2}]      {mx:>10.2}  {my:>10.2}\n",
            quantile(&sep, 0.5),
            quantile(&sep, 0.16),
            quantile(&sep, 0.84),
            pa_med,
            pa_lo,
            pa_hi,
        ));
        predictions.push(SkyPrediction {
            dra: mx,
            ddec: my,
            cov: Some([[sxx, sxy], [sxy, syy]]),
            label: format!("{epoch}"),
        });
    }
    say_raw!("{table}")?;
    write_text(&run.files.folder.join("predictions.txt"), &table)?;
    let step = (n / 100).max(1);
    let input = dyad_report::SkyPlotInput {
        title: "Predicted positions (mean and 1σ spread of the posterior)".to_owned(),
        measurements: model
            .dataset()
            .astrometry
            .iter()
            .map(|e| sky_measurement(&e.position))
            .collect(),
        tracks: (0..n)
            .step_by(step)
            .take(100)
            .filter_map(|d| orbit_track(&model, &draws.sampled[d * dim..(d + 1) * dim], 240))
            .collect(),
        best_track: None,
        predictions,
        ..Default::default()
    };
    let files = dyad_report::plot_sky(&run.files.plots().join("predictions"), &input)?;
    say!("plot: {}", files.png.display())?;
    Ok(())
}
