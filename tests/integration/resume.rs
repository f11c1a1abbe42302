//! Kill-and-resume through the fault injection env `QUERN_KILL_AT`, plus the
//! store's refusals (order mismatch on resume, re-ingest of a finished store,
//! a concurrent ingest) and `--restart`.

use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Stdio;
use std::sync::OnceLock;
use std::time::{Duration, Instant};

use serde_json::Value;

use quern::fault::{Point, KILL_VAR};

use crate::common::{
    assert_lines_eq, assert_views_eq, command, gutenberg_files, ingest_args, ingest_ok, manifest,
    run, run_env, store_view, wait_timeout, StoreView,
};
use crate::reference::{Reference, Settings};

/// Input of the kill tests: the first two novels of fixtures/gutenberg.
fn small_input() -> Vec<PathBuf> {
    gutenberg_files(2)
}

// Flags of every ingest in this module (small budget: many spills).
use crate::common::SMALL_BUDGET as FLAGS;

static BASELINE: OnceLock<StoreView> = OnceLock::new();

/// The uninterrupted run of the same command (built once).
fn baseline() -> &'static StoreView {
    BASELINE.get_or_init(|| {
        let tmp = tempfile::tempdir().unwrap();
        let store = tmp.path().join("store");
        ingest_ok(&store, FLAGS, &small_input());
        store_view(&store)
    })
}

const SIGKILL: i32 = 9;

/// Runs ingest with QUERN_KILL_AT=`spec` and asserts that the process was
/// killed by SIGKILL (contract: the ingest SIGKILLs itself at the n-th time
/// it reaches the point).
fn run_killed(store: &Path, spec: &str) {
    let args = ingest_args(store, FLAGS, &small_input());
    let r = run_env(&args, &[(KILL_VAR, spec)]);
    assert!(
        !r.status.success(),
        "QUERN_KILL_AT={spec}: ingest finished successfully, so the kill point was never reached that often\n{}",
        r.describe()
    );
    assert_eq!(
        r.signal(),
        Some(SIGKILL),
        "QUERN_KILL_AT={spec}: ingest did not die by SIGKILL\n{}",
        r.describe()
    );
}

/// Kill at `spec`, resume with the same command, compare with the
/// uninterrupted run (source: quern's own uninterrupted run, which
/// gutenberg.rs checks against the reference counter).
fn kill_and_resume(spec: &str) {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    run_killed(&store, spec);
    let resumed = run(&ingest_args(&store, FLAGS, &small_input()));
    resumed.assert_success();
    let view = store_view(&store);
    assert_views_eq(
        &format!("resume after QUERN_KILL_AT={spec}"),
        baseline(),
        &view,
    );
}

/// A fault variable that names no point, or has no count, is refused before
/// anything is counted (a misspelled point would otherwise never fire and
/// the crash test would pass without a crash).
#[test]
fn unknown_fault_point_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let args = ingest_args(&store, FLAGS, &small_input());
    for (var, value) in [
        (KILL_VAR, "comitted:1"),
        (KILL_VAR, "merge"),
        (KILL_VAR, "merge:0"),
        (quern::fault::FULL_VAR, "spill:1"),
    ] {
        let r = run_env(&args, &[(var, value)]);
        r.assert_failure();
        assert!(
            r.stderr.contains(&format!("{var}={value}")) && r.stderr.contains("<point>:<n>"),
            "{var}={value}: the error names the variable and the points\n{}",
            r.describe()
        );
        assert!(!store.exists(), "{var}={value}: the store was created");
    }
}

#[test]
fn resume_after_kill_at_spill_3() {
    kill_and_resume(&Point::Spill.at(3));
}

#[test]
fn resume_after_kill_at_committed_2() {
    kill_and_resume(&Point::Committed.at(2));
}

#[test]
fn resume_after_kill_at_merge_2() {
    kill_and_resume(&Point::Merge.at(2));
}

#[test]
fn resume_after_kill_at_join_3() {
    kill_and_resume(&Point::Join.at(3));
}

#[test]
fn resume_after_kill_at_build_1() {
    kill_and_resume(&Point::Build.at(1));
}

