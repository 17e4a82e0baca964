//! `dyad predict RUN [EPOCHS...] [--from A --to B --step S]`: where the
//! companion will be, and how fast the stars will move, per period mode.
//!
//! For each epoch and each separate period mode of the posterior (see
//! [`crate::modes`]), the posterior-predictive distribution of the
//! separation, position angle, offsets and both stars' model velocities
//! from that mode's draws: median and equal-tailed 68, 90 and 95 per cent
//! intervals. Nothing is averaged across modes: a multimodal posterior is
//! reported as the set of its modes with their weights. Position angles are
//! summarised on the circle (Mardia & Jupp 2000, sect. 2.2).
//!
//! Each call writes a new numbered folder `RUN/prediction-N/` (never
//! touching an earlier one) with `predictions.txt`, `.csv` and `.json`, a
//! sky plot and, over two or more epochs, the ephemeris plot (separation,
//! position angle and velocities against time, per mode); the folder is
//! assembled under a temporary name and renamed into place only when
//! complete.

use std::fs;
use std::path::{Path, PathBuf};

use crate::error::{bail, Context, Result};
use serde_json::json;

use dyad_common::csv_table::CsvText;
use dyad_model::data::Star;
use dyad_model::likelihood::Model;
use dyad_orbit::time::TimeScale;
use dyad_plan::{predictive_bands, EpochBands, Quantities};
use dyad_report::{Band, EphemerisPanel, EphemerisPlotInput, SkyPrediction};

use crate::fit::Outcome;
use crate::modes::split_modes;
use crate::posterior::{orbit_track, read_draws, sky_measurement, Draws};
use crate::run_folder::{write_text, ExistingRun};

/// Most draws of one mode used for its predictions (evenly thinned beyond).
const DRAWS_PER_MODE: usize = 4000;

/// Most epochs one call predicts (a range finer than this is refused).
const MAX_EPOCHS: usize = 20_000;

/// Most epochs marked on the sky plot (evenly chosen beyond).
const SKY_MARKS: usize = 12;

/// What the user asked for.
pub struct PredictOptions {
    /// Explicit epochs.
    pub epochs: Vec<f64>,
    /// A range: first epoch, last epoch and step, in the time scale.
    pub from: Option<f64>,
    /// Last epoch of the range.
    pub to: Option<f64>,
    /// Step of the range.
    pub step: Option<f64>,
    /// Time scale name of the epochs.
    pub scale: String,
}

/// The epochs asked for: the explicit ones and those of the range, sorted.
pub fn epochs_of(options: &PredictOptions) -> Result<Vec<f64>> {
    let mut epochs = options.epochs.clone();
    if let Some(bad) = epochs.iter().find(|e| !e.is_finite()) {
        bail!("epoch {bad} is not a number");
    }
    match (options.from, options.to, options.step) {
        (None, None, None) => {}
        (Some(from), Some(to), Some(step)) => {
            if !(from.is_finite() && to.is_finite() && step.is_finite()) {
                bail!("--from, --to and --step must be numbers");
            }
            if step <= 0.0 {
                bail!("--step must be positive (got {step})");
            }
            if from > to {
                bail!("--from ({from}) is after --to ({to}): the range runs forwards");
            }
            // A small tolerance keeps the last epoch when (to - from) / step
            // is a whole number up to rounding.
            let n = ((to - from) / step + 1e-9).floor() as usize + 1;
            if n > MAX_EPOCHS {
                bail!("the range gives {n} epochs, more than {MAX_EPOCHS}: use a larger --step");
            }
            epochs.extend((0..n).map(|k| from + k as f64 * step));
        }
        _ => bail!("a range needs all of --from, --to and --step"),
    }
    if epochs.is_empty() {
        bail!("no epochs: give epochs, or a range with --from, --to and --step");
    }
    if epochs.len() > MAX_EPOCHS {
        bail!("{} epochs, more than {MAX_EPOCHS}", epochs.len());
    }
    epochs.sort_by(f64::total_cmp);
    epochs.dedup();
    Ok(epochs)
}

/// The predicted quantities, in column order.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Quantity {
    /// Separation, mas.
    Separation,
    /// Position angle, degrees.
    PositionAngle,
    /// Offset dRA* (east), mas.
    Dra,
    /// Offset dDec (north), mas.
    Ddec,
    /// Model velocity of the primary on the first instrument's zero point, km/s.
    VelocityPrimary,
    /// Model velocity of the secondary likewise, km/s.
    VelocitySecondary,
}

