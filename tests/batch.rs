//! `dyad batch` and `dyad merge` without Slurm: a manifest of invented
//! systems (examples/survey) run locally as one process and as two shards,
//! one of them stopped by SIGTERM and killed by SIGKILL on the way; one
//! system with a missing data file and one with a bad setting fail without
//! stopping the others; the merged tables of the two batches are equal
//! byte for byte, and the true masses lie inside the 95 % intervals.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitStatus, Stdio};
use std::thread::sleep;
use std::time::{Duration, Instant};

const SURVEY: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/examples/survey");
const GOOD: [&str; 3] = ["amber-sluice", "cinder-moth", "garnet-reed"];

fn dyad() -> Command {
    Command::new(env!("CARGO_BIN_EXE_dyad"))
}

fn status_of(mut command: Command) -> (ExitStatus, String) {
    let out = command.output().expect("the dyad binary runs");
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    (out.status, text)
}

/// The survey example's scenarios of `GOOD`, simulated into `dir/data`, and
/// a manifest of them plus two systems that must fail.
fn survey_in(dir: &Path) -> PathBuf {
    fs::create_dir_all(dir.join("scenarios")).unwrap();
    fs::create_dir_all(dir.join("data")).unwrap();
    let mut rows = String::from(
        "system,astrometry,velocities,seed,catalogue_parallax_mas,catalogue_parallax_err_mas,sampler.walkers\n",
    );
    for (k, name) in GOOD.iter().enumerate() {
        let file = format!("{name}.scenario.toml");
        let scenario = dir.join("scenarios").join(&file);
        fs::copy(Path::new(SURVEY).join("scenarios").join(&file), &scenario).unwrap();
        let (status, text) = status_of({
            let mut c = dyad();
            c.arg("simulate").arg(&scenario);
            c
        });
        assert!(status.success(), "{text}");
        let parallax = true_value(&scenario, "parallax_mas");
        rows.push_str(&format!(
            "{name},data/{name}-positions.csv,data/{name}-velocities.csv,{},{parallax},0.5,\n",
            7 + k
        ));
        if k == 0 {
            // Between good systems: a missing file, and a setting the
            // configuration refuses (an odd number of walkers).
            rows.push_str("lost-plover,data/no-such-file.csv,,3,20,0.5,\n");
            rows.push_str(&format!(
                "odd-walkers,data/{name}-positions.csv,data/{name}-velocities.csv,4,20,0.5,33\n"
            ));
        }
    }
    let manifest = dir.join("manifest.csv");
    fs::write(&manifest, rows).unwrap();
    manifest
}

/// A number `key = value` of a scenario's [system] table.
fn true_value(scenario: &Path, key: &str) -> f64 {
    let table: toml::Table = toml::from_str(&fs::read_to_string(scenario).unwrap()).unwrap();
    table["system"][key].as_float().unwrap()
}

/// A base configuration: the survey example's, with fewer steps.
fn base_in(dir: &Path) -> PathBuf {
    let text = fs::read_to_string(Path::new(SURVEY).join("base.toml"))
        .unwrap()
        .replace("max_steps = 30000", "max_steps = 2500");
    let base = dir.join("base.toml");
    fs::write(&base, text).unwrap();
    base
}

fn batch(manifest: &Path, base: &Path, output: &Path, extra: &[&str]) -> Command {
    let mut c = dyad();
    c.arg("batch")
        .arg(manifest)
        .arg("--base")
        .arg(base)
        .arg("--output")
        .arg(output)
        .arg("--quiet")
        .args(extra)
        // The test must not take its shard from a Slurm job it runs in.
        .env_remove("SLURM_ARRAY_TASK_ID");
    c
}

