//! The run configuration as written: serde-derived structs that mirror the
//! TOML tables key for key (unknown keys are refused), each value with its
//! place in the file. [`super::checks`] turns them into the checked
//! [`super::RunConfig`].

use std::collections::BTreeMap;

use serde::Deserialize;

use crate::toml_input::{Field, FileNames, Number, Spanned, Whole};

/// The whole file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawConfig {
    pub(super) data: Option<RawData>,
    pub(super) priors: Option<RawPriors>,
    pub(super) astrometry_errors: Option<RawAstrometryErrors>,
    pub(super) start: Option<RawStart>,
    pub(super) sampler: Option<RawSampler>,
    pub(super) output: Option<RawOutput>,
}

/// `[data]`.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawData {
    pub(super) astrometry: Field<String>,
    pub(super) velocities: Field<FileNames>,
    pub(super) catalogue_parallax_mas: Field<Number>,
    pub(super) catalogue_parallax_err_mas: Field<Number>,
    pub(super) reference_epoch_jd: Field<Number>,
}

/// A prior as written: a number or a table, read by
/// [`crate::prior::Prior::from_toml`].
pub(super) type RawPrior = Field<toml::Value>;

/// `[priors]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawPriors {
    pub(super) period_days: RawPrior,
    pub(super) period_years: RawPrior,
    pub(super) eccentricity: RawPrior,
    pub(super) periastron_argument_deg: RawPrior,
    pub(super) inclination_deg: RawPrior,
    pub(super) node_deg: RawPrior,
    pub(super) total_mass_msun: RawPrior,
    pub(super) parallax_mas: RawPrior,
    pub(super) mass_ratio: RawPrior,
    pub(super) primary_semi_amplitude_kms: RawPrior,
    pub(super) secondary_semi_amplitude_kms: RawPrior,
    pub(super) offset_kms: RawPrior,
    pub(super) jitter_kms: RawPrior,
    #[serde(default)]
    pub(super) instruments: BTreeMap<String, RawInstrumentPriors>,
}

/// `[priors.instruments.NAME]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawInstrumentPriors {
    pub(super) offset_kms: RawPrior,
    pub(super) jitter_kms: RawPrior,
}

/// `[astrometry_errors] distribution`.
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(super) enum Distribution {
    Normal,
    StudentT,
}

/// `[astrometry_errors]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawAstrometryErrors {
    pub(super) scale: RawPrior,
    pub(super) jitter_mas: RawPrior,
    pub(super) distribution: Field<Distribution>,
    pub(super) degrees_of_freedom: RawPrior,
    #[serde(default)]
    pub(super) sources: BTreeMap<String, RawSourceErrors>,
}

/// `[astrometry_errors.sources.NAME]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawSourceErrors {
    pub(super) scale: RawPrior,
    pub(super) jitter_mas: RawPrior,
}

/// `[start]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawStart {
    pub(super) period_days: Field<Number>,
    pub(super) period_years: Field<Number>,
    pub(super) eccentricity: Field<Number>,
    pub(super) periastron_argument_deg: Field<Number>,
    pub(super) periastron_time_jd: Field<Number>,
    pub(super) periastron_time_jyear: Field<Number>,
    pub(super) inclination_deg: Field<Number>,
    pub(super) node_deg: Field<Number>,
    pub(super) total_mass_msun: Field<Number>,
    pub(super) parallax_mas: Field<Number>,
    pub(super) mass_ratio: Field<Number>,
}

/// `[sampler]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawSampler {
    pub(super) walkers: Field<Whole<4>>,
    pub(super) max_steps: Field<Whole<1>>,
    pub(super) thinning: Field<Whole<1>>,
    pub(super) burn_in_fraction: Field<Number>,
    pub(super) effective_draws: Field<Number>,
    pub(super) max_split_rhat: Field<Number>,
    pub(super) mode_weight_error: Field<Number>,
    pub(super) seed: Field<Whole<0>>,
    /// `"off"`, `"auto"` or a count: checked by hand for one clear message.
    pub(super) temperatures: Field<toml::Value>,
    pub(super) period_windows_days: Field<Vec<Spanned<Window>>>,
    pub(super) period_windows_years: Field<Vec<Spanned<Window>>>,
    /// A key of an older version, refused with a note on its replacement.
    pub(super) autocorrelation_times: Field<toml::Value>,
}

/// One `[low, high]` period window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Window(pub(super) f64, pub(super) f64);

impl<'de> Deserialize<'de> for Window {
    fn deserialize<D: serde::Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct WindowVisitor;
        impl<'de> serde::de::Visitor<'de> for WindowVisitor {
            type Value = Window;
            fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str("a [low, high] pair")
            }
            fn visit_seq<A: serde::de::SeqAccess<'de>>(
                self,
                mut seq: A,
            ) -> Result<Window, A::Error> {
                use serde::de::Error;
                let mut ends = [0.0; 2];
                for (n, end) in ends.iter_mut().enumerate() {
                    let Some(Number(v)) = seq.next_element()? else {
                        return Err(A::Error::invalid_length(n, &self));
                    };
                    *end = v;
                }
                let mut extra = 0;
                while seq.next_element::<serde::de::IgnoredAny>()?.is_some() {
                    extra += 1;
                }
                if extra > 0 {
                    return Err(A::Error::invalid_length(2 + extra, &self));
                }
                Ok(Window(ends[0], ends[1]))
            }
        }
        deserializer.deserialize_seq(WindowVisitor)
    }
}

/// `[output]`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawOutput {
    pub(super) folder: Field<String>,
    pub(super) orbits_on_sky_plot: Field<Whole<0>>,
}
