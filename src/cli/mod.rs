//! Command-line parsing and the subcommands. Only this layer prints.

mod args;
mod blend_args;
mod cmd;
mod corpus_args;
mod ingest_args;
mod input_args;
mod progress;
mod serve_args;
mod stage_args;
mod values;

use std::process::ExitCode;

use clap::Parser;

/// The binary's `main`: runs the command line and turns its error into
/// a message and exit status 2.
pub fn main() -> ExitCode {
    match run() {
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

/// Parses the command line and runs the subcommand.
pub fn run() -> anyhow::Result<()> {
    let cli = match args::Cli::try_parse() {
        Ok(cli) => cli,
        // A value that one of our parsers refused ([`values`]): the
        // library's message, as every other error of a command (and as the
        // Python module gives it).
        Err(e) if e.kind() == clap::error::ErrorKind::ValueValidation => {
            match std::error::Error::source(&e).and_then(|s| s.downcast_ref::<quern::Error>()) {
                Some(q) => return Err(anyhow::Error::msg(q.to_string())),
                None => e.exit(),
            }
        }
        Err(e) => e.exit(),
    };
    quern::fault::check_env()?;
    dispatch(cli.command).map_err(with_ingest_phase)
}

/// The store reports an unfinished store without reading the ingest's
/// manifest (it knows nothing of ingests); the phase is added here.
fn with_ingest_phase(e: anyhow::Error) -> anyhow::Error {
    let Some(quern::Error::Unfinished { path, phase: None }) = e.downcast_ref::<quern::Error>()
    else {
        return e;
    };
    let phase = quern::ingest::Manifest::load(&quern::layout::work(path))
        .ok()
        .flatten()
        .map(|m| m.phase.name().to_string());
    let path = path.clone();
    quern::Error::Unfinished { path, phase }.into()
}

fn dispatch(command: args::Command) -> anyhow::Result<()> {
    match command {
        args::Command::Ingest(a) => cmd::ingest::run(a),
        args::Command::Dump(a) => cmd::dump::run(a),
        args::Command::Stats(a) => cmd::stats::run(a),
        args::Command::Status(a) => cmd::status::run(a),
        args::Command::Prob(a) => cmd::prob::run(a),
        args::Command::Next(a) => cmd::next::run(a),
        args::Command::Ngrams(a) => cmd::ngrams::run(a),
        args::Command::Top(a) => cmd::top::run(a),
        args::Command::Collocations(a) => cmd::collocations::run(a),
        args::Command::Keyness(a) => cmd::keyness::run(a),
        args::Command::Lines(a) => cmd::lines::run(a),
        args::Command::Score(a) => cmd::score::run(a),
        args::Command::Tune(a) => cmd::tune::run(a),
        args::Command::Blend(a) => cmd::blend::run(a),
        args::Command::Keystrokes(a) => cmd::keystrokes::run(a),
        args::Command::Freeze(a) if a.blend.is_some() => cmd::freeze_blend::run(a),
        args::Command::Freeze(a) => cmd::freeze::run(a),
        args::Command::CheckModel(a) => cmd::freeze::check_model(&a.model, a.json),
        args::Command::Vocab(a) => cmd::vocab::run(a),
        args::Command::Stage(c) => cmd::stage::run(c),
        args::Command::Serve(a) => cmd::serve::run(a),
    }
}
