//! `dyad advise RUN`: which date, and which kind of measurement, would
//! shrink the mass intervals most. Wires a run's posterior draws into
//! `dyad_plan` (the method is documented there) and writes a ranked table
//! and a plot into the run folder.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::error::{bail, Context, Result};

use dyad_common::csv_table::CsvText;
use dyad_model::data::{RelativePosition, Star};
use dyad_model::likelihood::Model;
use dyad_orbit::time::TimeScale;
use dyad_plan::{
    calendar_month, expected_widths, widths_now, MonthRange, Observable, PlanSettings, Target,
};
use dyad_report::{AdviceCurve, AdvicePlotInput};

use crate::fit::Outcome;
use crate::posterior::read_draws;
use crate::run_folder::{write_text, ExistingRun};

/// What `dyad advise` was asked.
pub struct AdviseOptions {
    /// First candidate date, in `scale`.
    pub from: f64,
    /// Last candidate date, in `scale`.
    pub to: f64,
    /// Step between candidate dates, in the unit of `scale` (years or days).
    pub step: f64,
    /// Time scale of the dates.
    pub scale: String,
    /// Observing seasons (month ranges); empty: every date.
    pub seasons: Vec<String>,
    /// Error of a new relative position, each offset, mas (default: the
    /// median quoted error of the run's astrometry).
    pub position_error_mas: Option<f64>,
    /// Error of a new velocity, km/s (default: the median quoted error).
    pub velocity_error_kms: Option<f64>,
    /// Posterior draws used (evenly thinned).
    pub draws: usize,
    /// Simulated outcomes per date.
    pub outcomes: usize,
    /// Seed of the simulated outcomes.
    pub seed: u64,
    /// Replace an earlier advice in the run folder.
    pub overwrite: bool,
}

/// Most candidate dates in one call.
const MAX_DATES: usize = 100_000;

/// A period interval wider than this fraction of the period counts as
/// poorly known, and the period joins the targets.
const POORLY_KNOWN_PERIOD: f64 = 0.02;

/// The candidate dates (JD) between `from` and `to` every `step`, kept
/// only within the seasons.
fn candidate_dates(o: &AdviseOptions, scale: TimeScale) -> Result<Vec<f64>> {
    if !(o.from.is_finite() && o.to.is_finite() && o.step.is_finite()) {
        bail!("--from, --to and --step must be numbers");
    }
    if o.step <= 0.0 {
        bail!("--step must be positive, got {}", o.step);
    }
    if o.to < o.from {
        bail!("--to ({}) is before --from ({})", o.to, o.from);
    }
    let count = ((o.to - o.from) / o.step + 1e-9).floor() as usize + 1;
    if count > MAX_DATES {
        bail!("{count} candidate dates is too many (at most {MAX_DATES}): take a larger --step");
    }
    let seasons = o
        .seasons
        .iter()
        .map(|s| MonthRange::parse(s).with_context(|| format!("--season {s}")))
        .collect::<Result<Vec<_>>>()?;
    let dates: Vec<f64> = (0..count)
        .map(|k| scale.to_jd(o.from + k as f64 * o.step))
        .filter(|&jd| seasons.is_empty() || seasons.iter().any(|s| s.contains(calendar_month(jd))))
        .collect();
    if dates.is_empty() {
        bail!(
            "no candidate date between {} and {} falls in the observing seasons",
            o.from,
            o.to
        );
    }
    Ok(dates)
}

/// Type-7 median of the finite values (Hyndman & Fan 1996), none if there
/// are none.
fn median(v: Vec<f64>) -> Option<f64> {
    let m = dyad_common::quantile::median_of_finite(v);
    m.is_finite().then_some(m)
}

/// Median quoted error of one offset of the run's positions, mas (a
/// position angle error is turned into mas at its separation).
fn median_position_error(model: &Model) -> Option<f64> {
    median(
        model
            .dataset()
            .astrometry
            .iter()
            .map(|e| match e.position {
                RelativePosition::Polar {
                    sep_mas,
                    sep_err_mas,
                    pa_err_rad,
                    ..
                } => 0.5 * (sep_err_mas + sep_mas * pa_err_rad),
                RelativePosition::Cartesian {
                    dra_err_mas,
                    ddec_err_mas,
                    ..
                } => 0.5 * (dra_err_mas + ddec_err_mas),
            })
            .collect(),
    )
}

