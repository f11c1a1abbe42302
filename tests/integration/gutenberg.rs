//! Cross-checks of stores built from fixtures/gutenberg/ against the
//! independent reference counter (reference.rs), at order 5.

use std::sync::OnceLock;

use serde_json::Value;

use crate::common::{assert_views_eq, gutenberg_dir, ingest_ok, store_view, StoreView};
use crate::reference::{Reference, Settings};

static REFERENCE_CASED: OnceLock<StoreView> = OnceLock::new();
static REFERENCE_LOWER: OnceLock<StoreView> = OnceLock::new();
static QUERN_DEFAULT: OnceLock<StoreView> = OnceLock::new();

/// Reference view of fixtures/gutenberg at order 5 (built once).
pub fn reference_view(lowercase: bool) -> &'static StoreView {
    let cell = if lowercase {
        &REFERENCE_LOWER
    } else {
        &REFERENCE_CASED
    };
    cell.get_or_init(|| {
        let view =
            Reference::from_paths(Settings::order(5).lowercase(lowercase), &[gutenberg_dir()])
                .view();
        check_corpus_is_big_enough(&view.stats);
        view
    })
}

/// Precondition on the fixture (source: the reference's own stats): the
/// corpus has a real amount of text, and every MKN discount of every order is
/// defined, so the discount comparison really compares numbers.
fn check_corpus_is_big_enough(stats: &Value) {
    assert!(
        stats["totals"]["sentences"].as_u64().unwrap() > 10_000,
        "fixtures/gutenberg looks too small: {}",
        stats["totals"]
    );
    for o in stats["orders"].as_array().unwrap() {
        let d = &o["discounts"];
        for k in ["d1", "d2", "d3plus"] {
            assert!(
                d[k]["value"].is_number(),
                "discount {k} undefined at order {}: {d}",
                o["order"]
            );
        }
    }
}

/// quern's view of fixtures/gutenberg at order 5 with the default memory
/// budget (built once; also used by python_check.rs).
pub fn quern_default_view() -> &'static StoreView {
    QUERN_DEFAULT.get_or_init(|| {
        let tmp = tempfile::tempdir().unwrap();
        let store = tmp.path().join("store");
        ingest_ok(&store, &["--order", "5", "--quiet"], &[gutenberg_dir()]);
        store_view(&store)
    })
}

/// Builds a store from fixtures/gutenberg with `extra` ingest flags and
/// compares every dump line, every context line and the stats JSON with the
/// reference (source: independent reference counter over the contract).
fn check(extra: &[&str], lowercase: bool) {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let mut args = vec!["--order", "5", "--json"];
    args.extend_from_slice(extra);
    let run = ingest_ok(&store, &args, &[gutenberg_dir()]);
    // Contract: `--json` prints a summary JSON object on stdout.
    let summary: Value = serde_json::from_str(run.stdout.trim())
        .unwrap_or_else(|e| panic!("ingest --json stdout is not JSON ({e}): {}", run.stdout));
    assert!(
        summary.is_object(),
        "ingest --json summary is not an object: {summary}"
    );
    eprintln!("ingest {:?} summary: {summary}", extra);
    if extra.contains(&"32MiB") || extra.contains(&"16MiB") {
        // The point of the small budget: many spills, hence real merges
        // (source: the ingest's own summary of the run files it wrote).
        let runs = summary["runs_written"].as_u64().unwrap();
        assert!(
            runs >= 20,
            "only {runs} run files with {extra:?}: the merge path is barely exercised"
        );
    }
    let actual = store_view(&store);
    let expected = reference_view(lowercase);
    assert_views_eq(&format!("gutenberg {:?}", extra), expected, &actual);
}

#[test]
fn gutenberg_order5_16mib_threads1() {
    // Source: independent reference counter over the contract. One thread
    // gets the whole budget, so the smallest budget keeps the spills many.
    check(&["--memory", "16MiB", "--threads", "1"], false);
}

#[test]
fn gutenberg_order5_32mib_threads3() {
    // Source: independent reference counter over the contract.
    check(
        &["--memory", "32MiB", "--threads", "3", "--partitions", "97"],
        false,
    );
}

#[test]
fn gutenberg_order5_16mib_lowercase() {
    // Source: independent reference counter over the contract (lowercase).
    check(
        &["--memory", "16MiB", "--threads", "2", "--lowercase"],
        true,
    );
}

#[test]
fn gutenberg_order5_default_memory() {
    // Source: independent reference counter over the contract.
    let expected = reference_view(false);
    assert_views_eq("gutenberg default memory", expected, quern_default_view());
}
