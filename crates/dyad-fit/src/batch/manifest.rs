//! The manifest of a batch: a CSV table with one row per system, naming
//! its data files and the keys of the shared base configuration it
//! changes; and the configuration of each system made from the two.
//!
//! Columns (a header row names them; order is free; `#` starts a comment
//! line; cells are trimmed; an empty cell means "no change"):
//!
//! | column | meaning |
//! |---|---|
//! | `system` | the system's name, also the name of its run folder: letters, digits, `-`, `_` and `.`, unique (required) |
//! | `astrometry` | its relative astrometry CSV |
//! | `velocities` | its radial-velocity CSVs, separated by `;` |
//! | `seed` | the sampler's seed (`[sampler] seed`) |
//! | `catalogue_parallax_mas`, `catalogue_parallax_err_mas` | its catalogue parallax and error (`[data]`) |
//! | `comment` | free text, ignored |
//! | `TABLE.KEY` (a dotted key, e.g. `sampler.max_steps`, `priors.total_mass_msun`) | that key of the base configuration, as a TOML value (`40000`, `"auto"`, `{ shape = "uniform", min = 1, max = 10 }`) |
//!
//! File names are relative to the manifest's folder. The base
//! configuration's own `[data]` file names are not used.

use std::collections::BTreeSet;
use std::fs;
use std::path::{Path, PathBuf};

use crate::error::{bail, Context, Result};

/// The columns with a fixed meaning (every other column is a dotted key).
const SYSTEM: &str = "system";
const ASTROMETRY: &str = "astrometry";
const VELOCITIES: &str = "velocities";
const SEED: &str = "seed";
const PARALLAX: &str = "catalogue_parallax_mas";
const PARALLAX_ERROR: &str = "catalogue_parallax_err_mas";
const COMMENT: &str = "comment";

/// One system of a manifest.
#[derive(Debug, Clone, PartialEq)]
pub struct SystemEntry {
    /// Its name (and run folder name).
    pub name: String,
    /// Line of the manifest it is on (1-based).
    pub line: u64,
    /// Its astrometry file (absolute, or as given joined to the manifest's
    /// folder).
    pub astrometry: Option<PathBuf>,
    /// Its velocity files.
    pub velocities: Vec<PathBuf>,
    /// Keys of the base configuration it sets: dotted key and TOML value,
    /// in column order.
    pub overrides: Vec<(Vec<String>, toml::Value)>,
}

/// A manifest read and checked.
#[derive(Debug, Clone)]
pub struct Manifest {
    /// The manifest file (absolute).
    pub path: PathBuf,
    /// The systems in manifest order.
    pub systems: Vec<SystemEntry>,
}

/// What a column of the manifest holds.
#[derive(Debug, Clone, PartialEq)]
enum Column {
    System,
    Astrometry,
    Velocities,
    /// A whole number for this dotted key.
    WholeNumber(Vec<String>),
    /// A number for this dotted key.
    Number(Vec<String>),
    /// Any TOML value for this dotted key.
    Value(Vec<String>),
    Comment,
}

fn key(parts: &[&str]) -> Vec<String> {
    parts.iter().map(|s| (*s).to_owned()).collect()
}

impl Column {
    fn of_header(name: &str) -> Option<Self> {
        Some(match name {
            SYSTEM => Self::System,
            ASTROMETRY => Self::Astrometry,
            VELOCITIES => Self::Velocities,
            SEED => Self::WholeNumber(key(&["sampler", "seed"])),
            PARALLAX => Self::Number(key(&["data", "catalogue_parallax_mas"])),
            PARALLAX_ERROR => Self::Number(key(&["data", "catalogue_parallax_err_mas"])),
            COMMENT => Self::Comment,
            dotted if dotted.contains('.') => {
                let parts: Vec<String> = dotted.split('.').map(str::to_owned).collect();
                if parts.iter().any(|p| p.is_empty()) {
                    return None;
                }
                // The data files and the run folder are the batch's to set.
                if matches!(
                    dotted,
                    "data.astrometry" | "data.velocities" | "output.folder"
                ) {
                    return None;
                }
                Self::Value(parts)
            }
            _ => return None,
        })
    }
}

/// Where a cell is, for error messages: "FILE, line L, column C ('NAME')".
fn at(path: &Path, line: u64, column: usize, name: &str) -> String {
    format!(
        "{}, line {line}, column {} ('{name}')",
        path.display(),
        column + 1
    )
}

