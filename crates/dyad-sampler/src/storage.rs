//! Where thinned samples go: a small append-only sink trait with in-memory
//! and on-disk implementations.
//!
//! A record is one thinned step of the ensemble: the step number and a fixed
//! number of `f64` values. For the cold-chain samples the values are, walker
//! by walker, the position (dim values), the log prior and the log likelihood
//! (`values_per_walker = dim + 2`). For the tempered log-likelihoods the
//! values are `[temperature][walker]`.
//!
//! The on-disk format (all little-endian): a 32-byte header, magic
//! `b"DYADREC1"`, then `n_walkers: u64`, `values_per_walker: u64`,
//! `kind: u64` (0 samples, 1 tempered log-likelihoods); then records, each
//! `step: u64` followed by `n_walkers * values_per_walker` `f64` values.
//! The file is only ever appended to; a resumed run truncates it back to the
//! byte offset saved in its checkpoint.

use std::fs::{File, OpenOptions};
use std::io::{BufWriter, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use crate::error::SamplerError;

const MAGIC: &[u8; 8] = b"DYADREC1";
const HEADER_LEN: u64 = 32;

/// What a record file holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RecordKind {
    /// Cold-chain samples: per walker, position then log prior then log likelihood.
    Samples,
    /// Tempered log-likelihoods: `[temperature][walker]`.
    TemperedLogLikelihoods,
}

impl RecordKind {
    fn code(self) -> u64 {
        match self {
            RecordKind::Samples => 0,
            RecordKind::TemperedLogLikelihoods => 1,
        }
    }
}

/// Destination of thinned records. Positions are opaque numbers that only
/// increase; [`SampleSink::truncate`] returns the sink to an earlier one.
pub trait SampleSink: Send {
    /// Appends one record; `values.len()` is fixed for the life of the sink.
    fn append(&mut self, step: u64, values: &[f64]) -> Result<(), SamplerError>;
    /// Makes everything appended so far durable and returns the position
    /// just after it (saved in checkpoints).
    fn sync(&mut self) -> Result<u64, SamplerError>;
    /// Drops every record after `position` (used on resume).
    fn truncate(&mut self, position: u64) -> Result<(), SamplerError>;
}

/// Records read back from a sink or file.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RecordTable {
    /// Walkers per record.
    pub n_walkers: usize,
    /// Values per walker per record.
    pub values_per_walker: usize,
    /// Step number of each record.
    pub steps: Vec<u64>,
    /// All values, record-major then walker-major.
    pub values: Vec<f64>,
}

impl RecordTable {
    fn width(&self) -> usize {
        self.n_walkers * self.values_per_walker
    }

    /// Number of records.
    pub fn len(&self) -> usize {
        self.steps.len()
    }

    /// True when there are no records.
    pub fn is_empty(&self) -> bool {
        self.steps.is_empty()
    }

    /// Index of the first record with step > `burn_in`.
    pub fn first_after(&self, burn_in: u64) -> usize {
        self.steps.partition_point(|&s| s <= burn_in)
    }

    /// Column `k` (0 <= k < values_per_walker) of every walker in records
    /// `first..`, step-major (`[record * n_walkers + walker]`). For sample
    /// records, k < dim is a parameter, dim the log prior, dim + 1 the log likelihood.
    pub fn column(&self, k: usize, first: usize) -> Vec<f64> {
        let (nw, vpw, width) = (self.n_walkers, self.values_per_walker, self.width());
        let mut out = Vec::with_capacity(self.len().saturating_sub(first) * nw);
        for r in first..self.len() {
            let rec = &self.values[r * width..(r + 1) * width];
            out.extend((0..nw).map(|w| rec[w * vpw + k]));
        }
        out
    }
}

/// Keeps every record in memory (memory grows with the run: thin accordingly).
#[derive(Clone, Debug)]
pub struct MemorySink {
    table: RecordTable,
}

impl MemorySink {
    /// A sink for records of `n_walkers * values_per_walker` values.
    pub fn new(n_walkers: usize, values_per_walker: usize) -> Self {
        Self {
            table: RecordTable {
                n_walkers,
                values_per_walker,
                ..RecordTable::default()
            },
        }
    }