/// A new relative position: (dRA*, dDec) in mas.
struct Position<'a> {
    model: &'a Model,
    draws: &'a [f64],
}

impl Observable for Position<'_> {
    fn components(&self) -> usize {
        2
    }
    fn predict(&self, draw: usize, t_jd: f64, out: &mut [f64]) -> bool {
        let dim = self.model.dim();
        match self
            .model
            .predict_position(&self.draws[draw * dim..(draw + 1) * dim], t_jd)
        {
            Some(s) => {
                out[0] = s.dra;
                out[1] = s.ddec;
                true
            }
            None => false,
        }
    }
}

/// A new velocity of one star by one instrument (its offset and jitter).
struct Velocity<'a> {
    model: &'a Model,
    draws: &'a [f64],
    star: Star,
    instrument: usize,
}

impl Observable for Velocity<'_> {
    fn components(&self) -> usize {
        1
    }
    fn predict(&self, draw: usize, t_jd: f64, out: &mut [f64]) -> bool {
        let dim = self.model.dim();
        let x = &self.draws[draw * dim..(draw + 1) * dim];
        match self
            .model
            .velocity_model(x, t_jd, self.star, self.instrument)
        {
            Some(v) => {
                out[0] = v;
                true
            }
            None => false,
        }
    }
    fn extra_variance(&self, draw: usize) -> f64 {
        let dim = self.model.dim();
        let x = &self.draws[draw * dim..(draw + 1) * dim];
        self.model.layout().jitter_kms(x, self.instrument).powi(2)
    }
}

/// The quantities whose intervals the advice tries to shrink: the masses
/// the model has, and the period when it is poorly known.
fn target_names(model: &Model, period_rel_width: f64) -> Vec<(&'static str, &'static str)> {
    let names = model.derived_names_units();
    let has = |n: &str| names.iter().any(|(m, _)| m == n);
    let mut out: Vec<(&str, &str)> = Vec::new();
    if has("mass_primary_msun") {
        out.push(("mass_primary_msun", "M1"));
        out.push(("mass_secondary_msun", "M2"));
    } else if has("total_mass_msun") {
        out.push(("total_mass_msun", "M1+M2"));
    } else if has("m1_sin3i_msun") {
        out.push(("m1_sin3i_msun", "M1 sin^3 i"));
        out.push(("m2_sin3i_msun", "M2 sin^3 i"));
    } else if has("mass_function_msun") {
        out.push(("mass_function_msun", "f(M)"));
    }
    if !model.has_velocities() || period_rel_width > POORLY_KNOWN_PERIOD {
        out.push(("period_days", "P"));
    }
    out
}

/// One kind of measurement and its advice.
struct Kind {
    label: String,
    key: String,
    values: Vec<dyad_plan::DateValue>,
}

