//! Flags of `quern serve`, as plain data (the rest are in [`super::args`]).

use std::path::PathBuf;

use clap::Args;

use super::args::QuerySourceArgs;
use super::values::{self, size_syntax, ByteSize};

#[derive(Args, Debug)]
pub struct ServeArgs {
    #[command(flatten)]
    pub store: QuerySourceArgs,
    /// Address and port to listen on (port 0: any free port; the address
    /// taken is printed).
    #[arg(long, value_name = "ADDR:PORT", default_value = "127.0.0.1:7207")]
    pub listen: std::net::SocketAddr,
    /// Query threads. Default: one per core.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    #[arg(
        long,
        value_name = "SIZE",
        default_value = "1MiB",
        value_parser = values::byte_size,
        help = concat!("Largest request body (larger: 413). ", size_syntax!())
    )]
    pub max_request_bytes: ByteSize,
    /// Seconds a client has to send a request's head (counted from when
    /// the connection waits for it, so an idle keep-alive connection is
    /// closed after it too) and then its body (late: 408).
    #[arg(long, value_name = "SECONDS", default_value = "5", value_parser = values::seconds)]
    pub read_timeout: std::time::Duration,
    /// Connections open at once at most; another one gets 503 and is
    /// closed. Keep it under the open-file limit (raised to its hard limit
    /// at start).
    #[arg(long, value_name = "N", default_value = "512", value_parser = clap::value_parser!(u32).range(1..))]
    pub max_connections: u32,
    /// Texts in one /score request at most (more: 413).
    #[arg(long, value_name = "N", default_value = "1000", value_parser = clap::value_parser!(u32).range(1..))]
    pub max_texts: u32,
    /// A file holding the token that requests must send as
    /// `Authorization: Bearer <token>` (all but /health and the page).
    /// Needed to listen on an address other than loopback.
    #[arg(long, value_name = "FILE", conflicts_with = "no_token")]
    pub token_file: Option<PathBuf>,
    /// Listen on an address other than loopback without a token: anyone
    /// who reaches the port may query (a warning says so at start).
    #[arg(long)]
    pub no_token: bool,
    /// The access log on standard error, a line per request: json, text
    /// or off.
    #[arg(long, value_name = "FORMAT", default_value = "text", value_parser = values::log_format)]
    pub log: quern::serve::LogFormat,
}
