//! Torn or damaged work files (as after a power loss or a bad disk): a run
//! file, a dictionary file, the manifest and a merged partition are
//! truncated, zeroed or get a flipped byte while an ingest is interrupted.
//! The resume must detect it by checksum, redo the affected work and end
//! with the uninterrupted run's store, or stop with an error that names the
//! file; damaged bytes are never read as counts.

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use quern::fault::{Point, KILL_VAR};

use crate::common::{assert_views_eq, ingest_args, ingest_ok, run, run_env, store_view, StoreView};

use crate::common::TINY_BUDGET as FLAGS;

use crate::common::fault_input as input;

/// Source: quern's uninterrupted run (checked against the reference counter
/// in gutenberg.rs).
fn baseline() -> &'static StoreView {
    static B: OnceLock<StoreView> = OnceLock::new();
    B.get_or_init(|| {
        let tmp = tempfile::tempdir().unwrap();
        let store = tmp.path().join("store");
        ingest_ok(&store, FLAGS, &input());
        store_view(&store)
    })
}

#[derive(Clone, Copy, Debug)]
enum Damage {
    Truncate,
    Zero,
    Flip,
}

const DAMAGES: [Damage; 3] = [Damage::Truncate, Damage::Zero, Damage::Flip];

fn damage(path: &Path, how: Damage) {
    let mut b = std::fs::read(path).unwrap();
    assert!(b.len() > 16, "{} is too small to damage", path.display());
    match how {
        Damage::Truncate => b.truncate(b.len() * 2 / 3),
        Damage::Zero => b.clear(),
        // A byte in the middle: inside compressed data, not the header.
        Damage::Flip => {
            let i = b.len() / 2;
            b[i] ^= 0x41;
        }
    }
    std::fs::write(path, b).unwrap();
}

/// Kills an ingest at `point`, then returns the first file (sorted) of
/// `work/<sub>` whose name ends in `suffix`.
fn interrupted(store: &Path, point: &str, sub: &str, suffix: &str) -> PathBuf {
    let r = run_env(&ingest_args(store, FLAGS, &input()), &[(KILL_VAR, point)]);
    assert!(
        !r.status.success(),
        "QUERN_KILL_AT={point} was never reached\n{}",
        r.describe()
    );
    let dir = store.join("work").join(sub);
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .map(|e| e.unwrap().path())
        .filter(|p| p.to_string_lossy().ends_with(suffix))
        .collect();
    files.sort();
    files
        .into_iter()
        .next()
        .unwrap_or_else(|| panic!("no *{suffix} in {} after {point}", dir.display()))
}

/// Resumes with `--json`, expects success, the baseline store, and a repair
/// note in the summary.
fn resume_repairs(what: &str, store: &Path) {
    let mut flags = FLAGS.to_vec();
    flags.push("--json");
    let r = run(&ingest_args(store, &flags, &input()));
    r.assert_success();
    let summary: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let repaired = summary["repaired"].as_array().cloned().unwrap_or_default();
    assert!(
        !repaired.is_empty(),
        "{what}: the resume did not report a repair\n{}",
        r.describe()
    );
    assert_views_eq(what, baseline(), &store_view(store));
}

fn repaired_after(point: &str, sub: &str, suffix: &str) {
    for how in DAMAGES {
        let tmp = tempfile::tempdir().unwrap();
        let store = tmp.path().join("store");
        let f = interrupted(&store, point, sub, suffix);
        damage(&f, how);
        resume_repairs(&format!("{how:?} {} after {point}", f.display()), &store);
    }
}

#[test]
fn damaged_count_run_is_counted_again() {
    repaired_after(&Point::Committed.at(3), "runs", ".run");
}

#[test]
fn damaged_dictionary_is_counted_again() {
    repaired_after(&Point::Committed.at(3), "runs", ".dict");
}

#[test]
fn damaged_manifest_falls_back_to_the_previous_one() {
    repaired_after(&Point::Committed.at(3), "", "manifest.json");
}

#[test]
fn damaged_merged_partition_is_merged_again() {
    repaired_after(&Point::Merge.at(3), "merged", ".run");
}

/// Once the count runs are deleted (joining), a damaged merged partition
/// cannot be redone from them: the resume must stop with an error naming
/// the file and pointing to --restart, and --restart must then succeed.
#[test]
fn damaged_merge_after_runs_are_gone_names_the_file() {
    for how in DAMAGES {
        let tmp = tempfile::tempdir().unwrap();
        let store = tmp.path().join("store");
        let f = interrupted(&store, &Point::Join.at(1), "merged", ".run");
        damage(&f, how);
        let r = run(&ingest_args(&store, FLAGS, &input()));
        r.assert_failure();
        let name = f.file_name().unwrap().to_string_lossy().into_owned();
        assert!(
            r.stderr.contains(&name) && r.stderr.contains("--restart"),
            "{how:?}: the error does not name {name} and --restart\n{}",
            r.describe()
        );
        let mut flags = FLAGS.to_vec();
        flags.push("--restart");
        run(&ingest_args(&store, &flags, &input())).assert_success();
        assert_views_eq(
            &format!("{how:?} merged file, then --restart"),
            baseline(),
            &store_view(&store),
        );
    }
}