/// `dyad advise`: writes the advice into the run folder and returns it.
pub fn advise(folder: &Path, o: &AdviseOptions) -> Result<Advice> {
    let scale = TimeScale::from_column_name(&o.scale).with_context(|| {
        format!(
            "unknown time scale '{}': use jyear, byear, jd or mjd",
            o.scale
        )
    })?;
    let dates = candidate_dates(o, scale)?;
    let run = ExistingRun::open(folder)?;
    let out_csv = run.files.folder.join("next-epoch-advice.csv");
    let out_txt = run.files.folder.join("next-epoch-advice.txt");
    let out_plot = run.files.plots().join("next-epoch-advice");
    if !o.overwrite {
        for f in [&out_csv, &out_txt] {
            if f.exists() {
                bail!(
                    "{} holds an earlier advice: move it away or pass --overwrite",
                    f.display()
                );
            }
        }
    }
    let model = Model::from_config(&run.config)?;
    let outcome = Outcome::read(&run.files)?;
    let all = read_draws(&run.files, &model, outcome.burn_in)?;
    let dim = model.dim();
    let total = all.sampled.len() / dim;
    let stride = total.div_ceil(o.draws.max(1)).max(1);
    let draws: Vec<f64> = (0..total)
        .step_by(stride)
        .flat_map(|d| all.sampled[d * dim..(d + 1) * dim].iter().copied())
        .collect();
    let n = draws.len() / dim;

    let derived: Vec<Vec<f64>> = (0..n)
        .map(|d| model.derived(&draws[d * dim..(d + 1) * dim]))
        .collect();
    let names = model.derived_names_units();
    let column = |name: &str| -> Option<Vec<f64>> {
        let k = names.iter().position(|(m, _)| m == name)?;
        Some(derived.iter().map(|row| row[k]).collect())
    };
    let period = column("period_days").context("the model has no period")?;
    let period_width = widths_now(&[Target {
        name: "period",
        values: &period,
    }])[0];
    let period_median = median(period.clone()).unwrap_or(f64::NAN);
    let targets = target_names(&model, period_width / period_median);
    let columns: Vec<Vec<f64>> = targets
        .iter()
        .map(|(name, _)| column(name).with_context(|| format!("no derived {name}")))
        .collect::<Result<_>>()?;
    let target_refs: Vec<Target<'_>> = targets
        .iter()
        .zip(&columns)
        .map(|((name, _), values)| Target { name, values })
        .collect();
    let now = widths_now(&target_refs);

    let settings = |error: f64| PlanSettings {
        error,
        outcomes: o.outcomes,
        seed: o.seed,
    };
    let mut kinds = Vec::new();
    if model.has_astrometry() {
        let error = match o.position_error_mas {
            Some(e) => e,
            None => median_position_error(&model)
                .context("no astrometric errors to take a default from")?,
        };
        let obs = Position {
            model: &model,
            draws: &draws,
        };
        kinds.push(Kind {
            label: format!("relative position (±{error:.3} mas per offset)"),
            key: "position".into(),
            values: expected_widths(&obs, n, &target_refs, &dates, settings(error))?,
        });
    }
    let data = model.dataset();
    for star in [Star::Primary, Star::Secondary] {
        let Some(first) = data.velocities.iter().find(|v| v.star == star) else {
            continue;
        };
        let error = match o.velocity_error_kms {
            Some(e) => e,
            None => median(data.velocities.iter().map(|v| v.rv_err_kms).collect())
                .context("no velocity errors to take a default from")?,
        };
        let instrument = first.instrument;
        let obs = Velocity {
            model: &model,
            draws: &draws,
            star,
            instrument,
        };
        let who = if star == Star::Primary {
            "primary"
        } else {
            "secondary"
        };
        kinds.push(Kind {
            label: format!(
                "velocity of the {who} ({}, ±{error:.3} km/s)",
                data.instruments[instrument]
            ),
            key: format!("velocity_{who}"),
            values: expected_widths(&obs, n, &target_refs, &dates, settings(error))?,
        });
    }

    let text = advice_text(&kinds, &targets, &now, scale, n, o);
    let csv = advice_csv(&kinds, &targets, &now, scale)?;
    write_text(&out_csv, &csv)?;
    write_text(&out_txt, &text)?;
    let input = AdvicePlotInput {
        title: format!("Expected gain from one more measurement ({n} posterior draws)"),
        targets: targets.iter().map(|(_, label)| label.to_string()).collect(),
        curves: kinds
            .iter()
            .map(|k| AdviceCurve {
                label: k.label.clone(),
                dates: k
                    .values
                    .iter()
                    .map(|v| TimeScale::JulianYear.from_jd(v.t_jd))
                    .collect(),
                shrinkage_percent: (0..targets.len())
                    .map(|t| {
                        k.values
                            .iter()
                            .map(|v| 100.0 * v.shrinkage(&now)[t])
                            .collect()
                    })
                    .collect(),
            })
            .collect(),
    };
    let files = dyad_report::plot_next_epoch_advice(&out_plot, &input)?;
    Ok(Advice {
        text,
        table: out_csv,
        plot: files.png,
        draws: n,
        targets: targets.iter().map(|(name, _)| name.to_string()).collect(),
        widths_now: now,
        kinds: kinds
            .into_iter()
            .map(|k| MeasurementAdvice {
                measurement: k.key,
                label: k.label,
                dates: k.values,
            })
            .collect(),
    })
}

