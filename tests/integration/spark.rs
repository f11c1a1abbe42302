//! scripts/spark_ingest.py under Spark in local mode (pyspark from the
//! Python package index, installed by scripts/setup): the store it builds
//! from fixtures/gutenberg at order 5 equals, byte for byte in `dump`,
//! `dump --contexts` and `stats --json`, a single-machine `quern ingest` of
//! the same files (which gutenberg.rs checks against the reference counter).
//!
//! These tests fail when Spark is missing: CI must run them. A developer
//! without Spark leaves them out with `cargo test -- --skip spark::` (or
//! `QUERN_SKIP_SPARK=1 scripts/test`, which does that), so that the run's
//! summary counts them as filtered out instead of passed; `.ci/run` refuses
//! the variable.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::{Mutex, OnceLock};
use std::time::Instant;

use serde_json::Value;

use crate::common::{bin, gutenberg_dir, ingest_ok, manifest_dir};
use crate::stage::{assert_raw_eq, raw_view, RawView};

/// `spark-submit` of the installed pyspark.
pub(crate) fn spark_submit() -> PathBuf {
    let out = Command::new("python3")
        .args([
            "-c",
            "import os, pyspark; print(os.path.join(os.path.dirname(pyspark.__file__), 'bin', 'spark-submit'))",
        ])
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "pyspark is not installed for python3 (run scripts/setup, or leave the Spark tests out with `cargo test -- --skip spark::`): {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let p = PathBuf::from(String::from_utf8(out.stdout).unwrap().trim());
    assert!(p.is_file(), "{} is missing", p.display());
    p
}

static BASELINE: OnceLock<RawView> = OnceLock::new();

/// One Spark job at a time: each runs a JVM and two task slots, and the
/// test machine has two cores shared with the other tests.
pub(crate) static ONE_AT_A_TIME: Mutex<()> = Mutex::new(());

/// The single-machine ingest of fixtures/gutenberg at order 5 (built once).
fn baseline() -> &'static RawView {
    BASELINE.get_or_init(|| {
        let tmp = tempfile::tempdir().unwrap();
        let store = tmp.path().join("single");
        ingest_ok(&store, &["--order", "5", "--quiet"], &[gutenberg_dir()]);
        raw_view(&store)
    })
}

pub(crate) struct SparkRun {
    pub(crate) ok: bool,
    pub(crate) output: String,
    pub(crate) report: Option<Value>,
    seconds: f64,
}

/// Runs the driver with a local[2] master (up to 4 attempts per task) and
/// `args` after the script.
pub(crate) fn spark(submit: &Path, work: &Path, args: &[String]) -> SparkRun {
    let report = work.join(format!(
        "report-{}.json",
        std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .unwrap()
            .as_nanos()
    ));
    let _one = ONE_AT_A_TIME.lock().unwrap_or_else(|e| e.into_inner());
    let t0 = Instant::now();
    let out = Command::new(submit)
        .args(["--master", "local[2,4]", "--conf", "spark.ui.enabled=false"])
        .args(["--driver-memory", "1g"])
        .arg(manifest_dir().join("scripts/spark_ingest.py"))
        .args(["--quern", bin(), "--task-memory", "256MiB", "--report"])
        .arg(&report)
        .args(args)
        .env("PYSPARK_PYTHON", "python3")
        .env("SPARK_LOCAL_IP", "127.0.0.1")
        .env_remove("QUERN_KILL_AT")
        .stdin(std::process::Stdio::null())
        .output()
        .expect("spark-submit starts");
    let seconds = t0.elapsed().as_secs_f64();
    let output = format!(
        "{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    let report = std::fs::read_to_string(&report)
        .ok()
        .map(|t| serde_json::from_str(&t).expect("report is JSON"));
    SparkRun {
        ok: out.status.success(),
        output,
        report,
        seconds,
    }
}

pub(crate) fn job_args(dir: &Path, store: &Path, partitions: u32, map_tasks: u32) -> Vec<String> {
    vec![
        "--dir".into(),
        dir.display().to_string(),
        "--store".into(),
        store.display().to_string(),
        "--order".into(),
        "5".into(),
        "--partitions".into(),
        partitions.to_string(),
        "--map-tasks".into(),
        map_tasks.to_string(),
    ]
}

pub(crate) fn tail(s: &str) -> String {
    let lines: Vec<&str> = s
        .lines()
        .filter(|l| !l.trim_start().starts_with("at "))
        .collect();
    lines[lines.len().saturating_sub(60)..].join("\n")
}

/// The task results of one stage in the driver's report.
pub(crate) fn stage_results<'a>(report: &'a Value, stage: &str) -> &'a Vec<Value> {
    report["results"][stage].as_array().unwrap()
}

pub(crate) fn outcomes(task: &Value) -> Vec<String> {
    task["reports"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["outcome"].as_str().unwrap().to_string())
        .collect()
}

/// Five map tasks, seven partitions (seven merge and seven join tasks).
#[test]
fn spark_store_equals_single_machine_ingest() {
    let submit = spark_submit();
    let tmp = tempfile::tempdir().unwrap();
    let (dir, store) = (tmp.path().join("shared"), tmp.path().join("store"));
    let mut args = job_args(&dir, &store, 7, 5);
    args.push(gutenberg_dir().display().to_string());
    let r = spark(&submit, tmp.path(), &args);
    assert!(r.ok, "spark job failed:\n{}", tail(&r.output));
    let report = r.report.expect("report written");
    assert_eq!(report["tasks"]["map"], 5, "{}", report["tasks"]);
    assert_eq!(report["tasks"]["merge"], 7);
    assert_eq!(report["tasks"]["join"], 7);
    assert_raw_eq(
        "spark, 5 map tasks, 7 partitions",
        baseline(),
        &raw_view(&store),
    );
    eprintln!(
        "spark local[2]: fixtures/gutenberg, 5 map + 7 merge + 7 join tasks: {:.1} s wall (spark-submit), stages {}",
        r.seconds, report["stage_seconds"]
    );
}

