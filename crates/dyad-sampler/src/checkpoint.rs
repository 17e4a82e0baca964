//! Checkpoints: the complete sampler state, written atomically (temporary
//! file, fsync, rename, fsync of the folder) in a compact binary form.
//!
//! A checkpoint holds only the current state (positions, log-densities,
//! every random stream, counters, ladder, the bounded tau history) and the
//! byte offsets of the append-only output files, so writing it costs the
//! same however long the run. Floats are stored as their exact bit patterns,
//! so a resumed run continues bit for bit.

use std::fs;
use std::path::Path;

use crate::error::SamplerError;

const MAGIC: &[u8; 8] = b"DYADCKP1";

/// Little-endian binary writer.
#[derive(Default)]
pub(crate) struct Encoder {
    pub buf: Vec<u8>,
}

impl Encoder {
    pub fn u64(&mut self, v: u64) {
        self.buf.extend_from_slice(&v.to_le_bytes());
    }
    pub fn f64(&mut self, v: f64) {
        self.u64(v.to_bits());
    }
    pub fn f64s(&mut self, v: &[f64]) {
        self.u64(v.len() as u64);
        self.buf.reserve(8 * v.len());
        for x in v {
            self.f64(*x);
        }
    }
    pub fn bytes(&mut self, v: &[u8]) {
        self.u64(v.len() as u64);
        self.buf.extend_from_slice(v);
    }
}

/// Reader matching [`Encoder`], with typed errors on truncated input.
pub(crate) struct Decoder<'a> {
    pub buf: &'a [u8],
    pub pos: usize,
    pub path: &'a Path,
}

impl<'a> Decoder<'a> {
    fn fail(&self, what: &str) -> SamplerError {
        SamplerError::BadFile {
            path: self.path.to_path_buf(),
            reason: format!("checkpoint truncated or damaged while reading {what}"),
        }
    }
    pub fn u64(&mut self) -> Result<u64, SamplerError> {
        let end = self.pos + 8;
        let b = self
            .buf
            .get(self.pos..end)
            .ok_or_else(|| self.fail("a number"))?;
        let mut a = [0u8; 8];
        a.copy_from_slice(b);
        self.pos = end;
        Ok(u64::from_le_bytes(a))
    }
    pub fn usize(&mut self) -> Result<usize, SamplerError> {
        Ok(self.u64()? as usize)
    }
    pub fn f64(&mut self) -> Result<f64, SamplerError> {
        Ok(f64::from_bits(self.u64()?))
    }
    pub fn f64s(&mut self) -> Result<Vec<f64>, SamplerError> {
        let n = self.usize()?;
        if n > (self.buf.len() - self.pos) / 8 {
            return Err(self.fail("an array"));
        }
        (0..n).map(|_| self.f64()).collect()
    }
    pub fn f64s_into(&mut self, out: &mut [f64]) -> Result<(), SamplerError> {
        let n = self.usize()?;
        if n != out.len() {
            return Err(self.fail("an array of the expected length"));
        }
        for o in out.iter_mut() {
            *o = self.f64()?;
        }
        Ok(())
    }
    pub fn bytes(&mut self) -> Result<&'a [u8], SamplerError> {
        let n = self.usize()?;
        let end = self.pos.checked_add(n).ok_or_else(|| self.fail("bytes"))?;
        let b = self
            .buf
            .get(self.pos..end)
            .ok_or_else(|| self.fail("bytes"))?;
        self.pos = end;
        Ok(b)
    }
}

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
