//! A reader that closes the pipe early (`dyad check ... | head -1`) must not
//! make dyad panic: it ends quietly and successfully.

use std::io::Read;
use std::path::Path;
use std::process::{Command, Stdio};

#[test]
fn check_into_a_pipe_closed_after_the_first_line_exits_cleanly() {
    let config = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/demo.toml");
    let mut child = Command::new(env!("CARGO_BIN_EXE_dyad"))
        .arg("check")
        .arg(&config)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the dyad binary starts");
    // Close our end of standard output before dyad writes anything, so
    // every write it makes meets a broken pipe (as `head -1` does after
    // one line; closing first makes the test independent of timing).
    drop(child.stdout.take());
    let mut stderr = String::new();
    child
        .stderr
        .take()
        .expect("stderr is piped")
        .read_to_string(&mut stderr)
        .expect("stderr reads");
    let status = child.wait().expect("dyad finishes");
    assert!(
        !stderr.contains("panicked"),
        "dyad panicked on a closed pipe:\n{stderr}"
    );
    assert!(
        status.success(),
        "dyad failed on a closed pipe ({status}):\n{stderr}"
    );
    assert!(stderr.trim().is_empty(), "unexpected messages:\n{stderr}");
}
