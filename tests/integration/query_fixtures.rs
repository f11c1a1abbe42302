//! Stores shared by the query tests, built once per test binary: the five
//! training novels of fixtures/gutenberg (all but persuasion.txt) at orders
//! 3 and 5, and the held-out novel's sentences.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use quern::words::WordId;

use crate::common::{gutenberg_dir, ingest_ok};

/// The held-out novel.
pub fn heldout_path() -> PathBuf {
    gutenberg_dir().join("persuasion.txt")
}

/// The five training novels (all but the held-out one).
pub fn train_inputs() -> Vec<PathBuf> {
    crate::common::files_under(&gutenberg_dir())
        .into_iter()
        .filter(|p| p.file_name().is_some_and(|n| n != "persuasion.txt"))
        .collect()
}

fn build(name: &str, order: usize) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
        .join("query-stores")
        .join(name);
    if dir.exists() {
        std::fs::remove_dir_all(&dir).unwrap();
    }
    std::fs::create_dir_all(dir.parent().unwrap()).unwrap();
    let o = order.to_string();
    ingest_ok(
        &dir,
        &["--order", &o, "--memory", "256MiB", "--quiet"],
        &train_inputs(),
    );
    dir
}

/// The five training novels at order 3.
pub fn train3() -> &'static Path {
    static S: OnceLock<PathBuf> = OnceLock::new();
    S.get_or_init(|| build("train3", 3))
}

/// The five training novels at order 5.
pub fn train5() -> &'static Path {
    static S: OnceLock<PathBuf> = OnceLock::new();
    S.get_or_init(|| build("train5", 5))
}

/// The held-out novel's padded sentences (tokenized as at ingest).
pub fn heldout_sentences() -> &'static [Vec<WordId>] {
    static S: OnceLock<Vec<Vec<WordId>>> = OnceLock::new();
    S.get_or_init(|| {
        quern::query::score::read_sentences(
            &[heldout_path()],
            quern::tokenize::Preparation::default(),
        )
        .unwrap()
    })
}
