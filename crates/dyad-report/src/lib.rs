//! Summaries, samples tables and plots of a dyad run.
//!
//! What it is for: turning posterior draws (and a few plain inputs the
//! binary prepares) into the files of a run folder — text, Markdown and JSON
//! summaries, a posterior samples CSV, and PNG + SVG plots (pair plot, sky
//! plot of the relative orbit, folded velocity curves with residuals, mass
//! distributions, period-window comparison, rank histograms for
//! simulation-based calibration).
//!
//! What it is not for: any orbit or likelihood computation. The input types
//! here ([`PosteriorDraws`], [`SkyPlotInput`], [`VelocityPlotInput`], ...)
//! are plain numbers; the binary evaluates the model and converts.
//!
//! Overview:
//! - [`summarise`] computes per-parameter median, mean, sd, equal-tailed 68
//!   and 95 per cent intervals (Hyndman & Fan 1996 definition 7) and the MAP;
//!   angles are summarised on the circle.
//! - [`write_text_summary`], [`write_markdown_summary`],
//!   [`write_json_summary`], [`write_samples_csv`] write atomically;
//!   [`prepare_run_folder`] refuses to reuse a non-empty folder unless asked.
//! - The `plot_*` functions each write `<stem>.png` and `<stem>.svg`.
//!
//! Fonts: DejaVu Sans is compiled in and registered with plotters, so plots
//! render on machines without system fonts.
//!
//! ```
//! use dyad_report::{summarise, ParameterInfo, PosteriorDraws};
//! let draws = PosteriorDraws::new(
//!     vec![ParameterInfo::linear("m1", "Msun", "M₁")],
//!     vec![1.0, 2.0, 3.0],
//!     vec![-1.0, 0.0, -2.0],
//! ).unwrap();
//! let s = summarise(&draws).unwrap();
//! assert_eq!(s.parameters[0].median, 2.0);
//! assert_eq!(s.parameters[0].map, 2.0);
//! ```
#![deny(missing_docs)]

pub mod atomic;
mod error;
mod input;
pub mod plots;
pub mod stats;
pub(crate) mod summary;
pub mod tables;

pub use atomic::{prepare_run_folder, write_atomically};
pub use error::ReportError;
pub use input::{ParameterInfo, ParameterKind, PosteriorDraws, RunMetadata};
pub use plots::{
    binomial_quantile, plot_mass_distributions, plot_pairs, plot_period_windows,
    plot_rank_histograms, plot_separation_and_angle, plot_sky, plot_velocity_curves,
    register_bundled_font, Band, DistributionPanel, LineOfNodes, MassInterval, PlotFiles,
    PolarPoint, RankHistogramInput, SeparationPlotInput, SkyMeasurement, SkyPlotInput,
    SkyPrediction, Star, VelocityPlotInput, VelocityPoint, WindowSummary, RANK_BAND_PROBABILITY,
};
pub use plots::{plot_ephemeris, EphemerisPanel, EphemerisPlotInput};
pub use plots::{plot_next_epoch_advice, AdviceCurve, AdvicePlotInput};
pub use stats::{summarise, ParameterSummary, PosteriorSummary};
pub use summary::{
    json_summary, markdown_parameter_table, markdown_summary, text_parameter_table, text_summary,
    write_json_summary, write_markdown_summary, write_samples_csv, write_text_summary,
};
pub use tables::{
    latex_elements_table, write_astrometry_residuals_csv, write_latex_elements_table,
    AstrometryResidualRow, ElementRow, MeasuredForm,
};
