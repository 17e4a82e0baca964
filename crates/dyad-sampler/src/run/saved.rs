//! The checkpoint format: the run state serialised with serde as CBOR
//! (RFC 8949), inside a versioned, checksummed envelope.
//!
//! CBOR because it is self-describing (field names and types travel with
//! the data, so any CBOR reader can inspect a checkpoint, and a later format
//! can add fields without breaking the reader of the envelope) and still
//! binary: a float is stored in the shortest IEEE width that gives back
//! exactly the same bits (the encoder checks the bits), so a resumed run
//! continues bit for bit, and the file stays about as small as a raw dump.
//!
//! The file is the frame of [`crate::checkpoint::write_atomic`] (magic
//! bytes, payload length) around a CBOR [`Envelope`]: the format's name,
//! its version, the SHA-256 of the body, and the body, the CBOR encoding of
//! [`SavedRun`]. The envelope never changes; a reader checks the name, the
//! version and the checksum before it decodes the body, so a checkpoint of
//! another version or a damaged one is refused with a message saying so.

use std::path::Path;

use serde::{Deserialize, Deserializer, Serialize, Serializer};
use sha2::{Digest, Sha256};

use super::config::{ConvergenceCheck, RunConfig};
use super::state::State;
use crate::error::SamplerError;
use crate::moves::{MoveMixture, MoveRecord};
use crate::rng::StreamRng;

/// The name every checkpoint envelope carries.
const FORMAT_NAME: &str = "dyad sampler checkpoint";
/// Version of the body's layout ([`SavedRun`]); version 1 was the raw
/// little-endian layout of earlier releases, which had no envelope.
pub(super) const FORMAT_VERSION: u32 = 2;

/// The outer layer of a checkpoint (stable across versions).
#[derive(Serialize, Deserialize)]
struct Envelope {
    format: String,
    version: u32,
    /// SHA-256 of `body`.
    sha256: Bytes,
    /// CBOR encoding of [`SavedRun`].
    body: Bytes,
}

/// A byte string (serialised as one CBOR byte string, not as an array of
/// numbers).
struct Bytes(Vec<u8>);

impl Serialize for Bytes {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.serialize_bytes(&self.0)
    }
}

impl<'de> Deserialize<'de> for Bytes {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct Visitor;
        impl<'de> serde::de::Visitor<'de> for Visitor {
            type Value = Bytes;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a byte string")
            }
            fn visit_bytes<E: serde::de::Error>(self, v: &[u8]) -> Result<Bytes, E> {
                Ok(Bytes(v.to_vec()))
            }
            fn visit_byte_buf<E: serde::de::Error>(self, v: Vec<u8>) -> Result<Bytes, E> {
                Ok(Bytes(v))
            }
        }
        deserializer.deserialize_byte_buf(Visitor)
    }
}

/// Everything a resumed run needs (format version 2).
#[derive(Serialize, Deserialize)]
struct SavedRun {
    /// What the run's configuration must agree on ([`RunConfig::fingerprint`]).
    fingerprint: String,
    /// Each move's name, weight and state ([`crate::EnsembleMove::state`]).
    moves: Vec<MoveRecord>,
    step: u64,
    converged: bool,
    burn_in: u64,
    next_check: u64,
    /// Byte offsets of the sample and ladder files at the checkpoint.
    sample_position: u64,
    ladder_position: u64,
    last_check: Option<ConvergenceCheck>,
    swap_rng: StreamRng,
    rungs: Vec<SavedRung>,
    ladder: SavedLadder,
    history: SavedHistory,
}

#[derive(Serialize, Deserialize)]
struct SavedRung {
    beta: f64,
    walkers: Vec<SavedWalker>,
}

#[derive(Serialize, Deserialize)]
struct SavedWalker {
    position: Vec<f64>,
    log_prior: f64,
    log_likelihood: f64,
    rng: StreamRng,
    accepted: u64,
    proposed: u64,
    rejection_run: u64,
    longest_rejection_run: u64,
}

#[derive(Serialize, Deserialize)]
struct SavedLadder {
    frozen: bool,
    adapt_steps: u64,
    accepted: Vec<u64>,
    proposed: Vec<u64>,
}

/// The kept part of the cold-chain history: per parameter, `len` snapshots
/// of every walker, step-major.
#[derive(Serialize, Deserialize)]
struct SavedHistory {
    thin: u64,
    len: usize,
    start: u64,
    columns: Vec<Vec<f64>>,
}

fn damaged(path: &Path, reason: impl Into<String>) -> SamplerError {
    SamplerError::BadFile {
        path: path.to_path_buf(),
        reason: reason.into(),
    }
}

/// The checkpoint payload of `state` under `config` with `moves`.
pub(super) fn encode(
    state: &State,
    config: &RunConfig,
    moves: &MoveMixture,
) -> Result<Vec<u8>, SamplerError> {
    let h = &state.history;
    let saved = SavedRun {
        fingerprint: config.fingerprint(state.dim),
        moves: moves.checkpoint_states(),
        step: state.step,
        converged: state.converged,
        burn_in: state.burn_in,
        next_check: state.next_check,
        sample_position: state.sample_position,
        ladder_position: state.ladder_position,
        last_check: state.last_check,
        swap_rng: state.swap_rng.clone(),
        rungs: state
            .rungs
            .iter()
            .map(|r| SavedRung {
                beta: r.beta,
                walkers: r
                    .walkers
                    .iter()
                    .map(|w| SavedWalker {
                        position: w.position.clone(),
                        log_prior: w.log_prior,
                        log_likelihood: w.log_likelihood,
                        rng: w.rng.clone(),
                        accepted: w.accepted,
                        proposed: w.proposed,
                        rejection_run: w.rejection_run,
                        longest_rejection_run: w.longest_rejection_run,
                    })
                    .collect(),
            })
            .collect(),
        ladder: SavedLadder {
            frozen: state.ladder.frozen,
            adapt_steps: state.ladder.adapt_steps,
            accepted: state.ladder.accepted.clone(),
            proposed: state.ladder.proposed.clone(),
        },
        history: SavedHistory {
            thin: h.thin,
            len: h.len,
            start: h.start,
            columns: h
                .data
                .iter()
                .map(|col| col[..h.len * h.n_walkers].to_vec())
                .collect(),
        },
    };
    let body = to_cbor(&saved)?;
    to_cbor(&Envelope {
        format: FORMAT_NAME.into(),
        version: FORMAT_VERSION,
        sha256: Bytes(Sha256::digest(&body).to_vec()),
        body: Bytes(body),
    })
}

