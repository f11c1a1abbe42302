//! Cross-check of quern against scripts/reference_ngrams.py (Python's
//! collections.Counter), on fixtures/gutenberg at order 5.

use std::process::Command;

use serde_json::Value;

use crate::common::{assert_lines_eq, assert_stats_eq, manifest_dir, python3, sorted_lines};

#[test]
fn python_reference_agrees_with_quern() {
    let script = manifest_dir().join("scripts/reference_ngrams.py");
    assert!(script.is_file(), "{} is missing", script.display());
    let tmp = tempfile::tempdir().unwrap();
    let dump_path = tmp.path().join("python.dump");
    let stats_path = tmp.path().join("python.stats.json");
    let out = Command::new(python3())
        .current_dir(manifest_dir())
        .arg("scripts/reference_ngrams.py")
        .args(["--order", "5", "--dump"])
        .arg(&dump_path)
        .arg("--stats")
        .arg(&stats_path)
        .arg("fixtures/gutenberg")
        .output()
        .expect("run python3");
    assert!(
        out.status.success(),
        "scripts/reference_ngrams.py failed: {:?}\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
    // Source: Python's collections.Counter via scripts/reference_ngrams.py.
    let py_dump = sorted_lines(&std::fs::read_to_string(&dump_path).expect("read python dump"));
    let py_stats: Value =
        serde_json::from_str(&std::fs::read_to_string(&stats_path).expect("read python stats"))
            .expect("python stats JSON");

    let quern = crate::gutenberg::quern_default_view();
    assert_lines_eq("python reference dump vs quern dump", &py_dump, &quern.dump);
    assert_stats_eq(
        "python reference stats vs quern stats",
        &py_stats,
        &quern.stats,
    );
}