/// Starts `command`, waits until `file` exists, then sends `signal`.
fn signal_when(mut command: Command, file: &Path, signal: &str) -> ExitStatus {
    let mut child: Child = command
        .stderr(Stdio::null())
        .spawn()
        .expect("the dyad binary starts");
    let start = Instant::now();
    while !file.exists() {
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "{} never appeared",
            file.display()
        );
        if let Some(status) = child.try_wait().unwrap() {
            panic!(
                "the shard ended ({status}) before {} appeared",
                file.display()
            );
        }
        sleep(Duration::from_millis(20));
    }
    let sent = Command::new("kill")
        .arg(format!("-{signal}"))
        .arg(child.id().to_string())
        .status()
        .expect("kill runs");
    assert!(sent.success());
    child.wait().unwrap()
}

fn read(path: &Path) -> String {
    fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

#[test]
fn local_batch_isolates_failures_and_resumes_bit_identically() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = survey_in(dir.path());
    let base = base_in(dir.path());

    // A: the whole manifest in one process, all threads, then merged.
    let whole = dir.path().join("whole");
    let (status, text) = status_of(batch(&manifest, &base, &whole, &[]));
    assert_eq!(status.code(), Some(1), "two systems fail: {text}");
    assert!(text.contains("3 of 5 systems finished"), "{text}");
    let failed = read(&whole.join("failed.csv"));
    assert!(failed.starts_with("system,state,reason\n"), "{failed}");
    assert!(failed.contains("lost-plover,failed,") && failed.contains("no-such-file.csv"));
    assert!(failed.contains("odd-walkers,failed,") && failed.contains("walkers"));

    // B: two shards of one thread each. Shard 1 (amber-sluice,
    // odd-walkers, garnet-reed) is killed by SIGKILL after the first
    // checkpoint of amber-sluice, stopped by SIGTERM while resuming it,
    // and then run to its end.
    let sharded = dir.path().join("sharded");
    let first = sharded.join("systems").join(GOOD[0]);
    let shard1 = || {
        batch(
            &manifest,
            &base,
            &sharded,
            &[
                "--shard",
                "1/2",
                "--threads",
                "1",
                "--checkpoint-seconds",
                "0.2",
            ],
        )
    };
    let killed = signal_when(shard1(), &first.join("checkpoint.bin"), "KILL");
    assert_eq!(killed.code(), None, "killed by a signal");
    let chain = first.join("chain.bin");
    let mut child = shard1().stderr(Stdio::null()).spawn().unwrap();
    // Once the chain grows past its checkpointed length, the resumed run
    // is sampling.
    let start = Instant::now();
    let length = |p: &Path| fs::metadata(p).map_or(0, |m| m.len());
    let checkpointed = length(&chain);
    while length(&chain) <= checkpointed {
        assert!(
            start.elapsed() < Duration::from_secs(120),
            "the resumed run never sampled"
        );
        sleep(Duration::from_millis(10));
    }
    let _ = Command::new("kill")
        .arg("-TERM")
        .arg(child.id().to_string())
        .status();
    let stopped = child.wait().unwrap();
    assert_eq!(stopped.code(), Some(3), "SIGTERM checkpoints and stops");
    let record = read(&sharded.join("records").join(format!("{}.json", GOOD[0])));
    assert!(record.contains("\"stopped\""), "{record}");
    let (status, text) = status_of(shard1());
    assert_eq!(
        status.code(),
        Some(1),
        "odd-walkers fails in shard 1: {text}"
    );
    let (status, text) = status_of(batch(
        &manifest,
        &base,
        &sharded,
        &["--shard", "2/2", "--threads", "1"],
    ));
    assert_eq!(
        status.code(),
        Some(1),
        "lost-plover fails in shard 2: {text}"
    );
    // A shard run again skips what is finished.
    let (_, text) = status_of(batch(&manifest, &base, &sharded, &["--shard", "2/2"]));
    assert!(
        text.contains("0 finished now, 1 earlier, 1 failed"),
        "{text}"
    );
    let (status, _) = status_of({
        let mut c = dyad();
        c.arg("merge").arg(&sharded);
        c
    });
    assert_eq!(status.code(), Some(1));

    // The merged tables, and every system's draws, are the same bytes.
    for table in ["results.csv", "failed.csv"] {
        assert_eq!(
            read(&whole.join(table)),
            read(&sharded.join(table)),
            "{table}; the sharded batch's failures:\n{}",
            read(&sharded.join("failed.csv"))
        );
    }
    for name in GOOD {
        let samples = |root: &Path| read(&root.join("systems").join(name).join("samples.csv"));
        assert_eq!(samples(&whole), samples(&sharded), "{name} samples.csv");
    }

    // Every finished system is in the table, in manifest order, with its
    // true masses inside the 95 % intervals (exact data: the truth is the
    // likelihood's peak).
    let results = read(&whole.join("results.csv"));
    let mut lines = results.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let column = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.iter().map(|r| r[0]).collect::<Vec<_>>(), GOOD);
    for row in &rows {
        let scenario = dir
            .path()
            .join("scenarios")
            .join(format!("{}.scenario.toml", row[0]));
        for star in ["primary", "secondary"] {
            let truth = true_value(&scenario, &format!("mass_{star}_msun"));
            let low: f64 = row[column(&format!("mass_{star}_msun_95_low"))]
                .parse()
                .unwrap();
            let high: f64 = row[column(&format!("mass_{star}_msun_95_high"))]
                .parse()
                .unwrap();
            assert!(
                low < truth && truth < high,
                "{} {star}: {truth} not in [{low}, {high}]",
                row[0]
            );
        }
        assert_eq!(row[column("period_modes")], "1", "{}", row[0]);
    }
}

