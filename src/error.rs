//! The one error type of the library.
//!
//! Every variant carries what a user needs to act: the file, the position,
//! the expected and the actual value. The binary adds context and maps
//! errors to exit codes; nothing below the command line prints.

use std::path::PathBuf;

/// Result with the library's [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything that can go wrong in quern.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// An I/O operation on a file failed.
    #[error("{path}: {op}: {source}")]
    Io {
        /// The file or directory involved.
        path: PathBuf,
        /// What was being done ("open", "read", "write", ...).
        op: &'static str,
        /// The underlying error.
        source: std::io::Error,
    },
    /// A file written by quern is damaged: truncated, zero-length, or with a
    /// checksum that does not match. Never read as data.
    #[error("{path}: damaged file: {detail}")]
    Corrupt {
        /// The damaged file.
        path: PathBuf,
        /// Which invariant was broken, with the values seen.
        detail: String,
    },
    /// A file or store written by another format version.
    #[error("{path}: format version {found}, this build reads version {expected}; rebuild the store with this version of quern")]
    Version {
        /// The file or store.
        path: PathBuf,
        /// Version found on disk.
        found: u32,
        /// Version this build understands.
        expected: u32,
    },
    /// Two different words have the same 64-bit id.
    #[error("hash collision: the words {first:?} and {second:?} have the same 64-bit id {id:#018x}; no count was merged")]
    HashCollision {
        /// The word seen first.
        first: String,
        /// The other word.
        second: String,
        /// Their shared id.
        id: u64,
    },
    /// A compressed input is truncated or malformed.
    #[error("{path}: bad input at byte {offset} of the decompressed stream: {detail}")]
    BadInput {
        /// The input file.
        path: PathBuf,
        /// Position (decompressed bytes) where reading failed.
        offset: u64,
        /// What went wrong.
        detail: String,
    },
    /// An input path does not exist or cannot be used.
    #[error("{path}: {detail}")]
    Input {
        /// The input path as given.
        path: PathBuf,
        /// Why it cannot be used.
        detail: String,
    },
    /// A line of a text input (ARPA, a count table) is not what the format
    /// allows at that place.
    #[error("{path}:{line}: expected {expected}, found {found}")]
    BadLine {
        /// The input file.
        path: PathBuf,
        /// The line number (1-based).
        line: u64,
        /// What the format allows there.
        expected: String,
        /// What the line holds.
        found: String,
    },
    /// A merged n-gram whose prefix or suffix (its first or last n − 1
    /// words) was not counted: in a count table, a line missing; in text
    /// counts, damage. `ingest --counts` names the table's line instead
    /// ([`Error::BadLine`]).
    #[error("{path}: damaged file: an n-gram was counted but not its {side} of {} words", missing.len())]
    NotCounted {
        /// The merged counts the join read.
        path: PathBuf,
        /// Which of the n-gram's (n − 1)-grams is missing.
        side: Side,
        /// The ids of the missing (n − 1)-gram.
        missing: Vec<u64>,
    },
    /// The store's state does not allow the requested operation.
    #[error("{path}: {detail}")]
    State {
        /// The store directory.
        path: PathBuf,
        /// What is wrong and what to do about it.
        detail: String,
    },
    /// Another process holds the store's ingest lock.
    #[error("{path}: another ingest is running on this store (it holds {lock}); wait for it to finish or stop it first")]
    Locked {
        /// The store directory.
        path: PathBuf,
        /// The lock file.
        lock: PathBuf,
    },
    /// The file system ran out of space while an ingest wrote to it.
    #[error(
        "no space left on the file system of {} ({detail}): {} free there, the unfinished ingest holds {}, and it needs roughly {} more at its peak (a rough estimate); everything recorded so far is kept: free space there and run the same command again to resume",
        dir.display(), human_bytes(*free), human_bytes(*used), human_bytes(*needed)
    )]
    DiskFull {
        /// The store directory (its file system is the one that is full).
        dir: PathBuf,
        /// The failed operation.
        detail: String,
        /// Bytes available to unprivileged users there now.
        free: u64,
        /// Bytes the unfinished ingest's work folder holds.
        used: u64,
        /// Estimated further bytes the ingest needs at its peak.
        needed: u64,
    },
    /// A setting is out of range.
    #[error("invalid setting: {0}")]
    Config(String),
    /// A part of a blend file cannot be used: it moved, changed since the
    /// file was written, or does not fit with the other parts.
    #[error("{blend}: part {part} ({path}): {detail}")]
    BlendPart {
        /// The blend file.
        blend: PathBuf,
        /// The part's number (1-based, in the file's order).
        part: usize,
        /// The part's path as the file names it.
        path: PathBuf,
        /// What is wrong and what to do about it.
        detail: String,
    },
    /// A thread panicked while it held a lock, so what the lock guards may
    /// be half updated: the work stops instead of going on with it.
    #[error(
        "internal error: a thread panicked while it updated {what}; nothing more was recorded"
    )]
    Poisoned {
        /// What the lock guards.
        what: &'static str,
    },
    /// The store has an unfinished ingest (a `work/` folder), so it cannot
    /// be read. The store does not read the ingest's manifest; the command
    /// line fills in `phase` from [`crate::ingest::status`].
    #[error("{path}: this store is unfinished: {}; run the same ingest command again to resume it (or `quern status` to see its progress)", unfinished_phase(phase.as_deref()))]
    Unfinished {
        /// The store directory.
        path: PathBuf,
        /// The ingest's phase, where known.
        phase: Option<String>,
    },
    /// A figure could not be drawn or written.
    #[error("{path}: cannot draw the figure: {detail}")]
    Plot {
        /// The figure file.
        path: PathBuf,
        /// What went wrong.
        detail: String,
    },
    /// RocksDB reported an error.
    #[cfg(feature = "store")]
    #[error("{path}: key-value store: {source}")]
    Rocks {
        /// The store directory.
        path: PathBuf,
        /// The underlying error.
        source: rocksdb::Error,
    },
}

