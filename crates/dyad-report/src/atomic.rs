//! Atomic file writes: the target is either absent, the old file, or the
//! complete new file; never a truncated one.
//!
//! The method (temporary file, fsync, rename, fsync of the folder) is
//! `dyad_common::atomic`'s; this module gives it the report's error type.

use crate::error::ReportError;
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

/// A temporary path next to `target`, keeping the target's extension last
/// (plotters chooses the image format from the extension).
pub(crate) fn temp_path_for(target: &Path) -> Result<PathBuf, ReportError> {
    dyad_common::atomic::temp_path_for(target)
        .ok_or_else(|| ReportError::InvalidInput(format!("{} has no file name", target.display())))
}

/// Writes `target` atomically; `fill` writes the whole content.
/// If `fill` fails, the temporary file is removed and `target` is untouched.
pub fn write_atomically<F>(target: &Path, fill: F) -> Result<(), ReportError>
where
    F: FnOnce(&mut dyn Write) -> Result<(), ReportError>,
{
    dyad_common::atomic::write_atomically(target, fill, |p: &Path, e| ReportError::io(p, e))
}

/// Fsyncs an already written temporary file, renames it over `target` and
/// fsyncs the folder. On failure the temporary file is removed.
pub(crate) fn commit_temp(tmp: &Path, target: &Path) -> Result<(), ReportError> {
    dyad_common::atomic::commit_temp(tmp, target).map_err(|(path, e)| ReportError::io(path, e))
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
