//! Random-kill soak: ingests (fresh and `--append`) are SIGKILLed at random
//! moments, resumed with the same command (sometimes killed again), and
//! finished. Every trial's store must equal an uninterrupted run's, and a
//! finished store directory must hold nothing but the database and the lock
//! file.
//!
//! Trials: `QUERN_SOAK_TRIALS` (default 25; `scripts/soak --trials N` runs a
//! longer soak). Seed: `QUERN_SOAK_SEED` (default 1), printed so that a
//! failing trial can be replayed. Kill moments are stratified over the
//! uninterrupted run's wall time (trial i of n draws its first kill from the
//! i-th n-th of it), so the phases are hit in proportion to their length.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use crate::common::{
    assert_views_eq, command, gutenberg_dir, ingest_args, ingest_ok, store_view, wait_timeout,
    StoreView,
};

use crate::common::TINY_BUDGET as FLAGS;

/// splitmix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number
/// generators", OOPSLA 2014): a small, well-known seeded generator.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1).
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn env_u64(name: &str, default: u64) -> u64 {
    std::env::var(name)
        .ok()
        .map(|v| {
            v.parse()
                .unwrap_or_else(|_| panic!("{name}={v} is not a number"))
        })
        .unwrap_or(default)
}

/// Runs `args` and SIGKILLs it after `after` unless it ends first. Returns
/// true if the kill landed (the process was still running).
fn run_and_kill(args: &[String], after: Duration) -> bool {
    let mut child = command(args, &[])
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .expect("spawn ingest");
    let start = Instant::now();
    while start.elapsed() < after {
        if let Some(status) = child.try_wait().unwrap() {
            let out = child.wait_with_output().unwrap();
            assert!(
                status.success(),
                "ingest failed before its kill: {status:?}\n{}",
                String::from_utf8_lossy(&out.stderr)
            );
            return false;
        }
        std::thread::sleep(Duration::from_millis(2));
    }
    let _ = child.kill();
    let _ = child.wait();
    true
}

/// The phase an interrupted ingest's manifest records ("none" when there is
/// no manifest yet).
fn phase_of(store: &Path) -> String {
    let text = match std::fs::read_to_string(store.join("work").join("manifest.json")) {
        Ok(t) => t,
        Err(_) => return "none".into(),
    };
    let body = text.rsplit_once("\n#xxh3=").map(|x| x.0).unwrap_or(&text);
    serde_json::from_str::<serde_json::Value>(body)
        .ok()
        .and_then(|v| v["phase"].as_str().map(str::to_string))
        .unwrap_or_else(|| "unreadable".into())
}

/// The work folder of a finished ingest while it is being removed
/// (`layout::work_done`).
const WORK_DONE: &str = "work.done";

/// A finished store holds its database and lock file, nothing else (no
/// work folder, no staging or swapped-out database).
fn assert_clean(what: &str, store: &Path) {
    let mut names: Vec<String> = std::fs::read_dir(store)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(
        names,
        ["db", "ingest.lock"],
        "{what}: the finished store directory holds leftovers"
    );
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let dest = to.join(e.file_name());
        if e.file_type().unwrap().is_dir() {
            copy_dir(&e.path(), &dest);
        } else {
            std::fs::copy(e.path(), dest).unwrap();
        }
    }
}

/// One scenario: `prepare` sets up the store directory (empty or a finished
/// store to append to), `args` is the ingest to interrupt.
struct Scenario {
    name: &'static str,
    args: Vec<String>,
    prepare: Box<dyn Fn(&Path)>,
    expected: StoreView,
    wall: Duration,
}

fn scenario(
    name: &'static str,
    store_arg: &Path,
    flags: &[&str],
    inputs: &[PathBuf],
    prepare: Box<dyn Fn(&Path)>,
    expected: StoreView,
) -> Scenario {
    // Wall time of the uninterrupted command (median of 3).
    let args = ingest_args(store_arg, flags, inputs);
    let mut times = Vec::new();
    for _ in 0..3 {
        let _ = std::fs::remove_dir_all(store_arg);
        prepare(store_arg);
        let t = Instant::now();
        let mut c = command(&args, &[])
            .stdout(std::process::Stdio::null())
            .spawn()
            .unwrap();
        let s = wait_timeout(&mut c, 300).expect("uninterrupted ingest hung");
        assert!(s.success(), "uninterrupted {name} ingest failed");
        times.push(t.elapsed());
    }
    times.sort();
    Scenario {
        name,
        args,
        prepare,
        expected,
        wall: times[1],
    }
}

