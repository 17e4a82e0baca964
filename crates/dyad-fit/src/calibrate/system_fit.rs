//! Fitting one simulated system as `dyad fit` does and ranking its truth.

use rand::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;
use serde::Serialize;

use dyad_model::likelihood::Model;
use dyad_sampler::{MemorySink, RunControl, RunStatus};

use super::settings::Settings;
use super::simulated::{
    system_seed, truth_of, write_system, STREAM_NOISE, STREAM_SAMPLER, STREAM_TIES, STREAM_TRUTH,
};
use super::statistics::{inside_central, rank_of};
use super::NOMINAL;
use crate::density::Posterior;
use crate::error::{bail, Result};
use crate::plan::SamplingPlan;

/// What one system gave.
#[derive(Debug, Clone, Serialize)]
pub(super) struct SystemOutcome {
    pub(super) system: usize,
    /// `None` when the fit succeeded.
    pub(super) failure: Option<String>,
    pub(super) status: String,
    pub(super) steps: u64,
    pub(super) burn_in: u64,
    pub(super) tau_max: f64,
    /// Roughly independent draws available after thinning by tau.
    pub(super) independent_draws: usize,
    /// Per tracked quantity: truth, rank (0..=L) and interval hits.
    pub(super) truths: Vec<f64>,
    pub(super) ranks: Vec<usize>,
    pub(super) inside: Vec<[bool; 2]>,
}

impl SystemOutcome {
    pub(super) fn failed(system: usize, why: String) -> Self {
        Self {
            system,
            failure: Some(why),
            status: "failed".into(),
            steps: 0,
            burn_in: 0,
            tau_max: f64::NAN,
            independent_draws: 0,
            truths: Vec::new(),
            ranks: Vec::new(),
            inside: Vec::new(),
        }
    }
}

/// Fits one simulated system and ranks the truth.
pub(super) fn calibrate_system(
    settings: &Settings,
    template: &Model,
    tracked: &[(usize, &str)],
    index: usize,
) -> Result<SystemOutcome> {
    let folder = settings.output.join("systems").join(format!("{index:04}"));
    let mut rng =
        Xoshiro256PlusPlus::seed_from_u64(system_seed(settings.seed, index, STREAM_TRUTH));
    let x_true = template.layout().sample_prior(&mut rng);
    if !template.log_prior(&x_true).is_finite() {
        bail!("the prior draw has zero prior density (is the prior proper?)");
    }
    let truth = truth_of(template, &x_true, &format!("calibration system {index}"))?;
    let config = write_system(
        settings,
        &folder,
        Some((truth, system_seed(settings.seed, index, STREAM_NOISE))),
        system_seed(settings.seed, index, STREAM_SAMPLER),
        true,
    )?;
    let model = Model::from_config(&config)?;
    if model.parameter_names() != template.parameter_names()
        || model.layout().reference_epoch_jd() != template.layout().reference_epoch_jd()
    {
        bail!("the simulated data set does not have the template's parameter layout");
    }
    let truths_all = model.derived(&x_true);
    let truths: Vec<f64> = tracked.iter().map(|&(k, _)| truths_all[k]).collect();

    let mut plan = SamplingPlan::new(&config, &model, None)?;
    // Systems are fitted in parallel; within a system the walkers then run
    // serially (the chain is the same either way: it depends on the seed only).
    plan.sampler.parallel = false;
    let start = crate::fit::starting_ensemble(&model, &config, &plan)?;
    let density = Posterior::new(&model);
    let mut sink = MemorySink::for_samples(model.dim(), plan.sampler.n_walkers);
    let result = dyad_sampler::run(
        &density,
        &plan.sampler,
        &start,
        &mut sink,
        RunControl {
            watch: Some(&mut crate::modes::ModeWatch::new(&model)),
            ..RunControl::default()
        },
    )?;
    let status = match result.status {
        RunStatus::Converged => "converged",
        RunStatus::StepCap => "step cap",
        RunStatus::Cancelled => "cancelled",
    };
    let burn_in = result.burn_in.max(dyad_common::burn_in_steps(
        plan.burn_in_fraction,
        result.steps,
    ));
    let table = sink.into_table();
    let first = table.first_after(burn_in);
    let nw = table.n_walkers;
    let dim = model.dim();
    let n_records = table.len().saturating_sub(first);
    if n_records == 0 {
        bail!("no draws after burn-in");
    }
    // All post-burn-in draws, as derived quantities (for the intervals).
    let width = nw * table.values_per_walker;
    let mut all: Vec<Vec<f64>> = vec![Vec::with_capacity(n_records * nw); tracked.len()];
    for r in first..table.len() {
        let rec = &table.values[r * width..(r + 1) * width];
        for w in 0..nw {
            let x = &rec[w * table.values_per_walker..w * table.values_per_walker + dim];
            let d = model.derived(x);
            for (slot, &(k, _)) in all.iter_mut().zip(tracked) {
                slot.push(d[k]);
            }
        }
    }
    // Thin by the largest autocorrelation time (in records) to roughly
    // independent draws, then take L of them evenly spread (Talts et al.
    // 2018, sec. 5).
    let tau_max = result
        .diagnostics
        .tau
        .iter()
        .copied()
        .fold(f64::NAN, f64::max);
    let spacing = if tau_max.is_finite() {
        ((tau_max / table_thin(&table, result.thin)).ceil() as usize).max(1)
    } else {
        1
    };
    let independent: Vec<usize> = (0..n_records)
        .step_by(spacing)
        .flat_map(|r| (0..nw).map(move |w| r * nw + w))
        .collect();
    let l = settings.draws;
    let chosen: Vec<usize> = (0..l)
        .map(|k| independent[((k as f64 + 0.5) * independent.len() as f64 / l as f64) as usize])
        .collect();
    let mut tie_rng =
        Xoshiro256PlusPlus::seed_from_u64(system_seed(settings.seed, index, STREAM_TIES));
    let mut ranks = Vec::with_capacity(tracked.len());
    let mut inside = Vec::with_capacity(tracked.len());
    for (values, &truth) in all.iter_mut().zip(&truths) {
        let draws: Vec<f64> = chosen.iter().map(|&j| values[j]).collect();
        ranks.push(rank_of(truth, &draws, &mut tie_rng));
        values.sort_by(f64::total_cmp);
        inside.push([
            inside_central(values, truth, NOMINAL[0]),
            inside_central(values, truth, NOMINAL[1]),
        ]);
    }
    Ok(SystemOutcome {
        system: index,
        failure: None,
        status: status.into(),
        steps: result.steps,
        burn_in,
        tau_max,
        independent_draws: independent.len(),
        truths,
        ranks,
        inside,
    })
}

/// Steps between records of the table.
fn table_thin(table: &dyad_sampler::RecordTable, thin: u64) -> f64 {
    match table.steps.as_slice() {
        [a, b, ..] => (b - a) as f64,
        _ => thin.max(1) as f64,
    }
}
