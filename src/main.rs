//! The `twistmark` binary: parses the command line, runs the library, prints, and maps
//! errors to exit codes (0 ok, 1 bad input or failed analysis, 2 usage).
//!
//! The binary: it may use the whole library; the library must never import it.

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    restore_sigpipe();
    match cli::run() {
        Ok(code) => code,
        Err(err) => {
            // One line that names the file, flag or field and says what to do.
            let msg = format!("{err:#}").replace('\n', " ");
            eprintln!("error: {msg}");
            ExitCode::from(1)
        }
    }
}

/// Lets `twistmark info CLIP | head -1` end quietly when the reader closes the pipe, as Unix
/// tools do, instead of a panic from a failed write to stdout.
#[cfg(unix)]
fn restore_sigpipe() {
    // SAFETY: called once at start-up, before any thread exists; SIG_DFL is a valid handler.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
}

#[cfg(not(unix))]
fn restore_sigpipe() {}
