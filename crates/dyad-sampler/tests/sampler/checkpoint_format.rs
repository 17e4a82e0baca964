//! The checkpoint file: serde CBOR (RFC 8949) in a versioned, checksummed
//! envelope. Any CBOR reader can open it; another version, a damaged or a
//! truncated file, and other moves give typed errors, never a panic.

use std::path::Path;
use std::time::Duration;

use ciborium::Value;
use dyad_sampler::{
    resume, run, weighted, CheckpointConfig, DifferentialEvolution, MemorySink, MoveMixture,
    RunConfig, RunControl, SamplerError, Start, Stretch,
};

use crate::common::Gaussian;

/// Magic bytes and payload length written before the CBOR envelope.
const FRAME: usize = 16;

fn config(path: &Path) -> RunConfig {
    let mut c = RunConfig::new(12, 5, 200);
    c.convergence = None;
    c.moves = MoveMixture::new(vec![
        weighted(Stretch::default(), 0.4),
        weighted(DifferentialEvolution::default(), 0.6),
    ])
    .unwrap();
    c.checkpoint = Some(CheckpointConfig::new(path, Duration::from_secs(3600)));
    c
}

fn target() -> Gaussian {
    Gaussian::rotated(vec![0.0, 1.0], &[1.0, 2.0], 2)
}

/// Runs to the end (which writes a checkpoint) and returns the file's bytes.
fn checkpointed(path: &Path) -> Vec<u8> {
    let start = Start::Ball {
        centre: vec![0.0; 2],
        scale: vec![0.1; 2],
    };
    let mut sink = MemorySink::for_samples(2, 12);
    run(
        &target(),
        &config(path),
        &start,
        &mut sink,
        RunControl::default(),
    )
    .unwrap();
    std::fs::read(path).unwrap()
}

fn resume_error(config: &RunConfig) -> SamplerError {
    let mut sink = MemorySink::for_samples(2, 12);
    resume(&target(), config, &mut sink, RunControl::default()).unwrap_err()
}

/// The envelope decoded by a generic CBOR reader, as (key, value) pairs.
fn envelope(bytes: &[u8]) -> Vec<(Value, Value)> {
    let value: Value = ciborium::from_reader(&bytes[FRAME..]).unwrap();
    value.into_map().unwrap()
}

fn field<'a>(map: &'a [(Value, Value)], key: &str) -> &'a Value {
    &map.iter()
        .find(|(k, _)| k.as_text() == Some(key))
        .unwrap()
        .1
}

/// The file framed as `write_atomic` frames it.
fn framed(payload: &[u8]) -> Vec<u8> {
    let mut out = b"DYADCKP1".to_vec();
    out.extend_from_slice(&(payload.len() as u64).to_le_bytes());
    out.extend_from_slice(payload);
    out
}

#[test]
fn a_generic_cbor_reader_sees_the_format_and_version() {
    let dir = tempfile::tempdir().unwrap();
    let bytes = checkpointed(&dir.path().join("run.ckpt"));
    let map = envelope(&bytes);
    assert_eq!(
        field(&map, "format").as_text(),
        Some("dyad sampler checkpoint")
    );
    assert_eq!(field(&map, "version").as_integer(), Some(2.into()));
    // The body is CBOR too, with the run's step and moves by name.
    let body: Value =
        ciborium::from_reader(field(&map, "body").as_bytes().unwrap().as_slice()).unwrap();
    let body = body.into_map().unwrap();
    assert_eq!(field(&body, "step").as_integer(), Some(200.into()));
    let moves = field(&body, "moves").as_array().unwrap();
    let names: Vec<_> = moves
        .iter()
        .map(|m| {
            let m = m.as_map().unwrap();
            field(m, "name").as_text().unwrap().to_owned()
        })
        .collect();
    assert_eq!(names, ["stretch", "differential_evolution"]);
}

#[test]
fn another_format_version_is_refused_by_name() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("run.ckpt");
    let bytes = checkpointed(&path);
    let mut map = envelope(&bytes);
    for (k, v) in map.iter_mut() {
        if k.as_text() == Some("version") {
            *v = Value::Integer(99.into());
        }
    }
    let mut payload = Vec::new();
    ciborium::into_writer(&Value::Map(map), &mut payload).unwrap();
    std::fs::write(&path, framed(&payload)).unwrap();
    let err = resume_error(&config(&path));
    assert!(matches!(err, SamplerError::BadFile { .. }), "{err}");
    let text = err.to_string();
    assert!(
        text.contains("version 99") && text.contains("reads version 2"),
        "{text}"
    );
}

#[test]
fn a_damaged_checkpoint_fails_its_checksum() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("run.ckpt");
    let mut bytes = checkpointed(&path);
    // Flip one bit deep inside the body (walker positions and streams).
    let k = bytes.len() * 2 / 3;
    bytes[k] ^= 0x10;
    std::fs::write(&path, &bytes).unwrap();
    let err = resume_error(&config(&path));
    assert!(matches!(err, SamplerError::BadFile { .. }), "{err}");
    assert!(err.to_string().contains("checksum"), "{err}");
}

#[test]
fn truncated_and_foreign_files_are_typed_errors() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("run.ckpt");
    let bytes = checkpointed(&path);
    let c = config(&path);
    // Cut short (a crash while copying, a full disc).
    std::fs::write(&path, &bytes[..bytes.len() / 2]).unwrap();
    assert!(matches!(resume_error(&c), SamplerError::BadFile { .. }));
    // Right frame, payload that is not CBOR (e.g. a format-1 checkpoint).
    std::fs::write(&path, framed(&[0xff; 64])).unwrap();
    let err = resume_error(&c);
    assert!(matches!(err, SamplerError::BadFile { .. }), "{err}");
    assert!(
        err.to_string().contains("not a readable checkpoint"),
        "{err}"
    );
    // Some other CBOR document.
    let mut payload = Vec::new();
    ciborium::into_writer(&Value::Text("hello".into()), &mut payload).unwrap();
    std::fs::write(&path, framed(&payload)).unwrap();
    assert!(matches!(resume_error(&c), SamplerError::BadFile { .. }));
}

#[test]
fn other_moves_are_refused_on_resume() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("run.ckpt");
    checkpointed(&path);
    let mut c = config(&path);
    c.moves = MoveMixture::new(vec![
        weighted(Stretch { a: 3.0 }, 0.4),
        weighted(DifferentialEvolution::default(), 0.6),
    ])
    .unwrap();
    let err = resume_error(&c);
    assert!(matches!(err, SamplerError::CheckpointMismatch(_)), "{err}");
    assert!(err.to_string().contains("stretch"), "{err}");
    c.moves = MoveMixture::single(Stretch::default());
    let err = resume_error(&c);
    assert!(matches!(err, SamplerError::CheckpointMismatch(_)), "{err}");
}
