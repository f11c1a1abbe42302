//! Command-line parsing and the subcommands. Only this layer prints.

mod args;
mod cmd;
mod progress;

use clap::Parser;

/// Parses the command line and runs the subcommand.
pub fn run() -> anyhow::Result<()> {
    let cli = args::Cli::parse();
    match cli.command {
        args::Command::Ingest(a) => cmd::ingest::run(a),
        args::Command::Dump(a) => cmd::dump::run(a),
        args::Command::Stats(a) => cmd::stats::run(a),
        args::Command::Status(a) => cmd::status::run(a),
        args::Command::Prob(a) => cmd::prob::run(a),
        args::Command::Next(a) => cmd::next::run(a),
        args::Command::Ngrams(a) => cmd::ngrams::run(a),
        args::Command::Score(a) => cmd::score::run(a),
        args::Command::Tune(a) => cmd::tune::run(a),
        args::Command::Freeze(a) => cmd::freeze::run(a),
        args::Command::Stage(c) => cmd::stage::run(c),
    }
}
