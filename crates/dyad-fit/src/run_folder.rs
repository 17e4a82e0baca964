//! The files of a run folder, and the provenance record that makes a run
//! reproducible: a verbatim copy of the configuration and SHA-256 checksums
//! of every data file, checked again on `resume` and `report`.

use std::fs;
use std::path::{Path, PathBuf};

use crate::error::{bail, Context, Result};
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use dyad_model::config::RunConfig;

/// Names of the files in a run folder.
pub struct RunFiles {
    /// The run folder.
    pub folder: PathBuf,
}

impl RunFiles {
    /// The files of the run in `folder`.
    pub fn new(folder: impl Into<PathBuf>) -> Self {
        Self {
            folder: folder.into(),
        }
    }
    /// Verbatim copy of the configuration.
    pub fn config_copy(&self) -> PathBuf {
        self.folder.join("config.toml")
    }
    /// Provenance: configuration path, data checksums, version.
    pub fn provenance(&self) -> PathBuf {
        self.folder.join("provenance.json")
    }
    /// Cold-chain samples as the sampler streams them (binary, append-only).
    pub fn chain(&self) -> PathBuf {
        self.folder.join("chain.bin")
    }
    /// The sampler's checkpoint.
    pub fn checkpoint(&self) -> PathBuf {
        self.folder.join("checkpoint.bin")
    }
    /// Where the run ended and why (written when the sampler returns).
    pub fn outcome(&self) -> PathBuf {
        self.folder.join("outcome.json")
    }
    /// The period window a run was restricted to (`dyad periods`).
    pub fn window(&self) -> PathBuf {
        self.folder.join("period-window.json")
    }
    /// Plots folder.
    pub fn plots(&self) -> PathBuf {
        self.folder.join("plots")
    }
}

/// One input file and its checksum.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct FileChecksum {
    /// Absolute path at the time of the run.
    pub path: PathBuf,
    /// SHA-256, hex.
    pub sha256: String,
}

/// What a run was made from.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Provenance {
    /// dyad version.
    pub dyad_version: String,
    /// Absolute path of the original configuration (its folder anchors the
    /// relative data paths in the copy).
    pub config_path: PathBuf,
    /// Checksum of the configuration as copied.
    pub config_sha256: String,
    /// Checksums of the data files.
    pub data: Vec<FileChecksum>,
}

/// SHA-256 of a file, hex.
pub fn sha256_of(path: &Path) -> Result<String> {
    let bytes = fs::read(path).with_context(|| format!("reading {}", path.display()))?;
    Ok(hex(&Sha256::digest(&bytes)))
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

fn data_files(config: &RunConfig) -> Vec<PathBuf> {
    config
        .data
        .astrometry
        .iter()
        .chain(config.data.velocities.iter())
        .cloned()
        .collect()
}

impl Provenance {
    /// Records the configuration and data of a run about to start.
    pub fn record(config: &RunConfig, config_text: &str) -> Result<Self> {
        let config_path = fs::canonicalize(&config.file)
            .with_context(|| format!("resolving {}", config.file.display()))?;
        let data = data_files(config)
            .into_iter()
            .map(|p| {
                let path =
                    fs::canonicalize(&p).with_context(|| format!("resolving {}", p.display()))?;
                Ok(FileChecksum {
                    sha256: sha256_of(&path)?,
                    path,
                })
            })
            .collect::<Result<Vec<_>>>()?;
        Ok(Self {
            dyad_version: env!("CARGO_PKG_VERSION").to_owned(),
            config_path,
            config_sha256: hex(&Sha256::digest(config_text.as_bytes())),
            data,
        })
    }
}

/// A run folder read back: its configuration (from the copy) and provenance.
pub struct ExistingRun {
    /// The files.
    pub files: RunFiles,
    /// The configuration the run was made with.
    pub config: RunConfig,
}

impl ExistingRun {
    /// Opens a run folder and checks that its data files are unchanged.
    pub fn open(folder: &Path) -> Result<Self> {
        let files = RunFiles::new(folder);
        if !files.provenance().is_file() {
            bail!(
                "{} is not a dyad run folder (no provenance.json); `dyad fit CONFIG` makes one",
                folder.display()
            );
        }
        let provenance: Provenance = read_json(&files.provenance(), "provenance record", || {
            format!("reading {}", files.provenance().display())
        })?;
        let config_text = fs::read_to_string(files.config_copy())
            .with_context(|| format!("reading {}", files.config_copy().display()))?;
        // Parse the copy as if it stood where the original did, so that its
        // relative data paths resolve as they did when the run started.
        let config =
            RunConfig::from_toml_str(&config_text, &provenance.config_path).with_context(|| {
                format!(
                    "reading the configuration copy {}",
                    files.config_copy().display()
                )
            })?;
        for f in &provenance.data {
            let now = sha256_of(&f.path).with_context(|| {
                format!(
                    "the run's data file {} is no longer readable",
                    f.path.display()
                )
            })?;
            if now != f.sha256 {
                bail!(
                    "the data file {} has changed since the run started (checksum differs); \
                     restore it or start a new run",
                    f.path.display()
                );
            }
        }
        Ok(Self { files, config })
    }
}

/// Reads a JSON record that dyad wrote; `unreadable` is the message when
/// the file cannot be read, `what` names the record when it cannot be parsed.
pub fn read_json<T: serde::de::DeserializeOwned>(
    path: &Path,
    what: &str,
    unreadable: impl FnOnce() -> String,
) -> Result<T> {
    let text = fs::read_to_string(path).with_context(unreadable)?;
    serde_json::from_str(&text).with_context(|| format!("{}: not a valid {what}", path.display()))
}

/// Writes `text` to `path` atomically (never half-written).
pub fn write_text(path: &Path, text: &str) -> Result<()> {
    dyad_report::write_atomically(path, |w| {
        w.write_all(text.as_bytes())
            .map_err(|e| dyad_report::ReportError::io(path, e))
    })
    .with_context(|| format!("writing {}", path.display()))
}

/// The period window of a run of `dyad periods` (`period-window.json`).
#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct PeriodWindow {
    period_min_days: f64,
    period_max_days: f64,
}

/// Records that a run samples only periods in `[lo, hi]` days.
pub fn write_window(files: &RunFiles, lo_days: f64, hi_days: f64) -> Result<()> {
    let text = serde_json::to_string_pretty(&PeriodWindow {
        period_min_days: lo_days,
        period_max_days: hi_days,
    })?;
    write_text(&files.window(), &text)
}

/// The period window of a run, if it has one.
pub fn read_window(files: &RunFiles) -> Result<Option<(f64, f64)>> {
    let path = files.window();
    if !path.exists() {
        return Ok(None);
    }
    let w: PeriodWindow = read_json(&path, "period window record", || {
        format!("reading {}", path.display())
    })?;
    Ok(Some((w.period_min_days, w.period_max_days)))
}
