//! `quern serve`: the HTTP query service over a store or a frozen model
//! (the service itself is `quern::serve`). This side owns the process:
//! the open-file limit, the signals (SIGTERM and SIGINT stop, SIGHUP
//! reloads) and the start-up checks of the flags.

use std::io::Write;

use anyhow::{bail, Context};
use quern::serve::{Loaded, Opener, Options, Owned};

use super::prob::{open_source, Source as Opened};
use crate::cli::args::{QuerySourceArgs, ServeArgs};

pub fn run(a: ServeArgs) -> anyhow::Result<()> {
    let token = match &a.token_file {
        Some(f) => Some(read_token(f)?),
        None => None,
    };
    let open_to_all = !a.listen.ip().is_loopback();
    if open_to_all && token.is_none() && !a.no_token {
        bail!(
            "--listen {}: an address other than loopback needs --token-file FILE \
             (requests then send Authorization: Bearer <token>), or --no-token to \
             let anyone who reaches the port query",
            a.listen
        );
    }
    let files = raise_open_files();
    let t0 = std::time::Instant::now();
    let opened = open_source(&a.store)?;
    let (first, path) = owned(opened);
    let what = match first {
        Owned::Store(_) => "store",
        Owned::Model(_) => "model",
        Owned::Blend(_) => "blend",
    };
    let mut opts = Options::new(a.listen);
    if let Some(t) = a.threads {
        if t == 0 {
            bail!("--threads must be at least 1");
        }
        opts.threads = t;
    }
    opts.max_request_bytes = a.max_request_bytes.bytes() as usize;
    opts.read_timeout = a.read_timeout;
    opts.max_connections = a.max_connections as usize;
    opts.limits.max_texts = a.max_texts as usize;
    opts.log = a.log;
    let access = if token.is_some() {
        "a token is needed"
    } else if open_to_all {
        "WARNING: no token (--no-token), anyone who reaches the port may query"
    } else {
        "no token (loopback only)"
    };
    opts.token = token;
    if let Some((soft, hard)) = files {
        if (opts.max_connections as u64) + 64 > soft {
            eprintln!(
                "quern: warning: --max-connections {} is near the open-file limit {soft} (hard limit {hard})",
                opts.max_connections
            );
        }
    }
    let source_args = a.store.clone();
    let open: Opener = Box::new(move || reopen(&source_args));
    let threads = opts.threads;
    let (read_timeout, max_conn) = (opts.read_timeout.as_secs_f64(), opts.max_connections);
    let ready = |addr, reloader: quern::serve::Reloader| {
        // Scripts and tests wait for this line (and read the port from it).
        eprintln!("quern: serving the {what} {path} on http://{addr}/ ({threads} query threads); SIGTERM or Ctrl-C stops, SIGHUP reloads");
        eprintln!(
            "quern: {access}; at most {max_conn} connections, {read_timeout} s to send a request"
        );
        let _ = std::io::stderr().flush();
        watch_hangup(reloader);
    };
    let first = Loaded::new(first, &path, 1, t0.elapsed().as_secs_f64());
    let served = quern::serve::run(first, open, &opts, ready, stop_signal())?;
    eprintln!(
        "quern: stopped after {} requests",
        super::thousands(served.requests)
    );
    Ok(())
}

/// The token in `path`: its text without the line end; not empty.
fn read_token(path: &std::path::Path) -> anyhow::Result<String> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("reading the token file {}", path.display()))?;
    let t = text.trim_end_matches(['\n', '\r']);
    if t.is_empty() || t.chars().any(|c| c.is_whitespace() || c.is_control()) {
        bail!(
            "{}: the token file holds no token (one line of visible characters, no spaces)",
            path.display()
        );
    }
    Ok(t.to_string())
}

/// Opens the source again and checks it (a model: every checksum and
/// invariant, reading the whole file).
fn reopen(a: &QuerySourceArgs) -> quern::error::Result<Owned> {
    let opened = open_source(a).map_err(|e| match e.downcast::<quern::error::Error>() {
        Ok(e) => e,
        Err(e) => quern::error::Error::Config(format!("{e:#}")),
    })?;
    if let Opened::Model(m) = &opened {
        m.verify()?;
    }
    Ok(owned(opened).0)
}

/// An opened source as the service owns it, and the path it names.
fn owned(opened: Opened) -> (Owned, String) {
    match opened {
        Opened::Store(s) => {
            let p = s.dir().display().to_string();
            (Owned::Store(s), p)
        }
        Opened::Model(m) => {
            let p = m.path().display().to_string();
            (Owned::Model(m), p)
        }
        Opened::Blend(b) => {
            let p = b.file.display().to_string();
            (Owned::Blend(b), p)
        }
    }
}

/// Raises the soft limit of open files to the hard limit: the soft and
/// hard limits after, if they could be read.
fn raise_open_files() -> Option<(u64, u64)> {
    let mut r = libc::rlimit {
        rlim_cur: 0,
        rlim_max: 0,
    };
    // SAFETY: getrlimit(2) and setrlimit(2) read and write the one struct
    // given, which lives across both calls.
    #[allow(unsafe_code)]
    unsafe {
        if libc::getrlimit(libc::RLIMIT_NOFILE, &mut r) != 0 {
            return None;
        }
        if r.rlim_cur < r.rlim_max {
            let want = libc::rlimit {
                rlim_cur: r.rlim_max,
                rlim_max: r.rlim_max,
            };
            if libc::setrlimit(libc::RLIMIT_NOFILE, &want) == 0 {
                r = want;
            }
        }
    }
    Some((r.rlim_cur, r.rlim_max))
}

/// Reloads the source on each SIGHUP (the task runs in the service's
/// runtime; `ready` is called there).
fn watch_hangup(reloader: quern::serve::Reloader) {
    use tokio::signal::unix::{signal, SignalKind};
    match signal(SignalKind::hangup()) {
        Ok(mut hup) => {
            tokio::spawn(async move {
                while hup.recv().await.is_some() {
                    reloader.reload("SIGHUP");
                }
            });
        }
        Err(e) => eprintln!("quern: cannot watch for SIGHUP ({e}); POST /admin/reload reloads"),
    }
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
