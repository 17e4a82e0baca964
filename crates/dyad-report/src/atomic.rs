//! Atomic file writes: the target is either absent, the old file, or the
//! complete new file; never a truncated one.
//!
//! Method (common practice on POSIX file systems): write to a uniquely named
//! temporary file in the same folder, flush and fsync it, rename it over the
//! target (rename is atomic within one file system), then fsync the folder so
//! the rename itself is durable.

use crate::error::ReportError;
use std::fs::{self, File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

static TEMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// A temporary path next to `target`, keeping the target's extension last
/// (plotters chooses the image format from the extension).
pub(crate) fn temp_path_for(target: &Path) -> Result<PathBuf, ReportError> {
    let file_name = target.file_name().and_then(|n| n.to_str()).ok_or_else(|| {
        ReportError::InvalidInput(format!("{} has no file name", target.display()))
    })?;
    let n = TEMP_COUNTER.fetch_add(1, Ordering::Relaxed);
    let ext = target
        .extension()
        .and_then(|e| e.to_str())
        .map(|e| format!(".{e}"))
        .unwrap_or_default();
    let tmp_name = format!(".{file_name}.tmp-{}-{n}{ext}", std::process::id());
    Ok(target.with_file_name(tmp_name))
}

/// Writes `target` atomically; `fill` writes the whole content.
/// If `fill` fails, the temporary file is removed and `target` is untouched.
pub fn write_atomically<F>(target: &Path, fill: F) -> Result<(), ReportError>
where
    F: FnOnce(&mut dyn Write) -> Result<(), ReportError>,
{
    let tmp = temp_path_for(target)?;
    let result = (|| {
        let file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)
            .map_err(|e| ReportError::io(&tmp, e))?;
        let mut writer = BufWriter::new(file);
        fill(&mut writer)?;
        let file = writer
            .into_inner()
            .map_err(|e| ReportError::io(&tmp, e.into_error()))?;
        file.sync_all().map_err(|e| ReportError::io(&tmp, e))?;
        Ok(())
    })();
    match result {
        Ok(()) => commit_temp(&tmp, target),
        Err(e) => {
            let _ = fs::remove_file(&tmp);
            Err(e)
        }
    }
}

/// Fsyncs an already written temporary file, renames it over `target` and
/// fsyncs the folder. On failure the temporary file is removed.
pub(crate) fn commit_temp(tmp: &Path, target: &Path) -> Result<(), ReportError> {
    let result = (|| {
        File::open(tmp)
            .and_then(|f| f.sync_all())
            .map_err(|e| ReportError::io(tmp, e))?;
        fs::rename(tmp, target).map_err(|e| ReportError::io(target, e))?;
        sync_parent(target);
        Ok(())
    })();
    if result.is_err() {
        let _ = fs::remove_file(tmp);
    }
    result
}

/// Best effort: some platforms cannot open a folder for fsync.
fn sync_parent(target: &Path) {
    if let Some(parent) = target.parent() {
        let parent = if parent.as_os_str().is_empty() {
            Path::new(".")
        } else {
            parent
        };
        if let Ok(dir) = File::open(parent) {
            let _ = dir.sync_all();
        }
    }
}

/// Makes sure `path` is a folder a run can write into.
///
/// - absent: created (with parents);
/// - an empty folder: used as is;
/// - a folder with files: refused with [`ReportError::RunFolderExists`]
///   unless `overwrite` is true, in which case it is used as is and files of
///   the same names are replaced (atomically) as they are written; nothing is
///   deleted;
/// - anything else: [`ReportError::NotAFolder`].
///
/// Returns the folder path.
pub fn prepare_run_folder(path: &Path, overwrite: bool) -> Result<PathBuf, ReportError> {
    match fs::metadata(path) {
        Ok(meta) if meta.is_dir() => {
            let mut entries = fs::read_dir(path).map_err(|e| ReportError::io(path, e))?;
            if entries.next().is_some() && !overwrite {
                return Err(ReportError::RunFolderExists(path.to_path_buf()));
            }
            Ok(path.to_path_buf())
        }
        Ok(_) => Err(ReportError::NotAFolder(path.to_path_buf())),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            fs::create_dir_all(path).map_err(|e| ReportError::io(path, e))?;
            Ok(path.to_path_buf())
        }
        Err(e) => Err(ReportError::io(path, e)),
    }
}