    /// A sink for cold-chain samples of a `dim`-parameter problem.
    pub fn for_samples(dim: usize, n_walkers: usize) -> Self {
        Self::new(n_walkers, dim + 2)
    }

    /// The records so far.
    pub fn table(&self) -> &RecordTable {
        &self.table
    }

    /// Consumes the sink, returning its records.
    pub fn into_table(self) -> RecordTable {
        self.table
    }
}

impl SampleSink for MemorySink {
    fn append(&mut self, step: u64, values: &[f64]) -> Result<(), SamplerError> {
        if values.len() != self.table.width() {
            return Err(SamplerError::Config(format!(
                "record of {} values given to a sink of width {}",
                values.len(),
                self.table.width()
            )));
        }
        self.table.steps.push(step);
        self.table.values.extend_from_slice(values);
        Ok(())
    }
    fn sync(&mut self) -> Result<u64, SamplerError> {
        Ok(self.table.len() as u64)
    }
    fn truncate(&mut self, position: u64) -> Result<(), SamplerError> {
        let n = (position as usize).min(self.table.len());
        let width = self.table.width();
        self.table.steps.truncate(n);
        self.table.values.truncate(n * width);
        Ok(())
    }
}

/// Appends records to a file; memory use is a fixed write buffer.
#[derive(Debug)]
pub struct FileSink {
    path: PathBuf,
    writer: BufWriter<File>,
    width: usize,
    position: u64,
}

impl FileSink {
    /// Creates (or replaces) a file for records of `n_walkers * values_per_walker` values.
    pub fn create(
        path: impl AsRef<Path>,
        kind: RecordKind,
        n_walkers: usize,
        values_per_walker: usize,
    ) -> Result<Self, SamplerError> {
        let path = path.as_ref().to_path_buf();
        let file = File::create(&path).map_err(|e| SamplerError::io(&path, e))?;
        let mut writer = BufWriter::with_capacity(1 << 16, file);
        let mut header = Vec::with_capacity(HEADER_LEN as usize);
        header.extend_from_slice(MAGIC);
        header.extend_from_slice(&(n_walkers as u64).to_le_bytes());
        header.extend_from_slice(&(values_per_walker as u64).to_le_bytes());
        header.extend_from_slice(&kind.code().to_le_bytes());
        writer
            .write_all(&header)
            .map_err(|e| SamplerError::io(&path, e))?;
        Ok(Self {
            path,
            writer,
            width: n_walkers * values_per_walker,
            position: HEADER_LEN,
        })
    }

    /// Creates a cold-chain sample file for a `dim`-parameter problem.
    pub fn create_samples(
        path: impl AsRef<Path>,
        dim: usize,
        n_walkers: usize,
    ) -> Result<Self, SamplerError> {
        Self::create(path, RecordKind::Samples, n_walkers, dim + 2)
    }

    /// Opens an existing file to append to (for resuming; the run truncates
    /// it to its checkpoint's offset before writing).
    pub fn open(path: impl AsRef<Path>) -> Result<Self, SamplerError> {
        let path = path.as_ref().to_path_buf();
        let mut file = OpenOptions::new()
            .read(true)
            .write(true)
            .open(&path)
            .map_err(|e| SamplerError::io(&path, e))?;
        let (n_walkers, vpw, _) = read_header(&mut file, &path)?;
        let position = file
            .seek(SeekFrom::End(0))
            .map_err(|e| SamplerError::io(&path, e))?;
        Ok(Self {
            writer: BufWriter::with_capacity(1 << 16, file),
            path,
            width: n_walkers * vpw,
            position,
        })
    }

    /// Path of the file.
    pub fn path(&self) -> &Path {
        &self.path
    }
}