#[test]
fn bad_manifest_is_refused_with_file_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = dir.path().join("manifest.csv");
    fs::write(
        &manifest,
        "system,astrometry,seed\nok,a.csv,1\nbad,b.csv,seven\n",
    )
    .unwrap();
    let base = base_in(dir.path());
    let output = dir.path().join("out");
    let (status, text) = status_of(batch(&manifest, &base, &output, &[]));
    assert_eq!(status.code(), Some(1));
    assert!(
        text.contains(&format!(
            "{}, line 3, column 3 ('seed'): expected a whole number",
            manifest.display()
        )),
        "{text}"
    );
    assert!(
        !output.exists(),
        "nothing is written for a refused manifest"
    );
}

/// Two processes must not run one system at once (an array submitted
/// twice): while another process holds a system's lock, a shard leaves that
/// system alone — no run folder, no record, exit status 1 with the reason —
/// and runs the rest; once the lock is released the system runs.
#[test]
fn a_system_another_process_runs_is_left_alone() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = survey_in(dir.path());
    let base = base_in(dir.path());
    let output = dir.path().join("out");
    fs::create_dir_all(output.join("records")).unwrap();
    // Shard 2 of 2 holds lost-plover (fails at once) and cinder-moth.
    let held = fs::File::create(output.join("records/cinder-moth.lock")).unwrap();
    held.try_lock().expect("the test takes the lock first");
    let (status, text) = status_of(batch(&manifest, &base, &output, &["--shard", "2/2"]));
    assert_eq!(status.code(), Some(1), "{text}");
    assert!(
        text.contains("cinder-moth: another process is running it"),
        "{text}"
    );
    assert!(!output.join("records/cinder-moth.json").exists());
    assert!(!output.join("systems/cinder-moth").exists());
    assert!(read(&output.join("records/lost-plover.json")).contains("\"failed\""));

    drop(held);
    let (status, text) = status_of(batch(&manifest, &base, &output, &["--shard", "2/2"]));
    assert_eq!(status.code(), Some(1), "lost-plover still fails: {text}");
    assert!(!text.contains("another process"), "{text}");
    assert!(read(&output.join("records/cinder-moth.json")).contains("\"finished\""));
}
