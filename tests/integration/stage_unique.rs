//! `quern stage plan --unique lines|documents`: the hash and mark tasks
//! before the map tasks. The source of truth of every equality is the
//! single-machine `quern ingest --unique` of the same inputs, which
//! unique.rs checks against a Python set of prepared token sequences. The
//! stores must be equal byte for byte in `dump`, `dump --contexts` and
//! `stats --json` (duplicate totals and growth curve included: the curve
//! tells a first occurrence kept from a later one), and their
//! `unique.hashes` files equal.

use std::path::{Path, PathBuf};

use serde_json::Value;

use quern::fault::{Point, KILL_VAR};

use crate::common::{ingest_ok, run, run_env};
use crate::stage::{assert_raw_eq, outcome, raw_view, s, stage_ok, task_args};
use crate::unique::{novel, repeated_documents, repeated_lines};

/// Plans a `--unique` job at order 3 in `dir` with `extra` flags.
fn plan(dir: &Path, parts: u32, tasks: usize, extra: &[&str], inputs: &[PathBuf]) -> Value {
    let mut a: Vec<String> = ["plan", "--dir", &s(dir), "--order", "3"]
        .iter()
        .map(|x| x.to_string())
        .collect();
    a.extend(["--partitions".into(), parts.to_string()]);
    a.extend(["--map-tasks".into(), tasks.to_string()]);
    a.extend(extra.iter().map(|x| x.to_string()));
    a.extend(inputs.iter().map(|p| s(p)));
    stage_ok(&a)
}

/// `quern stage STAGE` for task or partition `n` of the job in `dir`.
fn task(stage: &str, dir: &Path, n: u64) -> Vec<String> {
    let mut a = vec!["stage".to_string()];
    a.extend(task_args(stage, dir, n));
    a
}

/// Runs every task of a planned `--unique` job, stage by stage; gives the
/// reports.
fn run_all(dir: &Path, store: &Path, p: &Value) -> Vec<Value> {
    let (tasks, parts) = (
        p["map_tasks"].as_u64().unwrap(),
        p["partitions"].as_u64().unwrap(),
    );
    let mut reports = Vec::new();
    for (st, n) in [
        ("hash", tasks),
        ("mark", parts),
        ("map", tasks),
        ("merge", parts),
        ("join", parts),
    ] {
        for i in 0..n {
            reports.push(stage_ok(&task(st, dir, i)[1..]));
        }
    }
    reports.push(stage_ok(&[
        "assemble".into(),
        "--dir".into(),
        s(dir),
        "--store".into(),
        s(store),
    ]));
    reports
}

/// Asserts that `store` equals `single` (views and hash set).
fn assert_same_store(what: &str, single: &Path, store: &Path) {
    let expected = raw_view(single);
    assert_raw_eq(what, &expected, &raw_view(store));
    let stats: Value = serde_json::from_str(&expected.stats).unwrap();
    assert!(
        stats["totals"]["duplicates"]["units"].as_u64().unwrap() > 0,
        "{what}: no duplicates in the inputs, so nothing was checked"
    );
    assert!(
        std::fs::read(single.join("unique.hashes")).unwrap()
            == std::fs::read(store.join("unique.hashes")).unwrap(),
        "{what}: unique.hashes differs from the ingest's"
    );
}

