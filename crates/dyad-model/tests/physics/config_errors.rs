//! Run-configuration errors name the file and the dotted key (our own
//! design rule, docs/DESIGN.md "Inputs": "Bad input gets a clear error naming the
//! file, line and column"), and a good file loads with paths relative to
//! its folder.

use std::path::PathBuf;

use dyad_model::config::{RunConfig, Tempering};
use dyad_model::likelihood::Model;

const ASTROMETRY: &str = "jyear,sep_mas,sep_err_mas,pa_deg,pa_err_deg\n\
2001.0,120.0,2.0,30.0,0.5\n2003.5,150.0,2.0,80.0,0.5\n2006.2,130.0,2.0,140.0,0.5\n";
const VELOCITIES: &str = "jyear,rv_kms,rv_err_kms,star,instrument\n\
2001.2,3.0,0.3,primary,north\n2002.9,-2.0,0.3,secondary,north\n2004.1,1.0,0.3,primary,south\n";

struct Folder {
    dir: tempfile::TempDir,
}

impl Folder {
    fn new() -> Self {
        let dir = tempfile::tempdir().unwrap();
        std::fs::create_dir(dir.path().join("data")).unwrap();
        std::fs::write(dir.path().join("data/pos.csv"), ASTROMETRY).unwrap();
        std::fs::write(dir.path().join("data/rv.csv"), VELOCITIES).unwrap();
        Self { dir }
    }
    fn config(&self, text: &str) -> PathBuf {
        let path = self.dir.path().join("run.toml");
        std::fs::write(&path, text).unwrap();
        path
    }
}

const DATA: &str = "[data]\nastrometry = \"data/pos.csv\"\nvelocities = [\"data/rv.csv\"]\n";

fn expect_error(text: &str, key: &str, words: &str) {
    let folder = Folder::new();
    let path = folder.config(text);
    let message = match RunConfig::load(&path) {
        Ok(config) => match Model::from_config(&config) {
            Ok(_) => panic!("accepted a bad configuration:\n{text}"),
            Err(e) => e.to_string(),
        },
        Err(e) => e.to_string(),
    };
    assert!(message.contains("run.toml"), "no file name in: {message}");
    assert!(
        message.contains(&format!("'{key}'")),
        "no key '{key}' in: {message}"
    );
    assert!(message.contains(words), "no '{words}' in: {message}");
}

#[test]
fn prior_bounds_reversed() {
    expect_error(
        &format!(
            "{DATA}[priors]\nperiod_days = {{ shape = \"uniform\", min = 5000, max = 100 }}\n"
        ),
        "priors.period_days",
        "",
    );
}

#[test]
fn prior_with_no_support_at_the_start_point() {
    expect_error(
        &format!("{DATA}[priors]\neccentricity = {{ shape = \"uniform\", min = 0.0, max = 0.3 }}\n[start]\neccentricity = 0.5\n"),
        "start.eccentricity",
        "no support",
    );
    // And a start period outside the default prior range (0.1 d to 1e6 d).
    expect_error(
        &format!("{DATA}[start]\nperiod_years = 5000\n"),
        "start.period_years",
        "no support",
    );
}

#[test]
fn prior_with_no_support_in_the_physical_range() {
    expect_error(
        &format!(
            "{DATA}[priors]\neccentricity = {{ shape = \"uniform\", min = 1.2, max = 2.0 }}\n"
        ),
        "priors.eccentricity",
        "no support",
    );
    expect_error(
        &format!("{DATA}[priors]\ninclination_deg = 200\n"),
        "priors.inclination_deg",
        "outside",
    );
}

#[test]
fn missing_data_file() {
    expect_error(
        "[data]\nastrometry = \"data/nowhere.csv\"\n",
        "data.astrometry",
        "not found",
    );
    expect_error(
        "[data]\nvelocities = [\"data/rv.csv\", \"data/gone.csv\"]\n",
        "data.velocities[1]",
        "not found",
    );
}

#[test]
fn unknown_keys() {
    expect_error(
        &format!("{DATA}[sampler]\nwalker = 10\n"),
        "sampler.walker",
        "unknown key",
    );
    expect_error(
        &format!("{DATA}[outputs]\nfolder = \"x\"\n"),
        "outputs",
        "unknown key",
    );
    expect_error(
        &format!("{DATA}[priors]\nperiod = 3\n"),
        "priors.period",
        "unknown key",
    );
    expect_error(
        &format!("{DATA}[priors.instruments.north]\noffset = 3\n"),
        "priors.instruments.north.offset",
        "unknown key",
    );
}