/// What `dyad advise` found and wrote.
#[derive(Debug, Clone)]
pub struct Advice {
    /// The ranked table of `next-epoch-advice.txt`.
    pub text: String,
    /// `next-epoch-advice.csv`.
    pub table: PathBuf,
    /// The plot (PNG; an SVG lies beside it).
    pub plot: PathBuf,
    /// Posterior draws reweighted.
    pub draws: usize,
    /// The quantities whose intervals the advice tries to shrink (derived
    /// quantity names).
    pub targets: Vec<String>,
    /// Their 68 per cent interval widths now, in the order of `targets`.
    pub widths_now: Vec<f64>,
    /// Per kind of measurement, the expected widths at every candidate date.
    pub kinds: Vec<MeasurementAdvice>,
}

/// The advice for one kind of measurement.
#[derive(Debug, Clone)]
pub struct MeasurementAdvice {
    /// Key of the measurement (`position`, `velocity_primary`, ...).
    pub measurement: String,
    /// Plain description, with the assumed error.
    pub label: String,
    /// Expected widths per candidate date.
    pub dates: Vec<dyad_plan::DateValue>,
}

/// Effective draws below this make a date's figure unreliable.
const FEW_EFFECTIVE_DRAWS: f64 = 50.0;

fn advice_text(
    kinds: &[Kind],
    targets: &[(&str, &str)],
    now: &[f64],
    scale: TimeScale,
    n: usize,
    o: &AdviseOptions,
) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "Next-epoch advice: expected shrinkage of the 68 % intervals from one more measurement\n\
         ({n} posterior draws reweighted, {} simulated outcomes per date, seed {}; \
         Lindley 1956 preposterior analysis by importance reweighting)",
        o.outcomes, o.seed
    );
    let names: Vec<&str> = targets.iter().map(|(_, l)| *l).collect();
    for k in kinds {
        let _ = writeln!(s, "\n{}", k.label);
        let _ = writeln!(
            s,
            "  rank  date ({:<5})  {}  effective draws",
            scale.column_name(),
            names.iter().map(|n| format!("{n:>12}")).collect::<String>()
        );
        // Rank by the mean shrinkage over the targets.
        let mut order: Vec<usize> = (0..k.values.len()).collect();
        let score = |i: usize| {
            let sh = k.values[i].shrinkage(now);
            sh.iter().sum::<f64>() / sh.len().max(1) as f64
        };
        order.sort_by(|&a, &b| score(b).total_cmp(&score(a)));
        for (rank, &i) in order.iter().take(10).enumerate() {
            let v = &k.values[i];
            let flag = if v.min_effective_draws < FEW_EFFECTIVE_DRAWS {
                " (few: rough)"
            } else {
                ""
            };
            let _ = writeln!(
                s,
                "  {:>4}  {:<13.4} {}  {:>8.0}{flag}",
                rank + 1,
                scale.from_jd(v.t_jd),
                v.shrinkage(now)
                    .iter()
                    .map(|x| format!("{:>11.1}%", 100.0 * x))
                    .collect::<String>(),
                v.min_effective_draws
            );
        }
    }
    s
}

fn advice_csv(
    kinds: &[Kind],
    targets: &[(&str, &str)],
    now: &[f64],
    scale: TimeScale,
) -> Result<String> {
    let mut csv = CsvText::new();
    csv.record(
        [
            "measurement".to_owned(),
            format!("date_{}", scale.column_name()),
            "date_jd".into(),
        ]
        .into_iter()
        .chain(targets.iter().flat_map(|(name, _)| {
            ["width_now", "width_expected", "shrinkage"].map(|what| format!("{name}_{what}"))
        }))
        .chain(["effective_draws_min".to_owned()]),
    )?;
    for k in kinds {
        for v in &k.values {
            csv.field(&k.key)?;
            csv.field(scale.from_jd(v.t_jd).to_string())?;
            csv.field(v.t_jd.to_string())?;
            for (t, width) in v.expected_width.iter().enumerate() {
                csv.field(now[t].to_string())?;
                csv.field(width.to_string())?;
                csv.field((1.0 - width / now[t]).to_string())?;
            }
            csv.field(v.min_effective_draws.to_string())?;
            csv.end_record()?;
        }
    }
    Ok(csv.finish()?)
}