/// Plain lines in three files (three map tasks, packed largest first, so
/// not in input order): a file of repeated lines, then the novel its lines
/// come from (every line a duplicate of one in another task), then another.
/// Then `ingest --append --unique lines` into the assembled store equals the
/// same append into the single-machine store: the set the assemble put in
/// place knows every sentence counted by the stages.
#[test]
fn stage_unique_lines_equal_ingest_and_append_knows_them() {
    let tmp = tempfile::tempdir().unwrap();
    let inputs = vec![
        repeated_lines(tmp.path()),
        novel("persuasion.txt"),
        novel("emma.txt"),
    ];
    let flags = ["--order", "3", "--quiet", "--unique", "lines"];
    let single = tmp.path().join("single");
    ingest_ok(&single, &flags, &inputs);
    let (dir, store) = (tmp.path().join("shared"), tmp.path().join("store"));
    let p = plan(&dir, 3, 3, &["--unique", "lines"], &inputs);
    assert_eq!(p["map_tasks"], 3, "{p}");
    assert_eq!(p["unique"], "lines", "{p}");
    let first = run_all(&dir, &store, &p);
    assert!(first.iter().all(|r| outcome(r) == "written"), "{first:?}");
    assert_same_store("stage --unique lines", &single, &store);
    // Run again: every task skips, the store stays.
    let again = run_all(&dir, &store, &p);
    assert!(again.iter().all(|r| outcome(r) == "skipped"), "{again:?}");
    assert_same_store("stage --unique lines run twice", &single, &store);

    // Lines 2000..5000 of the novel again, with a new line: all but one
    // are duplicates of sentences the stages counted.
    let text = std::fs::read_to_string(novel("persuasion.txt")).unwrap();
    let more = tmp.path().join("more.txt");
    let mut part: Vec<&str> = text.lines().skip(2000).take(3000).collect();
    part.push("a sentence that no novel holds");
    std::fs::write(&more, part.join("\n") + "\n").unwrap();
    let append = [&flags[..], &["--append"]].concat();
    for st in [&single, &store] {
        ingest_ok(st, &append, std::slice::from_ref(&more));
    }
    assert_same_store("--append --unique lines after stage", &single, &store);
}

/// JSON-lines documents in three files (repeats of the first file's
/// documents in the later ones), under `--unique documents` and `--unique
/// lines`: the two units drop different things.
#[test]
fn stage_unique_documents_and_their_lines_equal_ingest() {
    let tmp = tempfile::tempdir().unwrap();
    let all = std::fs::read_to_string(repeated_documents(tmp.path())).unwrap();
    let lines: Vec<&str> = all.lines().collect();
    let mut inputs = Vec::new();
    for (k, part) in lines.chunks(lines.len().div_ceil(3)).enumerate() {
        let p = tmp.path().join(format!("docs-{k}.jsonl"));
        std::fs::write(&p, part.join("\n") + "\n").unwrap();
        inputs.push(p);
    }
    for unit in ["documents", "lines"] {
        let single = tmp.path().join(format!("single-{unit}"));
        ingest_ok(
            &single,
            &["--order", "3", "--quiet", "--jsonl", "--unique", unit],
            &inputs,
        );
        let dir = tmp.path().join(format!("shared-{unit}"));
        let store = tmp.path().join(format!("store-{unit}"));
        let p = plan(&dir, 2, 3, &["--jsonl", "--unique", unit], &inputs);
        assert_eq!(p["map_tasks"], 3, "{p}");
        run_all(&dir, &store, &p);
        assert_same_store(&format!("stage --jsonl --unique {unit}"), &single, &store);
    }
}