/// The body of a checkpoint payload, after checking its envelope.
fn open(payload: &[u8], path: &Path) -> Result<SavedRun, SamplerError> {
    let envelope: Envelope = ciborium::from_reader(payload).map_err(|e| {
        damaged(
            path,
            format!(
                "not a readable checkpoint ({e}): damaged, or written by a dyad older \
                 than checkpoint format {FORMAT_VERSION}; start the run afresh"
            ),
        )
    })?;
    if envelope.format != FORMAT_NAME {
        return Err(damaged(
            path,
            format!("not a dyad checkpoint (format {:?})", envelope.format),
        ));
    }
    if envelope.version != FORMAT_VERSION {
        return Err(damaged(
            path,
            format!(
                "checkpoint format version {} cannot be read by this dyad, which reads \
                 version {FORMAT_VERSION}; resume with the dyad that wrote it or start afresh",
                envelope.version
            ),
        ));
    }
    if Sha256::digest(&envelope.body.0).as_slice() != envelope.sha256.0.as_slice() {
        return Err(damaged(
            path,
            "checkpoint is damaged: its checksum does not match its contents",
        ));
    }
    ciborium::from_reader(envelope.body.0.as_slice())
        .map_err(|e| damaged(path, format!("checkpoint is damaged: {e}")))
}

/// Step count stored in a checkpoint payload.
pub(super) fn step(payload: &[u8], path: &Path) -> Result<u64, SamplerError> {
    Ok(open(payload, path)?.step)
}

/// Restores a checkpoint payload into `state` (a blank state of the shape
/// `config` gives) and the checkpointed move states into `moves`.
pub(super) fn restore(
    payload: &[u8],
    path: &Path,
    config: &RunConfig,
    state: &mut State,
    moves: &mut MoveMixture,
) -> Result<(), SamplerError> {
    let saved = open(payload, path)?;
    let fingerprint = config.fingerprint(state.dim);
    if saved.fingerprint != fingerprint {
        return Err(SamplerError::CheckpointMismatch(format!(
            "checkpoint was written with [{}], this run has [{fingerprint}]",
            saved.fingerprint
        )));
    }
    moves.restore(&saved.moves)?;
    // The fingerprint fixes every shape; check them anyway, so that a
    // checkpoint that passed its checksum but was built wrongly is refused
    // rather than indexed out of bounds.
    let (dim, nw) = (state.dim, state.n_walkers);
    let h = &mut state.history;
    let shapes_fit = saved.rungs.len() == state.rungs.len()
        && saved
            .rungs
            .iter()
            .all(|r| r.walkers.len() == nw && r.walkers.iter().all(|w| w.position.len() == dim))
        && saved.ladder.accepted.len() == state.ladder.accepted.len()
        && saved.ladder.proposed.len() == state.ladder.proposed.len()
        && saved.history.len <= h.capacity
        && saved.history.thin > 0
        && saved.history.columns.len() == h.data.len()
        && saved
            .history
            .columns
            .iter()
            .all(|c| c.len() == saved.history.len * h.n_walkers);
    if !shapes_fit {
        return Err(damaged(
            path,
            "checkpoint's ensemble, ladder or history does not have the configured shape",
        ));
    }
    state.step = saved.step;
    state.converged = saved.converged;
    state.burn_in = saved.burn_in;
    state.next_check = saved.next_check;
    state.sample_position = saved.sample_position;
    state.ladder_position = saved.ladder_position;
    state.last_check = saved.last_check;
    state.swap_rng = saved.swap_rng;
    for (rung, saved) in state.rungs.iter_mut().zip(saved.rungs) {
        rung.beta = saved.beta;
        for (w, s) in rung.walkers.iter_mut().zip(saved.walkers) {
            w.position.copy_from_slice(&s.position);
            w.log_prior = s.log_prior;
            w.log_likelihood = s.log_likelihood;
            w.rng = s.rng;
            w.accepted = s.accepted;
            w.proposed = s.proposed;
            w.rejection_run = s.rejection_run;
            w.longest_rejection_run = s.longest_rejection_run;
        }
    }
    let l = &mut state.ladder;
    l.frozen = saved.ladder.frozen;
    l.adapt_steps = saved.ladder.adapt_steps;
    l.accepted.copy_from_slice(&saved.ladder.accepted);
    l.proposed.copy_from_slice(&saved.ladder.proposed);
    h.thin = saved.history.thin;
    h.len = saved.history.len;
    h.start = saved.history.start;
    for (col, saved) in h.data.iter_mut().zip(&saved.history.columns) {
        col[..saved.len()].copy_from_slice(saved);
    }
    Ok(())
}

fn to_cbor<T: Serialize>(value: &T) -> Result<Vec<u8>, SamplerError> {
    let mut out = Vec::new();
    ciborium::into_writer(value, &mut out)
        .map_err(|e| SamplerError::Config(format!("cannot encode the checkpoint: {e}")))?;
    Ok(out)
}
