//! Checkpoint files: a payload framed by magic bytes and its length, written
//! atomically (temporary file, fsync, rename, fsync of the folder).
//!
//! A checkpoint holds only the current state (positions, log-densities,
//! every random stream, counters, ladder, the bounded tau history, the
//! moves' states) and the byte offsets of the append-only output files, so
//! writing it costs the same however long the run. The payload's format
//! (serde, CBOR, versioned and checksummed) is in `run/saved.rs`.

use std::fs;
use std::path::Path;

use crate::error::SamplerError;

const MAGIC: &[u8; 8] = b"DYADCKP1";

/// Writes `payload` to `path` atomically: temporary file, fsync, rename, fsync of the folder.
pub(crate) fn write_atomic(path: &Path, payload: &[u8]) -> Result<(), SamplerError> {
    dyad_common::atomic::write_atomically(
        path,
        |f| {
            f.write_all(MAGIC)
                .and_then(|()| f.write_all(&(payload.len() as u64).to_le_bytes()))
                .and_then(|()| f.write_all(payload))
                .map_err(|e| SamplerError::io(path, e))
        },
        |p: &Path, e| SamplerError::io(p, e),
    )
}

/// Reads a checkpoint's payload.
pub(crate) fn read_payload(path: &Path) -> Result<Vec<u8>, SamplerError> {
    let bytes = fs::read(path).map_err(|e| SamplerError::io(path, e))?;
    if bytes.len() < 16 || &bytes[..8] != MAGIC {
        return Err(SamplerError::BadFile {
            path: path.to_path_buf(),
            reason: "not a dyad checkpoint (wrong magic bytes)".into(),
        });
    }
    let mut n = [0u8; 8];
    n.copy_from_slice(&bytes[8..16]);
    let n = u64::from_le_bytes(n) as usize;
    if bytes.len() != 16 + n {
        return Err(SamplerError::BadFile {
            path: path.to_path_buf(),
            reason: format!(
                "checkpoint length {} does not match its header",
                bytes.len()
            ),
        });
    }
    Ok(bytes[16..].to_vec())
}
