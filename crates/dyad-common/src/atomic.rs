//! Atomic file writes: the target is either absent, the old file, or the
//! complete new file; never a truncated one.
//!
//! Method (common practice on POSIX file systems): write to a uniquely named
//! temporary file in the same folder, flush and fsync it, rename it over the
//! target (rename is atomic within one file system), then fsync the folder so
//! the rename itself is durable.

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

static TEMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// A temporary path next to `target`, unique within the machine (process
/// id and a counter), keeping the target's extension last (some writers
/// choose the format from the extension). `None` if `target` has no file
/// name.
pub fn temp_path_for(target: &Path) -> Option<PathBuf> {
    let file_name = target.file_name()?.to_string_lossy();
    let n = TEMP_COUNTER.fetch_add(1, Ordering::Relaxed);
    let ext = target
        .extension()
        .map(|e| format!(".{}", e.to_string_lossy()))
        .unwrap_or_default();
    let tmp_name = format!(".{file_name}.tmp-{}-{n}{ext}", std::process::id());
    Some(target.with_file_name(tmp_name))
}

/// Writes `target` atomically; `fill` writes the whole content. If `fill`
/// fails, the temporary file is removed and `target` is untouched. File
/// system errors become `E` through `io_error(path, error)`.
pub fn write_atomically<E, F>(
    target: &Path,
    fill: F,
    io_error: impl Fn(&Path, io::Error) -> E,
) -> Result<(), E>
where
    F: FnOnce(&mut dyn Write) -> Result<(), E>,
{
    let tmp = temp_path_for(target).ok_or_else(|| {
        io_error(
            target,
            io::Error::new(io::ErrorKind::InvalidInput, "the path has no file name"),
        )
    })?;
    let result = (|| {
        let file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)
            .map_err(|e| io_error(&tmp, e))?;
        let mut writer = BufWriter::new(file);
        fill(&mut writer)?;
        let file = writer
            .into_inner()
            .map_err(|e| io_error(&tmp, e.into_error()))?;
        file.sync_all().map_err(|e| io_error(&tmp, e))?;
        Ok(())
    })();
    match result {
        Ok(()) => commit_temp(&tmp, target).map_err(|(path, e)| io_error(&path, e)),
        Err(e) => {
            let _ = fs::remove_file(&tmp);
            Err(e)
        }
    }
}

/// Fsyncs an already written temporary file, renames it over `target` and
/// fsyncs the folder. On failure the temporary file is removed and the
/// error comes with the path it concerns.
pub fn commit_temp(tmp: &Path, target: &Path) -> Result<(), (PathBuf, io::Error)> {
    let result = (|| {
        File::open(tmp)
            .and_then(|f| f.sync_all())
            .map_err(|e| (tmp.to_owned(), e))?;
        fs::rename(tmp, target).map_err(|e| (target.to_owned(), e))?;
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

#[cfg(test)]
mod tests {
    use super::*;

    fn io_text(path: &Path, e: io::Error) -> String {
        format!("{}: {e}", path.display())
    }

    #[test]
    fn a_failed_fill_leaves_the_old_file_and_no_temporary() {
        let dir = tempfile::tempdir().expect("temp dir");
        let target = dir.path().join("a.txt");
        write_atomically(
            &target,
            |w| w.write_all(b"old").map_err(|e| e.to_string()),
            io_text,
        )
        .expect("first write");
        let failed = write_atomically(
            &target,
            |w| {
                w.write_all(b"half").map_err(|e| e.to_string())?;
                Err("fill failed".to_owned())
            },
            io_text,
        );
        assert_eq!(failed, Err("fill failed".to_owned()));
        assert_eq!(fs::read_to_string(&target).expect("read"), "old");
        let names: Vec<_> = fs::read_dir(dir.path()).expect("list").collect();
        assert_eq!(names.len(), 1, "a temporary file was left behind");
        write_atomically(
            &target,
            |w| w.write_all(b"new").map_err(|e| e.to_string()),
            io_text,
        )
        .expect("second write");
        assert_eq!(fs::read_to_string(&target).expect("read"), "new");
    }

    #[test]
    fn the_temporary_keeps_the_extension_last() {
        let tmp = temp_path_for(Path::new("/x/plot.png")).expect("has a name");
        assert_eq!(tmp.extension().and_then(|e| e.to_str()), Some("png"));
        assert!(temp_path_for(Path::new("/")).is_none());
    }
}