impl Quantity {
    /// Its column name in `predictions.csv`.
    pub fn column(self) -> &'static str {
        match self {
            Quantity::Separation => "sep_mas",
            Quantity::PositionAngle => "pa_deg",
            Quantity::Dra => "dra_mas",
            Quantity::Ddec => "ddec_mas",
            Quantity::VelocityPrimary => "rv_primary_kms",
            Quantity::VelocitySecondary => "rv_secondary_kms",
        }
    }
}

/// The quantities the model can predict.
fn quantities(model: &Model) -> Vec<Quantity> {
    let mut q = Vec::new();
    if model.has_astrometry() {
        q.extend([
            Quantity::Separation,
            Quantity::PositionAngle,
            Quantity::Dra,
            Quantity::Ddec,
        ]);
    }
    if model.has_velocities() {
        if model.layout().has_velocities_of(Star::Primary) {
            q.push(Quantity::VelocityPrimary);
        }
        if model.layout().has_velocities_of(Star::Secondary) {
            q.push(Quantity::VelocitySecondary);
        }
    }
    q
}

/// Posterior-predictive bands of one mode at every epoch, from up to
/// [`DRAWS_PER_MODE`] of its draws; the offsets' joint spread feeds the sky
/// plot's ellipses.
fn predict_mode(
    model: &Model,
    draws: &Draws,
    quantities: &[Quantity],
    times_jd: &[f64],
) -> Result<Vec<EpochBands>> {
    let dim = model.dim();
    let n = draws.table.n_draws();
    let stride = n.div_ceil(DRAWS_PER_MODE).max(1);
    let points: Vec<&[f64]> = (0..n)
        .step_by(stride)
        .map(|d| &draws.sampled[d * dim..(d + 1) * dim])
        .collect();
    let periods: Vec<Option<f64>> = quantities
        .iter()
        .map(|q| (*q == Quantity::PositionAngle).then_some(360.0))
        .collect();
    let index = |want| quantities.iter().position(|q| *q == want);
    let pair = index(Quantity::Dra)
        .zip(index(Quantity::Ddec))
        .map(|(a, b)| [a, b]);
    let predict = |d: usize, t: f64, out: &mut [f64]| {
        let x = points[d];
        let position = model.predict_position(x, t);
        for (q, slot) in quantities.iter().zip(out.iter_mut()) {
            let value = match q {
                Quantity::Separation => position.map(|s| s.dra.hypot(s.ddec)),
                Quantity::PositionAngle => {
                    position.map(|s| s.dra.atan2(s.ddec).to_degrees().rem_euclid(360.0))
                }
                Quantity::Dra => position.map(|s| s.dra),
                Quantity::Ddec => position.map(|s| s.ddec),
                // On the zero point of the first instrument.
                Quantity::VelocityPrimary => model.velocity_model(x, t, Star::Primary, 0),
                Quantity::VelocitySecondary => model.velocity_model(x, t, Star::Secondary, 0),
            };
            *slot = value.unwrap_or(f64::NAN);
        }
    };
    let quantities = Quantities {
        periods: &periods,
        pair,
    };
    Ok(predictive_bands(
        points.len(),
        times_jd,
        quantities,
        predict,
    )?)
}

/// The first `RUN/prediction-N` that does not exist yet, and its N.
fn next_prediction_folder(run: &Path) -> (usize, PathBuf) {
    (1..)
        .map(|k| (k, run.join(format!("prediction-{k}"))))
        .find(|(_, p)| !p.exists())
        .expect("some numbered folder is free")
}

