//! Helpers shared by the integration tests that drive the `dyad` binary.

use std::ffi::OsStr;
use std::process::Command;

/// Runs `dyad ARGS`, asserts it succeeded and returns its standard output.
pub fn run_ok(args: &[&OsStr]) -> String {
    let out = Command::new(env!("CARGO_BIN_EXE_dyad"))
        .args(args)
        .output()
        .expect("the dyad binary runs");
    assert!(
        out.status.success(),
        "dyad {:?} failed:\n{}\n{}",
        args,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}
