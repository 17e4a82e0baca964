//! Checked printing to the terminal. `println!` panics when standard output
//! is a pipe that was closed early (`dyad check ... | head -1`); these
//! macros return the write error instead, and `main` ends quietly and
//! successfully when it is a broken pipe (the reader has all it wanted).

use std::io::{self, Write};

/// Writes `text` and a newline to standard output.
pub fn write_line(text: &str) -> io::Result<()> {
    let mut out = io::stdout().lock();
    out.write_all(text.as_bytes())?;
    out.write_all(b"\n")?;
    out.flush()
}

/// Writes `text` (no newline added) to standard output.
pub fn write_raw(text: &str) -> io::Result<()> {
    let mut out = io::stdout().lock();
    out.write_all(text.as_bytes())?;
    out.flush()
}

/// Writes `text` and a newline to standard error, ignoring failures (a
/// closed standard error must not turn a finished run into a failed one).
pub fn write_note(text: &str) {
    let _ = writeln!(io::stderr().lock(), "{text}");
}

/// Whether `err` (or anything in its chain) is a broken pipe.
pub fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|cause| {
        cause
            .downcast_ref::<io::Error>()
            .is_some_and(|e| e.kind() == io::ErrorKind::BrokenPipe)
    })
}

/// `println!` that returns the write error (`?`-able in functions returning
/// `anyhow::Result`).
macro_rules! say {
    ($($arg:tt)*) => {
        $crate::terminal::write_line(&format!($($arg)*))
    };
}

/// `print!` that returns the write error.
macro_rules! say_raw {
    ($($arg:tt)*) => {
        $crate::terminal::write_raw(&format!($($arg)*))
    };
}

/// `eprintln!` that never panics.
macro_rules! note {
    ($($arg:tt)*) => {
        $crate::terminal::write_note(&format!($($arg)*))
    };
}

pub(crate) use {note, say, say_raw};
