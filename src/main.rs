//! The `twistmark` binary: parses the command line, runs the library, prints, and maps
//! errors to exit codes (0 ok, 1 bad input or failed analysis, 2 usage).

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
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