#[test]
fn wrong_types() {
    expect_error(
        &format!("{DATA}[sampler]\nwalkers = \"many\"\n"),
        "sampler.walkers",
        "whole number",
    );
    expect_error(
        &format!("{DATA}[sampler]\nseed = 1.5\n"),
        "sampler.seed",
        "whole number",
    );
    expect_error("[data]\nastrometry = 3\n", "data.astrometry", "string");
    expect_error(
        &format!("{DATA}[priors]\nmass_ratio = \"half\"\n"),
        "priors.mass_ratio",
        "",
    );
    expect_error(
        &format!("{DATA}[sampler]\ntemperatures = \"lots\"\n"),
        "sampler.temperatures",
        "auto",
    );
}

#[test]
fn unknown_prior_shape() {
    expect_error(
        &format!(
            "{DATA}[priors]\neccentricity = {{ shape = \"gaussian\", mean = 0.1, sd = 0.1 }}\n"
        ),
        "priors.eccentricity.shape",
        "unknown shape",
    );
}

#[test]
fn other_mistakes() {
    expect_error(
        &format!("{DATA}[priors]\nperiod_days = 1000\nperiod_years = 3\n"),
        "priors.period_years",
        "not both",
    );
    expect_error(
        &format!("{DATA}[priors.instruments.west]\njitter_kms = 0.1\n"),
        "priors.instruments.west",
        "no instrument 'west'",
    );
    expect_error(
        &format!("{DATA}[sampler]\nperiod_windows_days = [[100, 50]]\n"),
        "sampler.period_windows_days[0]",
        "reversed",
    );
    expect_error(
        "[data]\nastrometry = \"data/pos.csv\"\ncatalogue_parallax_mas = 20.0\n",
        "data.catalogue_parallax_err_mas",
        "error",
    );
    expect_error(
        "[data]\nastrometry = \"data/pos.csv\"\ncatalogue_parallax_mas = 20.0\ncatalogue_parallax_err_mas = 1.0\n[priors]\nparallax_mas = 20\n",
        "priors.parallax_mas",
        "keep one",
    );
    expect_error(
        &format!("{DATA}[sampler]\nwalkers = 33\n"),
        "sampler.walkers",
        "even",
    );
}

#[test]
fn syntax_error_names_the_line() {
    let folder = Folder::new();
    let path = folder.config("[data]\nastrometry = \"data/pos.csv\"\n[sampler\n");
    let message = RunConfig::load(&path).unwrap_err().to_string();
    assert!(message.contains("run.toml, line 3"), "{message}");
}

#[test]
fn good_configuration_loads() {
    let folder = Folder::new();
    let path = folder.config(&format!(
        "{DATA}catalogue_parallax_mas = 40.0\ncatalogue_parallax_err_mas = 0.5\n\
         [priors]\nperiod_years = {{ shape = \"log_uniform\", min = 1, max = 100 }}\n\
         inclination_deg = \"isotropic\"\njitter_kms = 0\n\
         [priors.instruments.south]\noffset_kms = {{ shape = \"normal\", mean = 0, sd = 10 }}\n\
         [start]\nperiod_years = 8\n\
         [sampler]\nwalkers = 40\nmax_steps = 3000\nseed = 42\ntemperatures = 8\n\
         period_windows_years = [[1, 10], [10, 100]]\n\
         [output]\nfolder = \"out\"\n"
    ));
    let config = RunConfig::load(&path).unwrap();
    assert_eq!(
        config.data.astrometry.as_deref(),
        Some(folder.dir.path().join("data/pos.csv").as_path())
    );
    assert_eq!(config.output.folder, folder.dir.path().join("out"));
    assert_eq!(config.sampler.walkers, 40);
    assert_eq!(config.sampler.seed, 42);
    assert_eq!(config.sampler.tempering, Tempering::Temperatures(8));
    assert_eq!(
        config.sampler.period_windows_days,
        vec![(365.25, 3652.5), (3652.5, 36525.0)]
    );
    assert_eq!(config.start.period_days, Some(8.0 * 365.25));
    let model = Model::from_config(&config).unwrap();
    // Jitters fixed at 0 are not sampled; two instruments give two offsets.
    let names = model.parameter_names();
    assert!(names.iter().all(|n| !n.contains("jitter")), "{names:?}");
    assert!(names.contains(&"offset_kms[south]".to_owned()));
    assert_eq!(model.dataset().astrometry.len(), 3);
    let priors = model.layout().priors();
    // Catalogue parallax became a normal prior (truncated at 0).
    assert!((priors.parallax_mas.mean() - 40.0).abs() < 1e-9);
    assert!(
        priors.period_days.contains(50.0 * 365.25) && !priors.period_days.contains(200.0 * 365.25)
    );
}