/// Rewrites the metadata record of the store in `store` with `f`, with the
/// rocksdb crate, as another version of quern would have written it.
fn rewrite_meta(store: &Path, f: impl FnOnce(&mut serde_json::Value)) {
    let db_path = store.join("db");
    let cfs = rocksdb::DB::list_cf(&rocksdb::Options::default(), &db_path).unwrap();
    let db = rocksdb::DB::open_cf(&rocksdb::Options::default(), &db_path, &cfs).unwrap();
    let cf = db.cf_handle(quern::store::keys::META_CF).unwrap();
    let raw = db
        .get_cf(cf, quern::store::keys::META_KEY)
        .unwrap()
        .unwrap();
    let mut meta: serde_json::Value = serde_json::from_slice(&raw).unwrap();
    f(&mut meta);
    db.put_cf(
        cf,
        quern::store::keys::META_KEY,
        serde_json::to_vec(&meta).unwrap(),
    )
    .unwrap();
}

/// A store whose metadata says another format version: opening it is a
/// clear error naming the store and both versions (the metadata record is
/// rewritten here with the rocksdb crate, as a future version would).
#[test]
fn store_of_another_format_version_is_refused_on_open() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let text = tmp.path().join("t.txt");
    std::fs::write(&text, "one two three\n").unwrap();
    ingest_ok(&store, &["--order", "2", "--quiet"], &[text]);
    rewrite_meta(&store, |meta| {
        meta["format_version"] = serde_json::json!(999);
    });
    for cmd in ["stats", "dump"] {
        let r = run(&[cmd, "--store", &store.display().to_string()]);
        r.assert_failure();
        assert!(
            r.stderr.contains("format version 999")
                && r.stderr
                    .contains(&format!("version {}", quern::store::STORE_VERSION)),
            "{cmd}: the error does not name both versions\n{}",
            r.describe()
        );
    }
}

/// A store of format version 2, whose metadata names the left-type
/// statistics (per order, and of the empty context) by earlier names,
/// opens and reads as the same store: the metadata of a fresh store of
/// `a b a` is rewritten in version 2's shape, those two under the names
/// `coc_earlier` and `earlier_sum` (the conversion finds them by their
/// place beside `coc_raw` and `count_sum`, whatever their names), and `stats --json`,
/// `dump` and `prob --json` then give what they gave before. The fresh
/// store's left-type statistics are checked by hand first: a is seen after
/// `<s>` and b (2 left types), b and `</s>` after a (1 each).
#[test]
fn store_of_format_version_2_opens_as_the_same_store() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let text = tmp.path().join("t.txt");
    std::fs::write(&text, "a b a\n").unwrap();
    ingest_ok(&store, &["--order", "2", "--quiet"], &[text]);
    let s = store.display().to_string();
    let outputs = || {
        [
            vec!["stats", "--json", "--store", &s],
            vec!["dump", "--store", &s],
            // Kneser-Ney's unigram level divides by the root's left-type sum.
            vec![
                "prob",
                "--json",
                "--store",
                &s,
                "--method",
                "kn",
                "--discounts",
                "fixed:0.5",
                "b",
                "a",
            ],
            vec![
                "prob",
                "--json",
                "--store",
                &s,
                "--method",
                "kn",
                "--discounts",
                "fixed:0.5",
                "</s>",
            ],
        ]
        .map(|a| {
            let r = run(&a);
            r.assert_success();
            r.stdout
        })
    };
    let before = outputs();
    let mut version = 0;
    rewrite_meta(&store, |meta| {
        version = meta["format_version"].as_u64().unwrap();
        assert_eq!(
            meta["orders"][0]["coc_left_type"],
            serde_json::json!([[1, 2], [2, 1]])
        );
        let root = meta["root"].as_object_mut().unwrap();
        assert_eq!(
            serde_json::Value::Object(root.clone()),
            serde_json::json!({"count_sum": 4, "types": 3, "left_type_sum": 4,
                               "n1": 2, "n2": 1, "n3plus": 0})
        );
        let x = root.remove("left_type_sum").unwrap();
        root.insert("earlier_sum".into(), x);
        for o in meta["orders"].as_array_mut().unwrap() {
            let o = o.as_object_mut().unwrap();
            let x = o.remove("coc_left_type").unwrap();
            o.insert("coc_earlier".into(), x);
        }
        meta["format_version"] = serde_json::json!(2);
    });
    assert_eq!(version, u64::from(quern::store::STORE_VERSION));
    assert_ne!(version, 2);
    let after = outputs();
    assert_eq!(after, before);
}
