//! The flags of `quern blend`.

use std::path::PathBuf;

use clap::{ArgGroup, Args};
use quern::query::Method;

use super::args::{CacheMemoryArgs, ParamArgs};
use super::values::{self, method_list};

#[derive(Args, Debug)]
#[command(group(ArgGroup::new("weighting").required(true).args(["heldout", "weights"])))]
pub struct BlendArgs {
    /// A part: a store directory or a model file written by `quern
    /// freeze`; give two or more, in order.
    #[arg(long = "part", value_name = "PATH", required = true)]
    pub parts: Vec<PathBuf>,
    #[arg(
        long = "method",
        value_name = "M",
        value_parser = values::method,
        help = concat!(
            "The method of the store parts: once for all of them, or once a part in the \
             parts' order (a model part's must be its own). ",
            method_list!(),
            ". Default: mkn over a store; a model's own method."
        )
    )]
    pub methods: Vec<Method>,
    #[command(flatten)]
    pub params: ParamArgs,
    /// Fit the weights by EM on these held-out text files, one sentence a
    /// line (repeat for several).
    #[arg(long, value_name = "FILE")]
    pub heldout: Vec<PathBuf>,
    /// The weights, one a part in order, comma-separated, summing to 1.
    #[arg(long, value_name = "W1,W2,...", value_delimiter = ',')]
    pub weights: Option<Vec<f64>>,
    /// The blend file to write.
    #[arg(long, value_name = "FILE")]
    pub out: PathBuf,
    /// One JSON object instead of text. Default: text.
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub memory: CacheMemoryArgs,
}
