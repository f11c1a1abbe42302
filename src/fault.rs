//! Named fault points, for crash tests.
//!
//! With `QUERN_KILL_AT=<point>:<n>` in the environment, the process sends
//! itself SIGKILL the n-th time (1-based) it reaches `point`, one of
//! [`Point`]'s names. Without the variable a point costs one relaxed
//! atomic load.
//!
//! With `QUERN_FULL_AT=<point>:<n>`, [`full`] returns an out-of-space I/O
//! error the n-th time and every later time it is reached at `point`, one
//! of [`Full`]'s names, as a full disk would: the fallback of the
//! disk-full tests where no small file system can be mounted.
//!
//! The tests build the variables' values from the same enums
//! ([`Point::at`], [`Full::at`]), and a value that names no point is
//! refused ([`check_env`], which the command line calls first; a library
//! user that sets a bad value gets a panic at the first point reached), so
//! a misspelled point cannot silently disable a crash test.

use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::OnceLock;

use crate::error::{Error, Result};

/// The variable that names a [`Point`] to be killed at.
pub const KILL_VAR: &str = "QUERN_KILL_AT";
/// The variable that names a [`Full`] point to fail at.
pub const FULL_VAR: &str = "QUERN_FULL_AT";

macro_rules! named {
    ($(#[$doc:meta])* $name:ident { $($(#[$vdoc:meta])* $v:ident = $s:literal,)* }) => {
        $(#[$doc])*
        #[derive(Clone, Copy, Debug, PartialEq, Eq)]
        pub enum $name {
            $($(#[$vdoc])* $v,)*
        }

        impl $name {
            /// Every point.
            pub const ALL: &'static [$name] = &[$($name::$v,)*];

            /// The point's name in the environment variable.
            pub fn name(self) -> &'static str {
                match self {
                    $($name::$v => $s,)*
                }
            }

            /// The point named `name`, if any.
            pub fn from_name(name: &str) -> Option<$name> {
                $name::ALL.iter().copied().find(|p| p.name() == name)
            }

            /// The variable's value for the `n`-th time at this point
            /// (`<name>:<n>`).
            pub fn at(self, n: u64) -> String {
                format!("{}:{n}", self.name())
            }
        }
    };
}

named! {
    /// Where a process can be killed (`QUERN_KILL_AT`).
    Point {
        /// The ingest (`--unique`): a chunk's hash runs were recorded.
        Hashed = "hashed",
        /// The ingest (`--unique`): the duplicates were marked and
        /// recorded.
        Marked = "marked",
        /// The ingest: a spill's files are written, not yet recorded.
        Spill = "spill",
        /// The ingest: a spill was just recorded in the manifest.
        Committed = "committed",
        /// The ingest: a partition's merge was recorded.
        Merge = "merge",
        /// The ingest: a partition's store files were recorded.
        Join = "join",
        /// The ingest: the database is complete, not yet moved into place.
        Build = "build",
        /// A `quern stage` task: its output is complete in its temporary
        /// folder, not yet renamed into place.
        StageWritten = "stage-written",
        /// A `quern stage` task: its output is renamed into place; the
        /// process has not reported yet.
        StageDone = "stage-done",
        /// `quern score`: a batch of scored documents was handed to the
        /// output.
        ScoreBatch = "score-batch",
    }
}

named! {
    /// Where an out-of-space error can be injected (`QUERN_FULL_AT`).
    Full {
        /// A run file is created.
        Run = "run",
        /// A store file is created.
        Sst = "sst",
        /// The database is built.
        Build = "build",
    }
}

/// The point and count that `var` holds (`<name>:<n>`), `None` where it is
/// not set; an error naming the variable where its value is not a point
/// of `T` and a count of at least 1.
fn parse<T>(
    var: &str,
    from_name: fn(&str) -> Option<T>,
    names: &[&str],
) -> Result<Option<(T, u64)>> {
    let Ok(v) = std::env::var(var) else {
        return Ok(None);
    };
    let bad = |why: &str| {
        Error::Config(format!(
            "{var}={v}: {why}; give <point>:<n> with n at least 1 and a point among {}",
            names.join(", ")
        ))
    };
    let (name, n) = v.rsplit_once(':').ok_or_else(|| bad("no ':'"))?;
    let point = from_name(name).ok_or_else(|| bad("no such point"))?;
    match n.parse::<u64>() {
        Ok(n) if n >= 1 => Ok(Some((point, n))),
        _ => Err(bad("the count is not a whole number of at least 1")),
    }
}

fn kill_target() -> Result<Option<(Point, u64)>> {
    let names: Vec<&str> = Point::ALL.iter().map(|p| p.name()).collect();
    parse(KILL_VAR, Point::from_name, &names)
}

fn full_target() -> Result<Option<(Full, u64)>> {
    let names: Vec<&str> = Full::ALL.iter().map(|p| p.name()).collect();
    parse(FULL_VAR, Full::from_name, &names)
}

/// Refuses a `QUERN_KILL_AT` or `QUERN_FULL_AT` that names no point (or
/// has no count of at least 1).
pub fn check_env() -> Result<()> {
    kill_target()?;
    full_target()?;
    Ok(())
}

static TARGET: OnceLock<Option<(Point, u64)>> = OnceLock::new();
static HITS: AtomicU64 = AtomicU64::new(0);

/// Marks that execution reached `at`.
pub fn point(at: Point) {
    let target = TARGET.get_or_init(|| kill_target().unwrap_or_else(|e| panic!("{e}")));
    if let Some((want, n)) = target {
        if *want == at && HITS.fetch_add(1, Ordering::SeqCst) + 1 == *n {
            unsafe_kill();
        }
    }
}

static FULL: OnceLock<Option<(Full, u64)>> = OnceLock::new();
static FULL_HITS: AtomicU64 = AtomicU64::new(0);

/// An out-of-space error if `QUERN_FULL_AT` names `at` and it was reached
/// that often; `Ok` otherwise.
pub fn full(at: Full) -> std::io::Result<()> {
    let target = FULL.get_or_init(|| full_target().unwrap_or_else(|e| panic!("{e}")));
    if let Some((want, n)) = target {
        if *want == at && FULL_HITS.fetch_add(1, Ordering::SeqCst) + 1 >= *n {
            return Err(std::io::Error::from_raw_os_error(libc::ENOSPC));
        }
    }
    Ok(())
}

#[allow(unsafe_code)]
fn unsafe_kill() {
    // SAFETY: `raise` only delivers a signal to this process.
    unsafe {
        libc::raise(libc::SIGKILL);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_distinct_and_read_back() {
        for (i, p) in Point::ALL.iter().enumerate() {
            assert_eq!(Point::from_name(p.name()), Some(*p));
            assert!(Point::ALL[..i].iter().all(|q| q.name() != p.name()));
            assert_eq!(p.at(3), format!("{}:3", p.name()));
        }
        for f in Full::ALL {
            assert_eq!(Full::from_name(f.name()), Some(*f));
        }
        assert_eq!(Point::from_name("merging"), None);
    }
}