/// Whether `name` can name a system (and its run folder) on every file
/// system: letters, digits, `-`, `_`, `.`, not starting with `.`.
fn is_folder_name(name: &str) -> bool {
    !name.is_empty()
        && !name.starts_with('.')
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'))
}

impl Manifest {
    /// Reads and checks the manifest at `path`. Every problem names the
    /// file, line and column.
    pub fn read(path: &Path) -> Result<Self> {
        let text =
            fs::read_to_string(path).with_context(|| format!("reading {}", path.display()))?;
        let path =
            std::path::absolute(path).with_context(|| format!("resolving {}", path.display()))?;
        Self::parse(&text, &path)
    }

    /// Checks the manifest text `text` of the file `path` (whose folder
    /// anchors relative file names).
    pub fn parse(text: &str, path: &Path) -> Result<Self> {
        let folder = path.parent().unwrap_or(Path::new("."));
        let mut reader = csv::ReaderBuilder::new()
            .comment(Some(b'#'))
            .trim(csv::Trim::All)
            .flexible(false)
            .from_reader(text.as_bytes());
        let headers = reader
            .headers()
            .map_err(|e| {
                crate::error::FitError::invalid(format!("{}: not a CSV table: {e}", path.display()))
            })?
            .clone();
        if headers.iter().all(str::is_empty) {
            bail!(
                "{}: empty manifest; the first row names the columns (at least `system`)",
                path.display()
            );
        }
        let header_line = headers.position().map_or(1, csv::Position::line);
        let mut columns = Vec::with_capacity(headers.len());
        let mut seen = BTreeSet::new();
        for (i, name) in headers.iter().enumerate() {
            let Some(column) = Column::of_header(name) else {
                bail!(
                    "{}: unknown column; known: system, astrometry, velocities, seed, \
                     catalogue_parallax_mas, catalogue_parallax_err_mas, comment, or a dotted key \
                     of the base configuration such as sampler.max_steps",
                    at(path, header_line, i, name)
                );
            };
            if !seen.insert(name.to_owned()) {
                bail!(
                    "{}: the column appears twice",
                    at(path, header_line, i, name)
                );
            }
            columns.push(column);
        }
        let Some(system_column) = columns.iter().position(|c| *c == Column::System) else {
            bail!(
                "{}, line {header_line}: no `system` column (the systems' names)",
                path.display()
            );
        };
        let mut systems: Vec<SystemEntry> = Vec::new();
        for record in reader.records() {
            let record = record.map_err(|e| {
                let line = e.position().map_or(0, |p| p.line());
                crate::error::FitError::invalid(format!(
                    "{}, line {line}: {e} (every row has one cell per column; quote a cell \
                     that holds a comma)",
                    path.display()
                ))
            })?;
            let line = record.position().map_or(0, |p| p.line());
            let name = record.get(system_column).unwrap_or("").to_owned();
            let header = |i: usize| headers.get(i).unwrap_or("");
            if !is_folder_name(&name) {
                bail!(
                    "{}: a system's name is its run folder's name: use letters, digits, \
                     '-', '_' and '.' (not first), not {name:?}",
                    at(path, line, system_column, SYSTEM)
                );
            }
            if let Some(earlier) = systems.iter().find(|s| s.name == name) {
                bail!(
                    "{}: the system {name:?} is listed already on line {}",
                    at(path, line, system_column, SYSTEM),
                    earlier.line
                );
            }
            let mut entry = SystemEntry {
                name,
                line,
                astrometry: None,
                velocities: Vec::new(),
                overrides: Vec::new(),
            };
            for (i, (column, cell)) in columns.iter().zip(record.iter()).enumerate() {
                if cell.is_empty() {
                    continue;
                }
                let here = || at(path, line, i, header(i));
                match column {
                    Column::System | Column::Comment => {}
                    Column::Astrometry => entry.astrometry = Some(folder.join(cell)),
                    Column::Velocities => {
                        for file in cell.split(';').map(str::trim) {
                            if file.is_empty() {
                                bail!("{}: an empty file name between ';'", here());
                            }
                            entry.velocities.push(folder.join(file));
                        }
                    }
                    Column::WholeNumber(key) => match cell.parse::<u64>() {
                        Ok(n) => match i64::try_from(n) {
                            Ok(n) => entry.overrides.push((key.clone(), toml::Value::Integer(n))),
                            Err(_) => bail!("{}: {cell} is too large", here()),
                        },
                        Err(_) => bail!("{}: expected a whole number >= 0, not {cell:?}", here()),
                    },
                    Column::Number(key) => match cell.parse::<f64>() {
                        Ok(x) if x.is_finite() => {
                            entry.overrides.push((key.clone(), toml::Value::Float(x)))
                        }
                        _ => bail!("{}: expected a finite number, not {cell:?}", here()),
                    },
                    Column::Value(key) => {
                        let value = parse_toml_value(cell).with_context(|| {
                            format!(
                                "{}: expected a TOML value (a number, \"text\", [list] or \
                                 {{ inline = \"table\" }}), not {cell:?}",
                                here()
                            )
                        })?;
                        entry.overrides.push((key.clone(), value));
                    }
                }
            }
            if entry.astrometry.is_none() && entry.velocities.is_empty() {
                bail!(
                    "{}, line {line}: the system {:?} has no data files: give `astrometry`, \
                     `velocities` or both",
                    path.display(),
                    entry.name
                );
            }
            systems.push(entry);
        }
        if systems.is_empty() {
            bail!("{}: the manifest lists no systems", path.display());
        }
        Ok(Self {
            path: path.to_path_buf(),
            systems,
        })
    }
}