/// One map task killed before its commit and one merge task killed just
/// after it (first attempts only; Spark retries them), one map and one join
/// task run as two copies at once: the store is unchanged. Then the whole
/// job run again on the same directory skips every task.
#[test]
fn spark_killed_and_doubled_tasks_leave_the_store_unchanged() {
    let submit = spark_submit();
    let tmp = tempfile::tempdir().unwrap();
    let (dir, store) = (tmp.path().join("shared"), tmp.path().join("store"));
    let mut args = job_args(&dir, &store, 4, 3);
    for (flag, v) in [
        ("--fault-kill", "map:1:stage-written"),
        ("--fault-kill", "merge:2:stage-done"),
        ("--fault-twice", "map:0"),
        ("--fault-twice", "join:3"),
    ] {
        args.extend([flag.to_string(), v.to_string()]);
    }
    args.push(gutenberg_dir().display().to_string());
    let r = spark(&submit, tmp.path(), &args);
    assert!(r.ok, "spark job failed:\n{}", tail(&r.output));
    let report = r.report.expect("report written");
    assert!(
        r.output.contains("killed by signal 9"),
        "no attempt was killed:\n{}",
        tail(&r.output)
    );
    // The killed tasks succeeded on their second attempt: the map task wrote
    // its output again, the merge task found its committed output.
    let m1 = &stage_results(&report, "map")[1];
    assert_eq!(
        (m1["attempt"].as_u64(), outcomes(m1)),
        (Some(1), vec!["written".into()])
    );
    let r2 = &stage_results(&report, "merge")[2];
    assert_eq!(
        (r2["attempt"].as_u64(), outcomes(r2)),
        (Some(1), vec!["skipped".into()])
    );
    for (stage, t) in [("map", 0), ("join", 3)] {
        let mut o = outcomes(&stage_results(&report, stage)[t]);
        o.sort();
        assert!(
            o == ["raced", "written"] || o == ["skipped", "written"],
            "{stage} task {t} run twice: {o:?}"
        );
    }
    assert_raw_eq("spark with faults", baseline(), &raw_view(&store));

    let mut plain = job_args(&dir, &store, 4, 3);
    plain.push(gutenberg_dir().display().to_string());
    let again = spark(&submit, tmp.path(), &plain);
    assert!(
        again.ok,
        "second spark job failed:\n{}",
        tail(&again.output)
    );
    let report = again.report.unwrap();
    for stage in ["plan", "map", "merge", "join", "assemble"] {
        for t in stage_results(&report, stage) {
            assert_eq!(outcomes(t), ["skipped"], "{stage}: {t}");
        }
    }
    assert_raw_eq("spark run again", baseline(), &raw_view(&store));
}

/// An input that does not exist fails the job with a message naming it,
/// and no store is built.
#[test]
fn spark_job_with_a_missing_input_fails_naming_it() {
    let submit = spark_submit();
    let tmp = tempfile::tempdir().unwrap();
    let (dir, store) = (tmp.path().join("shared"), tmp.path().join("store"));
    let missing = tmp.path().join("no-such-novel.txt");
    let mut args = job_args(&dir, &store, 2, 2);
    args.push(gutenberg_dir().join("emma.txt").display().to_string());
    args.push(missing.display().to_string());
    let r = spark(&submit, tmp.path(), &args);
    assert!(!r.ok, "the job succeeded with a missing input");
    let line = r
        .output
        .lines()
        .find(|l| l.starts_with("spark_ingest: error: "))
        .unwrap_or_else(|| panic!("no error line:\n{}", tail(&r.output)));
    assert!(
        line.contains("the plan stage failed") && line.contains(&missing.display().to_string()),
        "{line}"
    );
    assert!(!store.exists(), "a store was created");
}

/// `--jsonl`: a crawl of two novels as JSON lines (crawl.rs), through
/// Spark with a text preparation (`--normalize nfkc --tokens words
/// --digits zero`, passed on to the plan): the store equals the
/// single-machine plain ingest of their texts at order 5 with the same
/// preparation (the input bytes and the bad-line count aside, which only
/// the JSON lines have).
#[test]
fn spark_jsonl_store_equals_plain_ingest_of_the_texts() {
    let submit = spark_submit();
    let tmp = tempfile::tempdir().unwrap();
    let (crawls, texts, _) =
        crate::crawl::crawl_of(tmp.path(), &["persuasion.txt", "northangerabbey.txt"]);
    let plain = tmp.path().join("plain");
    let prep = [
        "--normalize",
        "nfkc",
        "--tokens",
        "words",
        "--digits",
        "zero",
    ];
    let mut flags = vec!["--order", "5", "--quiet"];
    flags.extend(prep);
    ingest_ok(&plain, &flags, &texts);
    let (dir, store) = (tmp.path().join("shared"), tmp.path().join("store"));
    let mut args = job_args(&dir, &store, 3, 2);
    args.push("--jsonl".into());
    args.extend(prep.iter().map(|s| s.to_string()));
    args.extend(crawls.iter().map(|p| p.display().to_string()));
    let r = spark(&submit, tmp.path(), &args);
    assert!(r.ok, "spark job failed:\n{}", tail(&r.output));
    crate::common::assert_views_eq(
        "spark --jsonl against plain texts",
        &crate::crawl::view(&plain),
        &crate::crawl::view(&store),
    );
}
