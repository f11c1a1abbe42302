//! `--append`: ingesting A and then appending B must give the same store as
//! ingesting A and B together; appending with another order is refused.

use crate::common::{assert_views_eq, gutenberg_files, ingest_args, ingest_ok, run, store_view};
use crate::reference::{Reference, Settings};

use crate::common::SMALL_BUDGET as FLAGS;

/// Source: quern's own one-shot ingest of A and B (checked against the
/// reference in gutenberg.rs), and the reference counter over A and B.
#[test]
fn append_equals_joint_ingest() {
    let files = gutenberg_files(3);
    let (a, b) = (files[..2].to_vec(), files[2..3].to_vec());
    let tmp = tempfile::tempdir().unwrap();

    let appended = tmp.path().join("appended");
    ingest_ok(&appended, FLAGS, &a);
    let mut flags = FLAGS.to_vec();
    flags.push("--append");
    ingest_ok(&appended, &flags, &b);

    let joint = tmp.path().join("joint");
    ingest_ok(&joint, FLAGS, &files);

    let appended_view = store_view(&appended);
    assert_views_eq(
        "A then --append B vs A+B in one ingest",
        &store_view(&joint),
        &appended_view,
    );
    let expected = Reference::from_paths(Settings::order(5), &files).view();
    assert_views_eq(
        "A then --append B vs reference(A+B)",
        &expected,
        &appended_view,
    );
}

/// Two appends in a row (source: reference counter over all three inputs).
#[test]
fn append_twice_equals_reference() {
    let files = gutenberg_files(3);
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let mut append = FLAGS.to_vec();
    append.push("--append");
    ingest_ok(&store, FLAGS, &files[0..1]);
    ingest_ok(&store, &append, &files[1..2]);
    ingest_ok(&store, &append, &files[2..3]);
    let expected = Reference::from_paths(Settings::order(5), &files).view();
    assert_views_eq(
        "A, --append B, --append C vs reference(A+B+C)",
        &expected,
        &store_view(&store),
    );
}

/// Contract: the order is fixed by the store; `--append` with another
/// `--order` must fail with a message about the order and leave the store
/// unchanged (source: the store's own view before the refused append).
#[test]
fn append_with_other_order_is_refused() {
    let files = gutenberg_files(2);
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    ingest_ok(&store, FLAGS, &files[0..1]);
    let before = store_view(&store);
    let r = run(&ingest_args(
        &store,
        &["--order", "3", "--append"],
        &files[1..2],
    ));
    r.assert_failure();
    assert!(
        r.stderr.to_lowercase().contains("order"),
        "append with another --order: message does not mention the order\n{}",
        r.describe()
    );
    assert_views_eq("store after refused append", &before, &store_view(&store));
}