/// A single TOML value written as in a configuration file (`40000`,
/// `"auto"`, `{ shape = "uniform", min = 1, max = 2 }`).
fn parse_toml_value(cell: &str) -> Result<toml::Value> {
    let mut table: toml::Table = toml::from_str(&format!("value = {cell}"))?;
    table.remove("value").context("the cell holds no value")
}

/// The configuration text of `system`: the base configuration `base`
/// (TOML) with the system's data files, its overrides and its run folder.
/// The same inputs give the same text byte for byte.
pub fn system_config(
    base: &toml::Table,
    system: &SystemEntry,
    run_folder: &Path,
) -> Result<String> {
    let mut table = base.clone();
    let data = sub_table(&mut table, &["data".to_owned()])?;
    data.remove("astrometry");
    data.remove("velocities");
    if let Some(file) = &system.astrometry {
        data.insert("astrometry".into(), path_value(file));
    }
    if !system.velocities.is_empty() {
        data.insert(
            "velocities".into(),
            toml::Value::Array(system.velocities.iter().map(|p| path_value(p)).collect()),
        );
    }
    for (key, value) in &system.overrides {
        let (last, parents) = key.split_last().context("an empty key")?;
        let parent = sub_table(&mut table, parents).with_context(|| {
            format!(
                "the manifest's column {} for {}",
                key.join("."),
                system.name
            )
        })?;
        parent.insert(last.clone(), value.clone());
    }
    let output = sub_table(&mut table, &["output".to_owned()])?;
    output.insert("folder".into(), path_value(run_folder));
    let body = toml::to_string(&table)?;
    Ok(format!(
        "# The configuration of {:?}, made by `dyad batch` from the base configuration and\n\
         # line {} of the manifest. Edit those, not this file.\n{body}",
        system.name, system.line
    ))
}

fn path_value(path: &Path) -> toml::Value {
    toml::Value::String(path.to_string_lossy().into_owned())
}

