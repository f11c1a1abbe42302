//! The `quern` command line: a thin layer over the library.

use std::process::ExitCode;

fn main() -> ExitCode {
    match cli::run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // A closed pipe (`quern dump | head`) is not an error.
            let broken = |k: Option<std::io::ErrorKind>| k == Some(std::io::ErrorKind::BrokenPipe);
            if e.chain().any(|c| {
                broken(c.downcast_ref::<std::io::Error>().map(|io| io.kind()))
                    || broken(
                        c.downcast_ref::<serde_json::Error>()
                            .and_then(|j| j.io_error_kind()),
                    )
            }) {
                return ExitCode::SUCCESS;
            }
            eprintln!("quern: error: {e:#}");
            ExitCode::from(2)
        }
    }
}

mod cli;