/// Several kills in a row, each resume killed again at a later point, then a
/// clean finish (source: quern's uninterrupted run). A resumed run may no
/// longer reach a point it already passed; then it just finishes.
#[test]
fn resume_after_repeated_kills() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let args = ingest_args(&store, FLAGS, &small_input());
    let mut kills = 0;
    let mut finished = false;
    for spec in [
        Point::Spill.at(2),
        Point::Committed.at(1),
        Point::Spill.at(1),
        Point::Merge.at(1),
        Point::Join.at(1),
        Point::Build.at(1),
    ] {
        let r = run_env(&args, &[(KILL_VAR, spec.as_str())]);
        if r.status.success() {
            finished = true;
            break;
        }
        assert_eq!(
            r.signal(),
            Some(SIGKILL),
            "QUERN_KILL_AT={spec} on a resumed store\n{}",
            r.describe()
        );
        kills += 1;
    }
    assert!(kills >= 2, "expected at least two kills, got {kills}");
    if !finished {
        run(&args).assert_success();
    }
    assert_views_eq(
        "resume after repeated kills",
        baseline(),
        &store_view(&store),
    );
}

/// Contract: the same command resumes; a different `--order` on an
/// unfinished store must fail with a clear message, and `--restart` discards
/// the unfinished work. Source for the final store: reference counter at
/// order 4 over the same input.
#[test]
fn resume_with_other_order_is_refused_and_restart_discards() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    run_killed(&store, &Point::Committed.at(1));

    let order4: Vec<&str> = vec!["--order", "4", "--memory", "32MiB", "--threads", "2"];
    let r = run(&ingest_args(&store, &order4, &small_input()));
    r.assert_failure();
    assert!(
        r.stderr.to_lowercase().contains("order"),
        "resume with another --order: message does not mention the order\n{}",
        r.describe()
    );

    let mut restart = order4.clone();
    restart.push("--restart");
    run(&ingest_args(&store, &restart, &small_input())).assert_success();
    let expected = Reference::from_paths(Settings::order(4), &small_input()).view();
    assert_views_eq("--restart with --order 4", &expected, &store_view(&store));
}

/// Contract: `--restart` on an unfinished store discards it and succeeds
/// with the same settings (source: quern's uninterrupted run).
#[test]
fn restart_same_order_after_kill() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    run_killed(&store, &Point::Merge.at(1));
    let mut flags = FLAGS.to_vec();
    flags.push("--restart");
    run(&ingest_args(&store, &flags, &small_input())).assert_success();
    assert_views_eq(
        &format!("--restart after kill at {}", Point::Merge.at(1)),
        baseline(),
        &store_view(&store),
    );
}

/// Contract: a finished store refuses a new ingest unless `--append`; the
/// store must be left as it was.
#[test]
fn finished_store_refuses_reingest_without_append() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let input = gutenberg_files(1);
    ingest_ok(&store, FLAGS, &input);
    let before = store_view(&store);
    let r = run(&ingest_args(&store, FLAGS, &input));
    r.assert_failure();
    let msg = r.stderr.to_lowercase();
    assert!(
        ["append", "finished", "complete", "already"].iter().any(|w| msg.contains(w)),
        "re-ingest of a finished store: message does not say the store is finished / to use --append\n{}",
        r.describe()
    );
    assert_views_eq(
        "finished store after refused re-ingest",
        &before,
        &store_view(&store),
    );
}

fn lock_message_ok(stderr: &str) -> bool {
    let m = stderr.to_lowercase();
    ["lock", "another", "running", "in use", "busy", "concurrent"]
        .iter()
        .any(|w| m.contains(w))
}

/// Contract (implied by resumable single-writer stores): a second ingest on
/// a store another ingest is writing must be refused, not block and not
/// interleave. The first ingest reads `-` (stdin) from a pipe the test holds
/// open, so it is deterministically still running while the second starts.
#[test]
fn concurrent_ingest_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let first_text = "one two three\nfour five\n";
    let second_text = "six seven\none two\n";

    let store_arg = store.display().to_string();
    // The same command twice, so that a refusal of the second can only be
    // about the store being in use, not about settings or inputs.
    let args = [
        "ingest", "--store", &store_arg, "--order", "3", "--quiet", "-",
    ];
    let mut first = command(&args, &[])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn first ingest");
    let mut stdin = first.stdin.take().unwrap();
    stdin.write_all(first_text.as_bytes()).unwrap();
    stdin.flush().unwrap();

    // Wait until the first ingest has created its store directory (it must
    // open the store before it can count anything), then a little more.
    let start = Instant::now();
    while !(store.is_dir()
        && std::fs::read_dir(&store)
            .map(|mut d| d.next().is_some())
            .unwrap_or(false))
    {
        assert!(
            start.elapsed() < Duration::from_secs(30),
            "first ingest never created its store while reading stdin"
        );
        assert!(
            first.try_wait().unwrap().is_none(),
            "first ingest exited while its stdin was still open"
        );
        std::thread::sleep(Duration::from_millis(50));
    }
    std::thread::sleep(Duration::from_millis(500));

    // The very same command (stdin empty), so that a refusal can only be
    // about the store being in use, not about different settings or inputs.
    let mut second = command(&args, &[])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn second ingest");
    let status = wait_timeout(&mut second, 60);
    let second_out = second.wait_with_output().unwrap();
    let second_err = String::from_utf8_lossy(&second_out.stderr).into_owned();
    assert!(
        status.is_some(),
        "second ingest blocked for 60 s instead of being refused"
    );
    let status = status.unwrap();
    assert!(
        first.try_wait().unwrap().is_none(),
        "first ingest ended before the second finished; test inconclusive"
    );
    assert!(
        !status.success() && status.code().is_some(),
        "second concurrent ingest was not refused: {status:?}\nstderr: {second_err}"
    );
    assert!(
        lock_message_ok(&second_err),
        "second concurrent ingest: message does not say the store is in use: {second_err}"
    );

    // The first ingest must still finish normally and count only its input
    // (source: reference counter over the text fed on stdin).
    stdin.write_all(second_text.as_bytes()).unwrap();
    drop(stdin);
    let status =
        wait_timeout(&mut first, 120).expect("first ingest did not finish after stdin closed");
    let out = first.wait_with_output().unwrap();
    assert!(
        status.success(),
        "first ingest failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut r = Reference::new(Settings::order(3));
    r.add_bytes(format!("{first_text}{second_text}").as_bytes());
    let expected = r.view();
    let actual = store_view(&store);
    assert_lines_eq(
        "concurrent: first ingest dump",
        &expected.dump,
        &actual.dump,
    );
    assert_views_eq("concurrent: first ingest", &expected, &actual);
}

