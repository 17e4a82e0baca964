//! Sample sinks: file round trip, truncation, partial records.

use dyad_sampler::{read_record_file, FileSink, MemorySink, RecordKind, SampleSink, SamplerError};

#[test]
fn file_sink_round_trip_and_truncate() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("s.bin");
    let mut f = FileSink::create_samples(&path, 1, 2).unwrap();
    let mut m = MemorySink::for_samples(1, 2);
    let recs = [
        [1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
        [-1.5, f64::MIN_POSITIVE, 0.1, 1e300, -0.0, 7.0],
    ];
    f.append(10, &recs[0]).unwrap();
    m.append(10, &recs[0]).unwrap();
    let pos_f = f.sync().unwrap();
    let pos_m = m.sync().unwrap();
    assert_eq!(pos_f, 32 + 8 * 7);
    f.append(20, &recs[1]).unwrap();
    m.append(20, &recs[1]).unwrap();
    f.sync().unwrap();
    let t = read_record_file(&path).unwrap();
    assert_eq!(&t, m.table());
    assert_eq!(t.steps, vec![10, 20]);
    assert_eq!(t.column(0, 0), vec![1.0, 4.0, -1.5, 1e300]);
    assert_eq!(t.column(2, 1), vec![0.1, 7.0]);
    assert_eq!(t.first_after(10), 1);
    f.truncate(pos_f).unwrap();
    m.truncate(pos_m).unwrap();
    drop(f);
    let t = read_record_file(&path).unwrap();
    assert_eq!(&t, m.table());
    assert_eq!(t.len(), 1);
    // A width mismatch is an error, not a corrupt file.
    let mut f = FileSink::open(&path).unwrap();
    assert!(f.append(1, &[1.0]).is_err());
    assert!(matches!(f.truncate(33), Err(SamplerError::BadFile { .. })));
}

#[test]
fn partial_trailing_record_is_ignored_and_wrong_files_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.bin");
    let mut f = FileSink::create(&path, RecordKind::TemperedLogLikelihoods, 2, 3).unwrap();
    f.append(1, &[0.0; 6]).unwrap();
    f.sync().unwrap();
    drop(f);
    let mut bytes = std::fs::read(&path).unwrap();
    bytes.extend_from_slice(&[1, 2, 3]);
    std::fs::write(&path, &bytes).unwrap();
    assert_eq!(read_record_file(&path).unwrap().len(), 1);
    std::fs::write(&path, b"not a record file at all, no no no").unwrap();
    assert!(matches!(
        read_record_file(&path),
        Err(SamplerError::BadFile { .. })
    ));
}
