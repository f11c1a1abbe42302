//! The `quern` command line: a thin layer over the library (the commands
//! live in the library's `cli` module, feature `cli`).

fn main() -> std::process::ExitCode {
    quern::run_cli()
}