#[test]
fn random_kills_then_resume_equal_an_uninterrupted_run() {
    let trials = env_u64("QUERN_SOAK_TRIALS", 25);
    let seed = env_u64("QUERN_SOAK_SEED", 1);
    // Too few trials cannot reach several phases: that is no soak, and a
    // soak left out must show as left out (`--skip soak::`), not pass.
    assert!(
        trials >= MIN_TRIALS,
        "QUERN_SOAK_TRIALS={trials}: the soak needs at least {MIN_TRIALS} trials; to leave it out, filter it out (cargo test -- --skip soak::)"
    );
    eprintln!("soak: {trials} trials, QUERN_SOAK_SEED={seed}");
    let mut rng = Rng(seed);
    let dir = gutenberg_dir();
    let a = dir.join("persuasion.txt");
    let b = dir.join("northangerabbey.txt");
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");

    // Expected stores: quern's uninterrupted runs (gutenberg.rs and
    // append.rs check those against the reference counter).
    let fresh_ref = tmp.path().join("fresh-ref");
    ingest_ok(&fresh_ref, FLAGS, std::slice::from_ref(&b));
    let base = tmp.path().join("base");
    ingest_ok(&base, FLAGS, std::slice::from_ref(&a));
    let joint = tmp.path().join("joint");
    ingest_ok(&joint, FLAGS, &[a.clone(), b.clone()]);

    let mut append_flags = FLAGS.to_vec();
    append_flags.push("--append");
    let base_for_prepare = base.clone();
    let scenarios = [
        scenario(
            "fresh",
            &store,
            FLAGS,
            std::slice::from_ref(&b),
            Box::new(|_| {}),
            store_view(&fresh_ref),
        ),
        scenario(
            "append",
            &store,
            &append_flags,
            std::slice::from_ref(&b),
            Box::new(move |s| copy_dir(&base_for_prepare, s)),
            store_view(&joint),
        ),
    ];

    // phase at the moment of each landed kill, per scenario
    let mut hits: BTreeMap<String, u64> = BTreeMap::new();
    let mut kills = 0;
    for trial in 0..trials {
        // Every third trial interrupts an append.
        let s = &scenarios[if trial % 3 == 2 { 1 } else { 0 }];
        let _ = std::fs::remove_dir_all(&store);
        (s.prepare)(&store);
        let frac = (trial as f64 + rng.unit()) / trials as f64;
        let mut at = s.wall.mul_f64(frac);
        let mut story = Vec::new();
        let mut finished = false;
        // First kill, then with probability 1/2 each another kill of the
        // resumed run (at most 3), then a run to the end.
        for round in 0..3 {
            if round > 0 && rng.unit() < 0.5 {
                break;
            }
            if !run_and_kill(&s.args, at) {
                story.push(format!("finished before {at:?}"));
                finished = true;
                break;
            }
            kills += 1;
            // A kill that lands after the store was put in place and the
            // work folder removed, but before the process exited, leaves a
            // finished store: running the same command again would be
            // refused (fresh) or append twice. (An append killed before it
            // started also leaves no work folder, but the old store, which
            // differs from the expected one.)
            if !store.join("work").exists()
                && store.join("db").join("CURRENT").exists()
                && store_view(&store) == s.expected
            {
                story.push(format!("killed at {at:?} after it finished"));
                *hits
                    .entry(format!("{} after finishing", s.name))
                    .or_default() += 1;
                finished = true;
                break;
            }
            // (A kill while the finished run removes its work folder leaves
            // no `work` folder: it is moved aside in one step first, so the
            // case above covers it; what is left of `work.done` is removed
            // by the next ingest into the store, checked below.)
            let phase = phase_of(&store);
            story.push(format!("killed at {at:?} in {phase}"));
            *hits.entry(format!("{} {phase}", s.name)).or_default() += 1;
            at = s.wall.mul_f64(rng.unit());
        }
        // A kill while the finished run was removing `work.done` leaves
        // part of it beside the complete store. The next ingest into the
        // store removes it before anything else, even one that is then
        // refused: the fresh command, which a finished store refuses (and
        // the views below check that the refusal changed nothing).
        if store.join(WORK_DONE).exists() {
            story.push(format!("{WORK_DONE} left over"));
            let r = command(&scenarios[0].args, &[]).output().unwrap();
            assert!(
                !r.status.success(),
                "trial {trial}: a fresh ingest into a finished store was not refused"
            );
        }
        let what = format!(
            "trial {trial} ({}, seed {seed}): {}",
            s.name,
            story.join(", ")
        );
        if !finished {
            let mut c = command(&s.args, &[])
                .stdout(std::process::Stdio::null())
                .stderr(std::process::Stdio::piped())
                .spawn()
                .unwrap();
            let status = wait_timeout(&mut c, 300).expect("resumed ingest hung");
            let out = c.wait_with_output().unwrap();
            assert!(
                status.success(),
                "{what}: the resumed ingest failed\n{}",
                String::from_utf8_lossy(&out.stderr)
            );
        }
        assert_views_eq(&what, &s.expected, &store_view(&store));
        assert_clean(&what, &store);
    }
    eprintln!("soak: {trials} trials passed, {kills} kills landed; phases at the kills: {hits:?}");
    // Most first kills land before the run would have finished (timing noise
    // can let a late one finish first).
    assert!(
        2 * kills >= trials,
        "only {kills} kills landed in {trials} trials: the soak tested little"
    );
    // The kills hit several phases of the ingest (the manifest's phase at
    // the kill), in the fresh and in the appending scenario.
    let phases = |scenario: &str| -> Vec<String> {
        hits.keys()
            .filter_map(|k| k.strip_prefix(scenario))
            .map(|p| p.trim().to_string())
            .filter(|p| p != "none" && p != "unreadable")
            .collect()
    };
    for scenario in ["fresh", "append"] {
        let seen = phases(scenario);
        assert!(
            seen.len() >= 2,
            "the kills of the {scenario} ingests landed in phases {seen:?} only ({hits:?}): the soak missed most of the ingest"
        );
    }
}

/// The fewest trials that reach several phases of both scenarios.
const MIN_TRIALS: u64 = 6;
