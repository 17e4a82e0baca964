//! End to end: the `checkpointed_run` example is killed with SIGKILL part-way,
//! resumed, and its sample file compared bit for bit with an uninterrupted run.

use std::path::PathBuf;
use std::process::Command;
use std::time::{Duration, Instant};

/// The example binary, built by `cargo test` next to the test executables
/// (`target/<profile>/examples/`); when only this test target was built
/// (`cargo test --test sampler`), build the example with the same cargo.
fn example_binary() -> PathBuf {
    let exe = std::env::current_exe().unwrap();
    let profile_dir = exe.parent().and_then(|d| d.parent()).unwrap().to_path_buf();
    let bin = profile_dir.join("examples").join("checkpointed_run");
    if !bin.exists() {
        let release = profile_dir.file_name().is_some_and(|n| n == "release");
        let target_dir = profile_dir.parent().unwrap();
        let mut cmd = Command::new(env!("CARGO"));
        cmd.args([
            "build",
            "-q",
            "-p",
            "dyad-sampler",
            "--example",
            "checkpointed_run",
        ])
        .env("CARGO_TARGET_DIR", target_dir);
        if release {
            cmd.arg("--release");
        }
        let status = cmd.status().unwrap();
        assert!(
            status.success(),
            "could not build the checkpointed_run example"
        );
    }
    assert!(bin.exists(), "example not found at {}", bin.display());
    bin
}

#[test]
fn killed_and_resumed_run_matches_uninterrupted_run() {
    let bin = example_binary();
    let total = "3000";
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("a"), dir.path().join("b"));
    std::fs::create_dir_all(&a).unwrap();
    std::fs::create_dir_all(&b).unwrap();

    let status = Command::new(&bin).arg(&a).arg(total).status().unwrap();
    assert!(status.success());

    // Start, wait for a checkpoint past step 300 (checkpoints are replaced
    // atomically, so reading one never sees a half-written file), then SIGKILL.
    let mut child = Command::new(&bin).arg(&b).arg(total).spawn().unwrap();
    let ckpt = b.join("state.ckpt");
    let t0 = Instant::now();
    while t0.elapsed() < Duration::from_secs(120) {
        if ckpt.exists() && dyad_sampler::checkpoint_step(&ckpt).unwrap() >= 300 {
            break;
        }
        std::thread::sleep(Duration::from_millis(5));
    }
    let finished_early = child.try_wait().unwrap().is_some();
    child.kill().unwrap();
    child.wait().unwrap();
    assert!(
        !finished_early,
        "the run ended before it could be killed; make it longer"
    );
    let step = dyad_sampler::checkpoint_step(&ckpt).unwrap();
    assert!((300..3000).contains(&step), "checkpoint at step {step}");

    let status = Command::new(&bin)
        .arg(&b)
        .arg(total)
        .arg("resume")
        .status()
        .unwrap();
    assert!(status.success());
    let sa = std::fs::read(a.join("samples.bin")).unwrap();
    let sb = std::fs::read(b.join("samples.bin")).unwrap();
    assert_eq!(sa.len(), sb.len());
    assert!(sa == sb, "sample files differ after kill and resume");
    assert_eq!(
        dyad_sampler::checkpoint_step(b.join("state.ckpt")).unwrap(),
        3000
    );
}