/// `dyad predict`.
pub fn predict(folder: &Path, options: &PredictOptions) -> Result<Prediction> {
    let scale = TimeScale::from_column_name(&options.scale).with_context(|| {
        format!(
            "unknown time scale '{}': use jyear, byear, jd or mjd",
            options.scale
        )
    })?;
    let epochs = epochs_of(options)?;
    let run = ExistingRun::open(folder)?;
    let model = Model::from_config(&run.config)?;
    let outcome = Outcome::read(&run.files)?;
    let draws = read_draws(&run.files, &model, outcome.burn_in)?;
    let split = split_modes(&draws.table, draws.walkers);
    let quantities = quantities(&model);
    let times: Vec<f64> = epochs.iter().map(|&e| scale.to_jd(e)).collect();
    let mut per_mode = Vec::new();
    for m in &split.modes {
        let of_mode = draws.of_mode(&split.labels, m.number)?;
        per_mode.push(predict_mode(&model, &of_mode, &quantities, &times)?);
    }

    // Text, CSV and JSON.
    let n_modes = split.modes.len();
    let mut text = format!(
        "Posterior-predictive ephemeris from {} draws, {} ({})\n\
         Medians with 68 % intervals; the CSV and JSON also hold 90 and 95 %.\n\
         Velocities are model velocities on the zero point of the first instrument.\n",
        draws.table.n_draws(),
        if n_modes > 1 {
            format!("{n_modes} separate period modes, each on its own (never averaged)")
        } else {
            "one period mode".to_owned()
        },
        scale.column_name(),
    );
    let mut csv = CsvText::new();
    csv.record(
        [
            format!("epoch_{}", scale.column_name()),
            "jd".into(),
            "mode".into(),
            "mode_weight".into(),
        ]
        .into_iter()
        .chain(quantities.iter().flat_map(|q| {
            ["median", "lo68", "hi68", "lo90", "hi90", "lo95", "hi95"]
                .map(|suffix| format!("{}_{suffix}", q.column()))
        })),
    )?;
    let mut json_modes = Vec::new();
    for (m, predictions) in split.modes.iter().zip(&per_mode) {
        text.push_str(&format!(
            "\nmode {} of {n_modes}: weight {:.3} +- {:.3}, P = {:.4} yr\n{:<14}",
            m.number,
            m.weight,
            m.weight_error,
            m.period_days / 365.25,
            format!("epoch ({})", scale.column_name())
        ));
        for q in &quantities {
            text.push_str(&format!("  {:>30}", q.column()));
        }
        text.push('\n');
        let mut json_epochs = Vec::new();
        for ((epoch, t), p) in epochs.iter().zip(&times).zip(predictions) {
            text.push_str(&format!("{epoch:<14}"));
            csv.field(format!("{epoch:?}"))?;
            csv.field(format!("{t:?}"))?;
            csv.field(m.number.to_string())?;
            csv.field(format!("{:?}", m.weight))?;
            let mut entry = serde_json::Map::new();
            entry.insert("epoch".into(), json!(epoch));
            entry.insert("jd".into(), json!(t));
            for (q, band) in quantities.iter().zip(&p.bands) {
                let v = band.as_array();
                text.push_str(&format!(
                    "  {:>30}",
                    format!("{:.2} [{:.2}, {:.2}]", v[0], v[1], v[2])
                ));
                for x in &v {
                    csv.field(format!("{x:?}"))?;
                }
                entry.insert(
                    q.column().into(),
                    json!({
                        "median": v[0], "q68": [v[1], v[2]],
                        "q90": [v[3], v[4]], "q95": [v[5], v[6]],
                    }),
                );
            }
            text.push('\n');
            csv.end_record()?;
            json_epochs.push(serde_json::Value::Object(entry));
        }
        json_modes.push(json!({
            "mode": m.number,
            "weight": m.weight,
            "weight_error": m.weight_error,
            "period_days": m.period_days,
            "epochs": json_epochs,
        }));
    }
    let document = json!({
        "time_scale": scale.column_name(),
        "n_draws": draws.table.n_draws(),
        "draws_per_mode_used_at_most": DRAWS_PER_MODE,
        "velocity_zero_point": "the first instrument's offset",
        "modes": json_modes,
    });

    // Assemble the folder under a temporary name, then move it into place:
    // an earlier prediction is never touched and no half-written folder is
    // left behind.
    let (number, target) = next_prediction_folder(&run.files.folder);
    let partial = run.files.folder.join(format!(
        ".{}.partial-{}",
        target
            .file_name()
            .and_then(|n| n.to_str())
            .unwrap_or("prediction"),
        std::process::id()
    ));
    let written = (|| -> Result<()> {
        fs::create_dir_all(&partial).with_context(|| format!("creating {}", partial.display()))?;
        write_text(&partial.join("predictions.txt"), &text)?;
        write_text(&partial.join("predictions.csv"), &csv.finish()?)?;
        write_text(
            &partial.join("predictions.json"),
            &(serde_json::to_string_pretty(&document)? + "\n"),
        )?;
        if model.has_astrometry() {
            let input = sky_input(
                &model,
                &draws,
                &split,
                &epochs,
                &per_mode,
                run.config.output.orbits_on_sky_plot,
            );
            dyad_report::plot_sky(&partial.join("sky"), &input)?;
        }
        if times.len() >= 2 {
            let input = ephemeris_input(&split, &quantities, &times, &per_mode);
            dyad_report::plot_ephemeris(&partial.join("ephemeris"), &input)?;
        }
        Ok(())
    })();
    if let Err(e) = written {
        let _ = fs::remove_dir_all(&partial);
        return Err(e);
    }
    if target.exists() {
        let _ = fs::remove_dir_all(&partial);
        bail!(
            "{} appeared while predicting (another dyad predict?): run again",
            target.display()
        );
    }
    fs::rename(&partial, &target).with_context(|| format!("creating {}", target.display()))?;
    Ok(Prediction {
        folder: target,
        number,
        text,
        epochs_jd: times,
        quantities,
        modes: split.modes,
        per_mode,
    })
}