/// A hash task killed before its commit is written again; a mark task
/// killed after its commit is skipped; a damaged mark output stops the map
/// task naming it, and its rerun repairs it; the store still equals the
/// ingest's. Refusals: a map task before the marks, a hash task of a plan
/// without `--unique`, and a plan with another `--unique` in the same
/// directory, naming both.
#[test]
fn stage_unique_killed_redone_and_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let inputs = vec![repeated_lines(tmp.path()), novel("persuasion.txt")];
    let (dir, store) = (tmp.path().join("shared"), tmp.path().join("store"));
    let p = plan(&dir, 2, 2, &["--unique", "lines"], &inputs);
    assert_eq!(p["map_tasks"], 2, "{p}");

    let killed = |args: &[String], point: Point| {
        let r = run_env(args, &[(KILL_VAR, point.at(1).as_str())]);
        assert_eq!(r.signal(), Some(9), "{}", r.describe());
    };
    killed(&task("hash", &dir, 0), Point::StageWritten);
    assert_eq!(outcome(&stage_ok(&task("hash", &dir, 0)[1..])), "written");
    stage_ok(&task("hash", &dir, 1)[1..]);
    // A map task before the marks names the stage to run.
    let r = run(&task("map", &dir, 0));
    r.assert_failure();
    assert!(
        r.stderr.contains("mark task 0 has no finished output"),
        "{}",
        r.describe()
    );
    killed(&task("mark", &dir, 1), Point::StageDone);
    assert_eq!(outcome(&stage_ok(&task("mark", &dir, 1)[1..])), "skipped");
    stage_ok(&task("mark", &dir, 0)[1..]);

    // A flipped byte in a file of mark 0's output.
    let m0 = dir.join("mark/p0000");
    let dups = std::fs::read_dir(&m0)
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.extension().is_some_and(|x| x == "pos"))
        .expect("mark 0 found duplicates");
    let before = std::fs::read(&dups).unwrap();
    let mut bytes = before.clone();
    bytes[3] ^= 0x10;
    std::fs::write(&dups, bytes).unwrap();
    let r = run(&task("map", &dir, 0));
    r.assert_failure();
    assert!(
        r.stderr.contains("mark task 0 is unusable") && r.stderr.contains(&s(&dups)),
        "{}",
        r.describe()
    );
    assert_eq!(outcome(&stage_ok(&task("mark", &dir, 0)[1..])), "repaired");
    assert_eq!(
        std::fs::read(&dups).unwrap(),
        before,
        "repaired differently"
    );
    let reports = run_all(&dir, &store, &p);
    let redone: Vec<&str> = reports.iter().map(outcome).collect();
    assert_eq!(redone[..4], ["skipped"; 4], "{reports:?}");
    let single = tmp.path().join("single");
    ingest_ok(
        &single,
        &["--order", "3", "--quiet", "--unique", "lines"],
        &inputs,
    );
    assert_same_store("stage --unique after kills and a repair", &single, &store);

    // Another --unique in the same directory names both.
    let mut a: Vec<String> = ["stage", "plan", "--dir", &s(&dir), "--order", "3"]
        .iter()
        .map(|x| x.to_string())
        .collect();
    a.extend(
        [
            "--partitions",
            "2",
            "--map-tasks",
            "2",
            "--unique",
            "documents",
        ]
        .map(String::from),
    );
    a.extend(inputs.iter().map(|p| s(p)));
    let r = run(&a);
    r.assert_failure();
    assert!(
        r.stderr.contains("--unique lines") && r.stderr.contains("--unique documents"),
        "{}",
        r.describe()
    );
    // A hash task of a plan without --unique.
    let plain = tmp.path().join("plain");
    plan(&plain, 2, 2, &[], &inputs);
    let r = run(&task("hash", &plain, 0));
    r.assert_failure();
    assert!(r.stderr.contains("without --unique"), "{}", r.describe());
}

/// scripts/spark_ingest.py --unique lines under Spark in local mode (see
/// spark.rs), with a hash task killed before its commit and a mark task
/// run twice at once: the store equals `ingest --unique lines`. In a module
/// named `spark` so that `--skip spark::` leaves it out with the others.
mod spark {
    use super::*;
    use crate::spark::{job_args, outcomes, spark, spark_submit, stage_results, tail};

    #[test]
    fn spark_unique_lines_equal_ingest() {
        let submit = spark_submit();
        let tmp = tempfile::tempdir().unwrap();
        let inputs = vec![repeated_lines(tmp.path()), novel("persuasion.txt")];
        let single = tmp.path().join("single");
        ingest_ok(
            &single,
            &["--order", "5", "--quiet", "--unique", "lines"],
            &inputs,
        );
        let (dir, store) = (tmp.path().join("shared"), tmp.path().join("store"));
        let mut args = job_args(&dir, &store, 3, 2);
        for (flag, v) in [
            ("--unique", "lines"),
            ("--fault-kill", "hash:1:stage-written"),
            ("--fault-twice", "mark:2"),
        ] {
            args.extend([flag.to_string(), v.to_string()]);
        }
        args.extend(inputs.iter().map(|p| s(p)));
        let r = spark(&submit, tmp.path(), &args);
        assert!(r.ok, "spark job failed:\n{}", tail(&r.output));
        let report = r.report.expect("report written");
        assert_eq!(report["tasks"]["hash"], 2, "{}", report["tasks"]);
        assert_eq!(report["tasks"]["mark"], 3, "{}", report["tasks"]);
        let h1 = &stage_results(&report, "hash")[1];
        assert_eq!(
            (h1["attempt"].as_u64(), outcomes(h1)),
            (Some(1), vec!["written".into()])
        );
        let mut o = outcomes(&stage_results(&report, "mark")[2]);
        o.sort();
        assert!(
            o == ["raced", "written"] || o == ["skipped", "written"],
            "{o:?}"
        );
        assert_same_store("spark --unique lines", &single, &store);
    }
}