/// An n-gram's (n − 1)-gram without its last word (prefix) or its first
/// (suffix).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Side {
    /// The first n − 1 words.
    Prefix,
    /// The last n − 1 words.
    Suffix,
}

impl std::fmt::Display for Side {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Side::Prefix => "prefix",
            Side::Suffix => "suffix",
        })
    }
}

fn unfinished_phase(phase: Option<&str>) -> String {
    match phase {
        Some(p) => format!("an ingest is in its {p} phase"),
        None => "an ingest has started".to_string(),
    }
}

/// `1536` → `1.5 KiB`.
pub fn human_bytes(b: u64) -> String {
    const UNITS: [&str; 6] = ["B", "KiB", "MiB", "GiB", "TiB", "PiB"];
    let mut v = b as f64;
    let mut u = 0;
    while v >= 1024.0 && u + 1 < UNITS.len() {
        v /= 1024.0;
        u += 1;
    }
    if u == 0 {
        format!("{b} B")
    } else {
        format!("{v:.1} {}", UNITS[u])
    }
}

impl Error {
    /// True for an out-of-space error of the file system (ENOSPC, EDQUOT),
    /// including one RocksDB reports.
    pub fn is_out_of_space(&self) -> bool {
        match self {
            Error::Io { source, .. } => matches!(
                source.raw_os_error(),
                Some(libc::ENOSPC) | Some(libc::EDQUOT)
            ),
            #[cfg(feature = "store")]
            Error::Rocks { source, .. } => {
                let m = source.to_string();
                m.contains("No space left") || m.contains("ENOSPC")
            }
            _ => false,
        }
    }

    /// Wraps an I/O error with the path and the operation.
    pub fn io(path: impl Into<PathBuf>, op: &'static str, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            op,
            source,
        }
    }

    /// A damaged-file error.
    pub fn corrupt(path: impl Into<PathBuf>, detail: impl Into<String>) -> Self {
        Error::Corrupt {
            path: path.into(),
            detail: detail.into(),
        }
    }

    /// A store-state error.
    pub fn state(path: impl Into<PathBuf>, detail: impl Into<String>) -> Self {
        Error::State {
            path: path.into(),
            detail: detail.into(),
        }
    }
}

/// Adds a path and an operation to `std::io::Result`s.
pub trait IoContext<T> {
    /// Maps an I/O error into [`Error::Io`].
    fn at(self, path: &std::path::Path, op: &'static str) -> Result<T>;
}

impl<T> IoContext<T> for std::io::Result<T> {
    fn at(self, path: &std::path::Path, op: &'static str) -> Result<T> {
        self.map_err(|e| Error::io(path, op, e))
    }
}