/// What `dyad predict` made.
#[derive(Debug, Clone)]
pub struct Prediction {
    /// The new folder `RUN/prediction-N`.
    pub folder: PathBuf,
    /// Its number N (earlier predictions 1 to N - 1 are kept).
    pub number: usize,
    /// The table of `predictions.txt`.
    pub text: String,
    /// The epochs, JD.
    pub epochs_jd: Vec<f64>,
    /// The predicted quantities, in the order of the bands below.
    pub quantities: Vec<Quantity>,
    /// The period modes predictions were made for.
    pub modes: Vec<crate::modes::PeriodMode>,
    /// Per mode, per epoch: the predictive bands (median, 68, 90 and 95 %).
    pub per_mode: Vec<Vec<EpochBands>>,
}

/// The ephemeris plot: separation, position angle and the velocities
/// against time, per mode.
fn ephemeris_input(
    split: &crate::modes::ModeSplit,
    quantities: &[Quantity],
    times_jd: &[f64],
    per_mode: &[Vec<EpochBands>],
) -> EphemerisPlotInput {
    let panels = quantities
        .iter()
        .enumerate()
        .filter_map(|(k, q)| {
            let axis_label = match q {
                Quantity::Separation => "Separation ρ [mas]",
                Quantity::PositionAngle => "Position angle θ [deg]",
                Quantity::VelocityPrimary => "Primary velocity [km/s]",
                Quantity::VelocitySecondary => "Secondary velocity [km/s]",
                Quantity::Dra | Quantity::Ddec => return None,
            };
            let modes = per_mode
                .iter()
                .map(|epochs| Band {
                    median: epochs.iter().map(|e| e.bands[k].median).collect(),
                    q68: epochs.iter().map(|e| e.bands[k].q68).collect(),
                    q95: epochs.iter().map(|e| e.bands[k].q95).collect(),
                })
                .collect();
            Some(EphemerisPanel {
                axis_label: axis_label.to_owned(),
                angle: *q == Quantity::PositionAngle,
                modes,
            })
        })
        .collect();
    let mode_labels = split
        .modes
        .iter()
        .map(|m| {
            let period = format!("P = {:.3} yr", m.period_days / 365.25);
            if split.is_multimodal() {
                format!(
                    "mode {}: {period}, weight {:.3} ± {:.3}",
                    m.number, m.weight, m.weight_error
                )
            } else {
                format!("{period} (one period mode)")
            }
        })
        .collect();
    EphemerisPlotInput {
        title: "Predicted ephemeris: medians with 68 and 95 % bands per period mode".to_owned(),
        time_label: "Epoch [Julian year]".to_owned(),
        times: times_jd
            .iter()
            .map(|&t| TimeScale::JulianYear.from_jd(t))
            .collect(),
        mode_labels,
        panels,
    }
}

/// The sky plot: posterior orbits and, per mode, the predicted mean
/// position with its 1-sigma spread at up to [`SKY_MARKS`] epochs.
fn sky_input(
    model: &Model,
    draws: &Draws,
    split: &crate::modes::ModeSplit,
    epochs: &[f64],
    per_mode: &[Vec<EpochBands>],
    n_tracks: usize,
) -> dyad_report::SkyPlotInput {
    let dim = model.dim();
    let n = draws.table.n_draws();
    let step = (n / n_tracks.max(1)).max(1);
    let mark_step = epochs.len().div_ceil(SKY_MARKS).max(1);
    let mut predictions = Vec::new();
    for (m, mode_predictions) in split.modes.iter().zip(per_mode) {
        for (k, (epoch, p)) in epochs.iter().zip(mode_predictions).enumerate() {
            if k % mark_step != 0 {
                continue;
            }
            if let Some(spread) = p.pair {
                let ([dra, ddec], cov) = (spread.mean, spread.cov);
                let label = if split.is_multimodal() {
                    format!("{epoch} (mode {})", m.number)
                } else {
                    format!("{epoch}")
                };
                predictions.push(SkyPrediction {
                    dra,
                    ddec,
                    cov: Some(cov),
                    label,
                });
            }
        }
    }
    dyad_report::SkyPlotInput {
        title: "Predicted positions (per mode: mean and 1σ spread)".to_owned(),
        measurements: model
            .dataset()
            .astrometry
            .iter()
            .map(|e| sky_measurement(&e.position))
            .collect(),
        tracks: (0..n)
            .step_by(step)
            .take(n_tracks)
            .filter_map(|d| orbit_track(model, &draws.sampled[d * dim..(d + 1) * dim], 240))
            .collect(),
        best_track: None,
        predictions,
        ..Default::default()
    }
}