/// What identifies one file of the work folder: inode, size and
/// modification time. A file written again (in place, or under a
/// temporary name and renamed over it) changes at least one of them.
fn identity(p: &Path) -> (u64, u64, i64, i64) {
    use std::os::unix::fs::MetadataExt;
    let m = std::fs::metadata(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()));
    (m.ino(), m.size(), m.mtime(), m.mtime_nsec())
}

/// The recorded spills of a manifest: id → (run, dictionary and
/// first-sightings file names, input ranges covered).
fn spills(m: &Value) -> BTreeMap<u64, (Vec<String>, Value)> {
    m["runsets"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            let mut files: Vec<String> = r["runs"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_str().unwrap().to_string())
                .collect();
            files.push(r["dict"].as_str().unwrap().to_string());
            if let Some(f) = r["firsts"].as_str() {
                files.push(f.to_string());
            }
            (r["id"].as_u64().unwrap(), (files, r["covers"].clone()))
        })
        .collect()
}

/// The recorded entries of `merged` or `joined`: partition → its files
/// (in work/merged or work/sst).
fn partitions(m: &Value, what: &str) -> BTreeMap<usize, Vec<String>> {
    let mut out = BTreeMap::new();
    for (p, e) in m[what].as_array().unwrap().iter().enumerate() {
        if e.is_null() {
            continue;
        }
        let files: Vec<String> = if what == "merged" {
            std::iter::once(&e["counts"])
                .chain(e["suffix_runs"].as_array().unwrap())
                .map(|x| x.as_str().unwrap().to_string())
                .collect()
        } else {
            e["ssts"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x[1].as_str().unwrap().to_string())
                .collect()
        };
        out.insert(p, files);
    }
    out
}

type Identities = BTreeMap<String, (u64, u64, i64, i64)>;

fn identities<'a>(dir: &Path, names: impl Iterator<Item = &'a String>) -> Identities {
    names.map(|n| (n.clone(), identity(&dir.join(n)))).collect()
}

