//! Posterior draws after burn-in, from a chain file or from records in memory.

use crate::error::{ensure, Context, Result};

use dyad_model::likelihood::Model;
use dyad_report::{ParameterInfo, PosteriorDraws};
use dyad_sampler::{for_each_record, RecordTable};

use crate::run_folder::RunFiles;

/// Most posterior draws kept for the report (records are thinned evenly
/// beyond this; the chain file keeps them all).
pub const MAX_DRAWS: usize = 40_000;

/// Posterior draws: sampled coordinates and physical quantities.
#[derive(Debug, Clone)]
pub struct Draws {
    /// Walkers per record: draw `d` came from walker `d % walkers`.
    pub walkers: usize,
    /// Sampled coordinates, draw-major.
    pub sampled: Vec<f64>,
    /// Sampled plus derived quantities, for the report crate.
    pub table: PosteriorDraws,
}

/// Plot label and kind of a quantity by its name.
fn info_for(name: &str, unit: &str, node_folded: bool) -> ParameterInfo {
    let label = match name {
        "period_days" | "period_years" => "P",
        "eccentricity" => "e",
        "omega_secondary_deg" => "ω₂",
        "omega_primary_deg" => "ω₁",
        "inclination_deg" => "i",
        "node_deg" => "Ω",
        "semi_major_axis_mas" | "semi_major_axis_au" => "a",
        "total_mass_msun" => "M₁+M₂",
        "parallax_mas" => "ϖ",
        "orbital_parallax_mas" => "ϖ (orbital)",
        "mass_ratio" => "q",
        "mass_primary_msun" => "M₁",
        "mass_secondary_msun" => "M₂",
        "k1_kms" => "K₁",
        "k2_kms" => "K₂",
        "m1_sin3i_msun" => "M₁ sin³i",
        "m2_sin3i_msun" => "M₂ sin³i",
        "mass_function_msun" => "f(M)",
        "periastron_time_jd" | "periastron_time_jyear" => "T",
        other => other,
    };
    let unit = match unit {
        "M_sun" => "M☉",
        "1" => "",
        u => u,
    };
    match name {
        "omega_secondary_deg" | "omega_primary_deg" => {
            ParameterInfo::angle(name, unit, label, 360.0)
        }
        "node_deg" => {
            let period = if node_folded { 180.0 } else { 360.0 };
            ParameterInfo::angle(name, unit, label, period)
        }
        _ => ParameterInfo::linear(name, unit, label),
    }
}

/// Reads the chain file of a run and builds the posterior draws after burn-in.
pub fn read_draws(files: &RunFiles, model: &Model, burn_in: u64) -> Result<Draws> {
    // Two passes over the chain file, one record at a time: the steps first
    // (to place the burn-in and the thinning), then the kept records only,
    // so a long chain is never held in memory whole.
    let chain = files.chain();
    let mut steps = Vec::new();
    let shape = for_each_record(&chain, |step, _| steps.push(step))
        .with_context(|| format!("reading the chain {}", chain.display()))?;
    let source = chain.display().to_string();
    draws_of_records(model, burn_in, &steps, shape, &source, |visit| {
        for_each_record(&chain, |_, record| visit(record))
            .map(|_| ())
            .with_context(|| format!("reading the chain {}", chain.display()))
    })
}

/// The posterior draws after burn-in of records kept in memory (a run with
/// [`crate::Storage::Memory`]).
pub fn draws_from_table(table: &RecordTable, model: &Model, burn_in: u64) -> Result<Draws> {
    let width = table.n_walkers * table.values_per_walker;
    draws_of_records(
        model,
        burn_in,
        &table.steps,
        (table.n_walkers, table.values_per_walker),
        "the sampled records",
        |visit| {
            for record in table.values.chunks_exact(width.max(1)) {
                visit(record);
            }
            Ok(())
        },
    )
}

/// Draws from records of `nw` walkers of `vpw` values each (the sampled
/// coordinates, then the log-prior and log-likelihood): `steps[r]` is the
/// step of record `r`, and `records` calls its argument with every record
/// in order. Records after `burn_in` are kept, evenly thinned to at most
/// [`MAX_DRAWS`] draws.
fn draws_of_records(
    model: &Model,
    burn_in: u64,
    steps: &[u64],
    (nw, vpw): (usize, usize),
    source: &str,
    records: impl FnOnce(&mut dyn FnMut(&[f64])) -> Result<()>,
) -> Result<Draws> {
    let dim = model.dim();
    let first = steps.partition_point(|&s| s <= burn_in);
    let n_records = steps.len().saturating_sub(first);
    ensure!(
        vpw == dim + 2,
        "{source} holds {vpw} values per walker, but the model has {dim} parameters"
    );
    ensure!(
        n_records > 0,
        "{source} holds no samples after the burn-in of {burn_in} steps: run longer"
    );
    let stride = (n_records * nw).div_ceil(MAX_DRAWS).max(1);
    let derived_names = model.derived_names_units();
    let mut params: Vec<ParameterInfo> = derived_names
        .iter()
        .map(|(n, u)| info_for(n, u, model.node_folded()))
        .collect();
    params.extend(
        model
            .parameter_names()
            .iter()
            .zip(model.parameter_units())
            .map(|(n, u)| ParameterInfo::linear(&format!("sampled:{n}"), u, n)),
    );
    let mut sampled = Vec::new();
    let mut values = Vec::new();
    let mut log_posterior = Vec::new();
    let mut r = 0;
    records(&mut |record: &[f64]| {
        if r >= first && (r - first).is_multiple_of(stride) {
            for w in 0..nw {
                let v = &record[w * vpw..(w + 1) * vpw];
                let x = &v[..dim];
                sampled.extend_from_slice(x);
                values.extend(model.derived(x));
                values.extend_from_slice(x);
                log_posterior.push(v[dim] + v[dim + 1]);
            }
        }
        r += 1;
    })?;
    let table = PosteriorDraws::new(params, values, log_posterior)?;
    Ok(Draws {
        walkers: nw,
        sampled,
        table,
    })
}