impl SampleSink for FileSink {
    fn append(&mut self, step: u64, values: &[f64]) -> Result<(), SamplerError> {
        if values.len() != self.width {
            return Err(SamplerError::Config(format!(
                "record of {} values given to a file of width {}",
                values.len(),
                self.width
            )));
        }
        let path = &self.path;
        self.writer
            .write_all(&step.to_le_bytes())
            .map_err(|e| SamplerError::io(path, e))?;
        for v in values {
            self.writer
                .write_all(&v.to_le_bytes())
                .map_err(|e| SamplerError::io(path, e))?;
        }
        self.position += 8 * (1 + self.width as u64);
        Ok(())
    }
    fn sync(&mut self) -> Result<u64, SamplerError> {
        let path = &self.path;
        self.writer.flush().map_err(|e| SamplerError::io(path, e))?;
        self.writer
            .get_ref()
            .sync_data()
            .map_err(|e| SamplerError::io(path, e))?;
        Ok(self.position)
    }
    fn truncate(&mut self, position: u64) -> Result<(), SamplerError> {
        let path = self.path.clone();
        self.writer
            .flush()
            .map_err(|e| SamplerError::io(&path, e))?;
        let record = 8 * (1 + self.width as u64);
        if position < HEADER_LEN
            || !(position - HEADER_LEN).is_multiple_of(record)
            || position > self.position
        {
            return Err(SamplerError::BadFile {
                path,
                reason: format!(
                    "cannot truncate to byte {position}: file holds {} bytes of {record}-byte records",
                    self.position
                ),
            });
        }
        let file = self.writer.get_mut();
        file.set_len(position)
            .map_err(|e| SamplerError::io(&path, e))?;
        file.seek(SeekFrom::Start(position))
            .map_err(|e| SamplerError::io(&path, e))?;
        self.position = position;
        Ok(())
    }
}

fn read_header(file: &mut File, path: &Path) -> Result<(usize, usize, u64), SamplerError> {
    let mut header = [0u8; HEADER_LEN as usize];
    file.read_exact(&mut header)
        .map_err(|e| SamplerError::io(path, e))?;
    if &header[..8] != MAGIC {
        return Err(SamplerError::BadFile {
            path: path.to_path_buf(),
            reason: "not a dyad record file (wrong magic bytes)".into(),
        });
    }
    let word = |i: usize| {
        let mut b = [0u8; 8];
        b.copy_from_slice(&header[8 * i..8 * i + 8]);
        u64::from_le_bytes(b)
    };
    Ok((word(1) as usize, word(2) as usize, word(3)))
}

/// Reads a record file one record at a time, without holding the file in
/// memory: `visit(step, values)` is called for every whole record in order
/// (a partial record at the end, from a run killed mid-write, is ignored).
/// Returns `(n_walkers, values_per_walker)` from the header.
pub fn for_each_record(
    path: impl AsRef<Path>,
    mut visit: impl FnMut(u64, &[f64]),
) -> Result<(usize, usize), SamplerError> {
    let path = path.as_ref();
    let mut file = File::open(path).map_err(|e| SamplerError::io(path, e))?;
    let (n_walkers, values_per_walker, _) = read_header(&mut file, path)?;
    let width = n_walkers * values_per_walker;
    let mut reader = std::io::BufReader::with_capacity(1 << 20, file);
    let mut bytes = vec![0u8; 8 * (1 + width)];
    let mut values = vec![0.0; width];
    let word = |c: &[u8]| {
        let mut b = [0u8; 8];
        b.copy_from_slice(c);
        b
    };
    loop {
        match reader.read_exact(&mut bytes) {
            Ok(()) => {}
            Err(e) if e.kind() == std::io::ErrorKind::UnexpectedEof => break,
            Err(e) => return Err(SamplerError::io(path, e)),
        }
        let step = u64::from_le_bytes(word(&bytes[..8]));
        for (v, c) in values.iter_mut().zip(bytes[8..].chunks_exact(8)) {
            *v = f64::from_le_bytes(word(c));
        }
        visit(step, &values);
    }
    Ok((n_walkers, values_per_walker))
}

/// Reads a whole record file (samples or tempered log-likelihoods). A partial
/// record at the end (a run killed mid-write) is ignored.
pub fn read_record_file(path: impl AsRef<Path>) -> Result<RecordTable, SamplerError> {
    let mut steps = Vec::new();
    let mut values = Vec::new();
    let (n_walkers, values_per_walker) = for_each_record(path, |step, v| {
        steps.push(step);
        values.extend_from_slice(v);
    })?;
    Ok(RecordTable {
        n_walkers,
        values_per_walker,
        steps,
        values,
    })
}