/// The table at `keys` of `table`, made if absent.
fn sub_table<'a>(table: &'a mut toml::Table, keys: &[String]) -> Result<&'a mut toml::Table> {
    let mut here = table;
    for (depth, k) in keys.iter().enumerate() {
        let entry = here
            .entry(k.clone())
            .or_insert_with(|| toml::Value::Table(toml::Table::new()));
        here = match entry {
            toml::Value::Table(t) => t,
            _ => bail!(
                "the key {} of the base configuration is a value, not a table",
                keys[..=depth].join(".")
            ),
        };
    }
    Ok(here)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<Manifest> {
        Manifest::parse(text, Path::new("/survey/manifest.csv"))
    }

    fn message(text: &str) -> String {
        parse(text).unwrap_err().to_string()
    }

    #[test]
    fn reads_systems_files_and_overrides() {
        let m = parse(
            "# a comment line\n\
             system, astrometry, velocities, seed, catalogue_parallax_mas, sampler.temperatures, priors.mass_ratio\n\
             alpha-1, a/pos.csv, a/rv1.csv; a/rv2.csv, 7, 12.5, \"auto\",\"{ shape = \"\"uniform\"\", min = 0, max = 2 }\"\n\
             beta_2, , b/rv.csv, , , ,\n",
        )
        .unwrap();
        assert_eq!(m.systems.len(), 2);
        let a = &m.systems[0];
        assert_eq!(a.name, "alpha-1");
        assert_eq!(a.line, 3);
        assert_eq!(
            a.astrometry.as_deref(),
            Some(Path::new("/survey/a/pos.csv"))
        );
        assert_eq!(
            a.velocities,
            vec![
                PathBuf::from("/survey/a/rv1.csv"),
                PathBuf::from("/survey/a/rv2.csv")
            ]
        );
        assert_eq!(a.overrides.len(), 4);
        assert_eq!(
            a.overrides[0],
            (key(&["sampler", "seed"]), toml::Value::Integer(7))
        );
        assert_eq!(
            a.overrides[1],
            (
                key(&["data", "catalogue_parallax_mas"]),
                toml::Value::Float(12.5)
            )
        );
        assert_eq!(a.overrides[2].1, toml::Value::String("auto".into()));
        assert!(a.overrides[3].1.is_table());
        let b = &m.systems[1];
        assert_eq!(b.astrometry, None);
        assert!(b.overrides.is_empty());
    }

    #[test]
    fn bad_manifests_name_file_line_and_column() {
        assert!(message("system,astrometry,colour\nx,a.csv,red\n")
            .contains("/survey/manifest.csv, line 1, column 3 ('colour'): unknown column"));
        assert!(message("system,astrometry,seed\nx,a.csv,-3\n")
            .contains("line 2, column 3 ('seed'): expected a whole number >= 0"));
        assert!(message("system,astrometry\nx,a.csv\nx,b.csv\n")
            .contains("line 3, column 1 ('system'): the system \"x\" is listed already on line 2"));
        assert!(message("system,astrometry\n../x,a.csv\n").contains("line 2, column 1"));
        assert!(message("system,astrometry\nx,a.csv,extra\n").contains("line 2"));
        assert!(message("system,velocities\nx,\n").contains("has no data files"));
        assert!(
            message("system,astrometry,catalogue_parallax_mas\nx,a.csv,NaN\n")
                .contains("column 3 ('catalogue_parallax_mas'): expected a finite number")
        );
        assert!(
            message("system,astrometry,sampler.walkers\nx,a.csv,{oops\n")
                .contains("column 3 ('sampler.walkers'): expected a TOML value")
        );
        assert!(message("astrometry\na.csv\n").contains("no `system` column"));
        assert!(message("system,astrometry\n").contains("lists no systems"));
        assert!(message("").contains("empty manifest"));
        assert!(message("system,output.folder\nx,y\n").contains("unknown column"));
    }

    #[test]
    fn system_configuration_replaces_data_and_sets_keys() {
        let m = parse("system,velocities,seed,sampler.max_steps\nx,rv.csv,5,300\n").unwrap();
        let base: toml::Table = toml::from_str(
            "[data]\nastrometry = \"old.csv\"\ncatalogue_parallax_mas = 3.0\ncatalogue_parallax_err_mas = 0.1\n\
             [sampler]\nseed = 1\nwalkers = 32\n",
        )
        .unwrap();
        let text = system_config(&base, &m.systems[0], Path::new("/out/systems/x")).unwrap();
        let back: toml::Table = toml::from_str(&text).unwrap();
        assert!(back["data"].get("astrometry").is_none());
        assert_eq!(
            back["data"]["velocities"][0].as_str(),
            Some("/survey/rv.csv")
        );
        assert_eq!(back["data"]["catalogue_parallax_mas"].as_float(), Some(3.0));
        assert_eq!(back["sampler"]["seed"].as_integer(), Some(5));
        assert_eq!(back["sampler"]["max_steps"].as_integer(), Some(300));
        assert_eq!(back["sampler"]["walkers"].as_integer(), Some(32));
        assert_eq!(back["output"]["folder"].as_str(), Some("/out/systems/x"));
        // Deterministic: the same inputs give the same bytes.
        assert_eq!(
            text,
            system_config(&base, &m.systems[0], Path::new("/out/systems/x")).unwrap()
        );
        let clash: toml::Table = toml::from_str("sampler = 3\n").unwrap();
        assert!(system_config(&clash, &m.systems[0], Path::new("/o"))
            .unwrap_err()
            .to_string()
            .contains("the manifest's column sampler."));
    }
}
