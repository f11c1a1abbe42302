//! `quern serve`: the HTTP query service over a store or a frozen model
//! (the service itself is `quern::serve`).

use std::io::Write;

use quern::serve::{Options, Source};

use super::prob::{open_source, Source as Opened};
use crate::cli::args::ServeArgs;

pub fn run(a: ServeArgs) -> anyhow::Result<()> {
    let opened = open_source(&a.store)?;
    let (src, path) = match &opened {
        Opened::Store(s) => (Source::Store(s), s.dir().display().to_string()),
        Opened::Model(m) => (Source::Model(m), m.path().display().to_string()),
        Opened::Blend(b) => (Source::Blend(b), b.file.display().to_string()),
    };
    let mut opts = Options::new(a.listen);
    if let Some(t) = a.threads {
        if t == 0 {
            anyhow::bail!("--threads must be at least 1");
        }
        opts.threads = t;
    }
    opts.max_request_bytes = a.max_request_bytes.bytes() as usize;
    let what = match src {
        Source::Store(_) => "store",
        Source::Model(_) => "model",
        Source::Blend(_) => "blend",
    };
    let ready = |addr| {
        // Scripts and tests wait for this line (and read the port from it).
        eprintln!("quern: serving the {what} {path} on http://{addr}/ ({} query threads); SIGTERM or Ctrl-C stops", opts.threads);
        let _ = std::io::stderr().flush();
    };
    let served = quern::serve::run(src, &path, &opts, ready, stop_signal())?;
    eprintln!(
        "quern: stopped after {} requests",
        super::thousands(served.requests)
    );
    Ok(())
}

/// Resolves on SIGTERM or SIGINT. The handlers are installed when the
/// service first polls it, inside its runtime.
async fn stop_signal() {
    use tokio::signal::unix::{signal, SignalKind};
    match signal(SignalKind::terminate()) {
        Ok(mut term) => {
            tokio::select! {
                _ = term.recv() => {}
                _ = tokio::signal::ctrl_c() => {}
            }
        }
        Err(e) => {
            eprintln!("quern: cannot watch for SIGTERM ({e}); Ctrl-C stops");
            let _ = tokio::signal::ctrl_c().await;
        }
    }
}