/// A resume reuses what was recorded. The crash tests compare final
/// stores only, which a resume that counted, merged and joined everything
/// again would pass; here the manifest (DEVELOPERS.md, "How does resume
/// work?") is read after each of a chain of kills (after the third
/// recorded spill, then in the resumed run after its second merge, its
/// second join, and at the build): every spill, merged partition and
/// joined partition recorded at one kill is still recorded at the next with
/// the same files, untouched (same inode, size and modification time); no
/// input byte is covered by two spills; and the final resume, which only
/// builds, reports no run file written and time spent in building alone.
#[test]
fn resume_reuses_recorded_spills_merges_and_joins() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let work = store.join("work");
    let mut args = ingest_args(&store, FLAGS, &small_input());
    let killed = |spec: &str| {
        let r = run_env(&args, &[(KILL_VAR, spec)]);
        assert_eq!(
            r.signal(),
            Some(SIGKILL),
            "QUERN_KILL_AT={spec}\n{}",
            r.describe()
        );
        manifest(&store)
    };

    // Counting: three spills recorded.
    let m1 = killed(&Point::Committed.at(3));
    assert_eq!(m1["phase"], "counting", "{}", m1["phase"]);
    let s1 = spills(&m1);
    assert!(s1.len() >= 3, "{} spills recorded", s1.len());
    let files1 = identities(&work.join("runs"), s1.values().flat_map(|s| &s.0));

    // The resume counts only the rest: stopped after its second merge.
    let m2 = killed(&Point::Merge.at(2));
    assert_eq!(m2["phase"], "merging", "{}", m2["phase"]);
    let s2 = spills(&m2);
    for (id, s) in &s1 {
        assert_eq!(s2.get(id), Some(s), "spill {id} recorded before the resume");
    }
    assert!(
        s2.len() > s1.len(),
        "the resume recorded no spill of its own"
    );
    assert_eq!(
        identities(&work.join("runs"), files1.keys()),
        files1,
        "a spill file recorded before the resume was written again"
    );
    // No input byte is covered twice, and every byte is covered.
    let inputs = m2["inputs"].as_array().unwrap();
    let mut covers: Vec<(u64, u64, u64)> = s2
        .values()
        .flat_map(|s| s.1.as_array().unwrap().clone())
        .map(|c| {
            let file = c["file"].as_u64().unwrap();
            let size = inputs[file as usize]["size"].as_u64().unwrap();
            (
                file,
                c["start"].as_u64().unwrap(),
                c["end"].as_u64().unwrap().min(size),
            )
        })
        .collect();
    covers.sort();
    let mut at = (0u64, 0u64);
    for c in &covers {
        if c.0 != at.0 {
            assert_eq!(at.1, inputs[at.0 as usize]["size"].as_u64().unwrap());
            at = (c.0, 0);
        }
        assert_eq!(
            c.1, at.1,
            "input {} covered twice or not at all near byte {}",
            c.0, at.1
        );
        at.1 = c.2;
    }
    assert_eq!(at.1, inputs[at.0 as usize]["size"].as_u64().unwrap());
    let p2 = partitions(&m2, "merged");
    assert!(p2.len() >= 2, "{} partitions merged", p2.len());
    let merged2 = identities(&work.join("merged"), p2.values().flatten());

    // Joining, stopped after its second join.
    let m3 = killed(&Point::Join.at(2));
    assert_eq!(m3["phase"], "joining", "{}", m3["phase"]);
    let p3 = partitions(&m3, "merged");
    for (p, files) in &p2 {
        assert_eq!(p3.get(p), Some(files), "partition {p} merged before");
    }
    assert_eq!(
        identities(&work.join("merged"), merged2.keys()),
        merged2,
        "a partition merged before the resume was merged again"
    );
    let j3 = partitions(&m3, "joined");
    assert!(j3.len() >= 2, "{} partitions joined", j3.len());
    let joined3 = identities(&work.join("sst"), j3.values().flatten());

    // Building, stopped before the database is moved into place.
    let m4 = killed(&Point::Build.at(1));
    let j4 = partitions(&m4, "joined");
    for (p, files) in &j3 {
        assert_eq!(j4.get(p), Some(files), "partition {p} joined before");
    }
    assert_eq!(
        identities(&work.join("sst"), joined3.keys()),
        joined3,
        "a partition joined before the resume was joined again"
    );

    // The last resume only builds.
    args.push("--json".into());
    let r = run(&args);
    r.assert_success();
    let summary: Value = serde_json::from_str(r.stdout.trim()).unwrap();
    assert_eq!(summary["resumed"], true, "{summary}");
    assert_eq!(summary["runs_written"], 0, "{summary}");
    let phases: Vec<&String> = summary["phase_seconds"]
        .as_object()
        .unwrap()
        .keys()
        .collect();
    assert_eq!(phases, ["building"], "{summary}");
    assert_views_eq("after four kills", baseline(), &store_view(&store));
}

/// A resume after the merges were recorded writes no count run and spends
/// no time counting or merging (source: the resumed run's summary).
#[test]
fn resume_after_the_merges_counts_and_merges_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    run_killed(&store, &Point::Join.at(2));
    let mut args = ingest_args(&store, FLAGS, &small_input());
    args.push("--json".into());
    let r = run(&args);
    r.assert_success();
    let summary: Value = serde_json::from_str(r.stdout.trim()).unwrap();
    assert_eq!(summary["resumed"], true, "{summary}");
    assert_eq!(summary["runs_written"], 0, "{summary}");
    let phases: Vec<&String> = summary["phase_seconds"]
        .as_object()
        .unwrap()
        .keys()
        .collect();
    assert_eq!(phases, ["building", "joining"], "{summary}");
    assert_views_eq("resume after join:2", baseline(), &store_view(&store));
}