#[test]
fn shipped_configurations_load() {
    let configs = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../configs");
    for name in ["demo.toml", "sparse.toml"] {
        let config = RunConfig::load(&configs.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
        let model = Model::from_config(&config).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert!(model.dim() >= 10, "{name}: {:?}", model.parameter_names());
        assert!(
            config.sampler.walkers >= 2 * model.dim(),
            "{name}: too few walkers"
        );
    }
}

#[test]
fn the_old_stopping_rule_key_names_its_replacement() {
    expect_error(
        &format!("{DATA}[sampler]\nautocorrelation_times = 50\n"),
        "sampler.autocorrelation_times",
        "effective_draws",
    );
}

#[test]
fn stopping_rule_bounds_are_checked() {
    expect_error(
        &format!("{DATA}[sampler]\nmax_split_rhat = 0.99\n"),
        "sampler.max_split_rhat",
        "above 1",
    );
    expect_error(
        &format!("{DATA}[sampler]\neffective_draws = 0\n"),
        "sampler.effective_draws",
        "at least 1",
    );
}

/// The whole place of an error: file, line, character column and key.
fn expect_place(text: &str, place: &str, words: &str) {
    let folder = Folder::new();
    let path = folder.config(text);
    let message = RunConfig::load(&path).unwrap_err().to_string();
    assert!(
        message.contains(&format!("run.toml, {place}")),
        "no '{place}' in: {message}"
    );
    assert!(message.contains(words), "no '{words}' in: {message}");
}

#[test]
fn errors_name_the_line_and_column_of_the_value() {
    // DATA takes lines 1 to 3; the section header is line 4.
    expect_place(
        &format!("{DATA}[sampler]\nwalker = 10\n"),
        "line 5, column 1, key 'sampler.walker'",
        "allowed here: walkers, max_steps",
    );
    expect_place(
        &format!("{DATA}[sampler]\nwalkers = \"many\"\n"),
        "line 5, column 11, key 'sampler.walkers'",
        "must be a whole number >= 4, found the string \"many\"",
    );
    expect_place(
        &format!("{DATA}[sampler]\nwalkers = 33\n"),
        "line 5, column 11, key 'sampler.walkers'",
        "even",
    );
    expect_place(
        &format!("{DATA}[sampler]\nperiod_windows_days = [[10, 20], [100, \"a\"]]\n"),
        "line 5, column 40, key 'sampler.period_windows_days[1][1]'",
        "must be a finite number",
    );
    expect_place(
        &format!(
            "{DATA}[priors]\nperiod_days = {{ shape = \"uniform\", min = 5000, max = 100 }}\n"
        ),
        "line 5, column 15, key 'priors.period_days'",
        "less than",
    );
    expect_place(
        &format!("{DATA}[priors.instruments.north]\njitter_kms = {{ shape = \"normal\", mean = 0, sdev = 1 }}\n"),
        "line 5, column 14, key 'priors.instruments.north.jitter_kms.sdev'",
        "unknown field 'sdev'",
    );
    expect_place(
        &format!("{DATA}[astrometry_errors]\ndistribution = \"cauchy\"\n"),
        "line 5, column 16, key 'astrometry_errors.distribution'",
        "must be one of normal, student_t",
    );
    expect_place(
        "[data]\nvelocities = [\"data/rv.csv\", \"data/gone.csv\"]\n",
        "line 2, column 30, key 'data.velocities[1]'",
        "not found",
    );
    expect_place(
        &format!("{DATA}[start]\neccentricity = 1.5\n"),
        "line 5, column 16, key 'start.eccentricity'",
        "outside the allowed range [0, 1)",
    );
    // Retired keys are refused with their replacement but not offered.
    let folder = Folder::new();
    let message = RunConfig::load(&folder.config(&format!("{DATA}[sampler]\nwalker = 10\n")))
        .unwrap_err()
        .to_string();
    assert!(!message.contains("autocorrelation_times"), "{message}");
}
