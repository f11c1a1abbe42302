//! Kill-and-resume through the fault injection env `QUERN_KILL_AT`, plus the
//! store's refusals (order mismatch on resume, re-ingest of a finished store,
//! a concurrent ingest) and `--restart`.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Stdio;
use std::sync::OnceLock;
use std::time::{Duration, Instant};

use crate::common::{
    assert_lines_eq, assert_views_eq, command, gutenberg_files, ingest_args, ingest_ok, run,
    run_env, store_view, wait_timeout, StoreView,
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
    let r = run_env(&args, &[("QUERN_KILL_AT", spec)]);
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

#[test]
fn resume_after_kill_at_spill_3() {
    kill_and_resume("spill:3");
}

#[test]
fn resume_after_kill_at_committed_2() {
    kill_and_resume("committed:2");
}

#[test]
fn resume_after_kill_at_merge_2() {
    kill_and_resume("merge:2");
}

#[test]
fn resume_after_kill_at_join_3() {
    kill_and_resume("join:3");
}

#[test]
fn resume_after_kill_at_build_1() {
    kill_and_resume("build:1");
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
        "spill:2",
        "committed:1",
        "spill:1",
        "merge:1",
        "join:1",
        "build:1",
    ] {
        let r = run_env(&args, &[("QUERN_KILL_AT", spec)]);
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
    run_killed(&store, "committed:1");

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
    run_killed(&store, "merge:1");
    let mut flags = FLAGS.to_vec();
    flags.push("--restart");
    run(&ingest_args(&store, &flags, &small_input())).assert_success();
    assert_views_eq(
        "--restart after kill at merge:1",
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
