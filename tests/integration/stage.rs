//! `quern stage`: the ingest as separate tasks over a shared directory,
//! run here by hand (spark.rs runs them through Spark). The source of truth
//! of every equality is a single-machine `quern ingest` of the same inputs,
//! which gutenberg.rs checks against the independent reference counter.

use std::path::{Path, PathBuf};

use serde_json::Value;

use quern::fault::{Point, KILL_VAR};

use crate::common::{command, gutenberg_files, ingest_ok, run, run_env, run_ok};

/// The three outputs that describe a whole store, as printed: `dump`,
/// `dump --contexts` and `stats --json` (compared byte for byte).
#[derive(PartialEq, Eq)]
pub struct RawView {
    pub dump: String,
    pub contexts: String,
    pub stats: String,
}

impl std::fmt::Debug for RawView {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "RawView {{ dump: {} lines, contexts: {} lines, stats: {} }}",
            self.dump.lines().count(),
            self.contexts.lines().count(),
            self.stats
        )
    }
}

pub fn raw_view(store: &Path) -> RawView {
    let s = store.display().to_string();
    RawView {
        dump: run_ok(&["dump", "--store", &s]).stdout,
        contexts: run_ok(&["dump", "--store", &s, "--contexts"]).stdout,
        stats: run_ok(&["stats", "--store", &s, "--json"]).stdout,
    }
}

/// Asserts equality byte for byte, naming the first differing line.
pub fn assert_raw_eq(what: &str, expected: &RawView, actual: &RawView) {
    for (name, e, a) in [
        ("dump", &expected.dump, &actual.dump),
        ("dump --contexts", &expected.contexts, &actual.contexts),
        ("stats --json", &expected.stats, &actual.stats),
    ] {
        if e != a {
            let first = e
                .lines()
                .zip(a.lines())
                .enumerate()
                .find(|(_, (x, y))| x != y)
                .map(|(i, (x, y))| format!("line {}: expected {x:?}, got {y:?}", i + 1))
                .unwrap_or_else(|| format!("{} vs {} lines", e.lines().count(), a.lines().count()));
            panic!("{what}: {name} differs from the single-machine ingest ({first})");
        }
    }
    assert!(
        expected.dump.lines().count() > 1000,
        "{what}: the baseline store is suspiciously small"
    );
}

pub(crate) fn s(p: &Path) -> String {
    p.display().to_string()
}

/// Runs `quern stage ARGS` and returns its JSON report.
pub(crate) fn stage_ok(args: &[String]) -> Value {
    let mut a = vec!["stage".to_string()];
    a.extend(args.iter().cloned());
    let r = run_ok(&a);
    serde_json::from_str(r.stdout.trim()).unwrap_or_else(|e| panic!("report {e}: {}", r.stdout))
}

fn plan(dir: &Path, partitions: u32, tasks: usize, inputs: &[PathBuf]) -> Value {
    plan_with(dir, partitions, tasks, &[], inputs)
}

/// [`plan`] with more flags (`extra`) before the inputs.
pub fn plan_with(
    dir: &Path,
    partitions: u32,
    tasks: usize,
    extra: &[String],
    inputs: &[PathBuf],
) -> Value {
    let mut a = vec![
        "plan".to_string(),
        "--dir".into(),
        s(dir),
        "--order".into(),
        "5".into(),
        "--partitions".into(),
        partitions.to_string(),
        "--map-tasks".into(),
        tasks.to_string(),
    ];
    a.extend(extra.iter().cloned());
    a.extend(inputs.iter().map(|p| s(p)));
    stage_ok(&a)
}

pub(crate) fn task_args(stage: &str, dir: &Path, n: u64) -> Vec<String> {
    let flag = if stage == "map" || stage == "hash" {
        "--task"
    } else {
        "--partition"
    };
    vec![
        stage.to_string(),
        "--dir".into(),
        s(dir),
        flag.into(),
        n.to_string(),
        "--memory".into(),
        "64MiB".into(),
    ]
}

/// Runs every task of a planned job in order.
pub fn run_all(dir: &Path, store: &Path, plan: &Value) -> Vec<Value> {
    let mut reports = Vec::new();
    for t in 0..plan["map_tasks"].as_u64().unwrap() {
        reports.push(stage_ok(&task_args("map", dir, t)));
    }
    for st in ["merge", "join"] {
        for p in 0..plan["partitions"].as_u64().unwrap() {
            reports.push(stage_ok(&task_args(st, dir, p)));
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

pub(crate) fn outcome(v: &Value) -> &str {
    v["outcome"].as_str().unwrap()
}

/// Two novels through the stages, with several partitions and map tasks,
/// equal the single-machine ingest; running every task again skips them all
/// and leaves the store as it was.
#[test]
fn stages_by_hand_equal_the_single_machine_ingest_and_rerun_is_skipped() {
    let inputs = gutenberg_files(2);
    let tmp = tempfile::tempdir().unwrap();
    let single = tmp.path().join("single");
    ingest_ok(&single, &["--order", "5", "--quiet"], &inputs);
    let expected = raw_view(&single);

    let dir = tmp.path().join("shared");
    let store = tmp.path().join("store");
    let p = plan(&dir, 3, 3, &inputs);
    assert_eq!(
        p["map_tasks"], 2,
        "two files under 1 MiB are two chunks: {p}"
    );
    let first = run_all(&dir, &store, &p);
    assert!(first.iter().all(|r| outcome(r) == "written"), "{first:?}");
    assert_raw_eq("stages, 3 partitions", &expected, &raw_view(&store));

    assert_eq!(outcome(&plan(&dir, 3, 3, &inputs)), "skipped");
    let again = run_all(&dir, &store, &p);
    assert!(again.iter().all(|r| outcome(r) == "skipped"), "{again:?}");
    assert_raw_eq("stages run twice", &expected, &raw_view(&store));

    // One partition only: the same store (partition count does not matter).
    let dir1 = tmp.path().join("shared1");
    let store1 = tmp.path().join("store1");
    let p1 = plan(&dir1, 1, 1, &inputs);
    run_all(&dir1, &store1, &p1);
    assert_raw_eq("stages, 1 partition", &expected, &raw_view(&store1));
}

/// `stage plan --word-list`: the store equals `ingest --word-list` of the
/// same inputs (with and without --lowercase), keeps the same canonical
/// list, and the tasks read the plan's copy, not the file given to the plan;
/// a damaged copy stops a map task (and a second plan) naming it, and no
/// list or another list in the same directory is another plan.
#[test]
fn stages_with_a_word_list_equal_ingest_with_it() {
    let inputs = gutenberg_files(2);
    let tmp = tempfile::tempdir().unwrap();
    // Frequent words of the first novel in mixed case, and one that never occurs.
    let text = std::fs::read_to_string(&inputs[0]).unwrap();
    let mut c = std::collections::BTreeMap::new();
    for t in text.split_whitespace() {
        *c.entry(t).or_insert(0u64) += 1;
    }
    let mut words: Vec<(&str, u64)> = c.into_iter().collect();
    words.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
    let mut list: Vec<&str> = words[..400].iter().map(|w| w.0).collect();
    list.push("Zyzzogeton");
    let file = tmp.path().join("list.txt");
    std::fs::write(&file, list.join("\n")).unwrap();

    for lowercase in [false, true] {
        let mut flags = vec!["--word-list".to_string(), s(&file)];
        if lowercase {
            flags.push("--lowercase".into());
        }
        let single = tmp.path().join(format!("single-{lowercase}"));
        let mut extra: Vec<&str> = vec!["--order", "5", "--quiet"];
        extra.extend(flags.iter().map(String::as_str));
        ingest_ok(&single, &extra, &inputs);
        let expected = raw_view(&single);
        // The single-machine store the stages must equal, every order,
        // against Python's count of the mapped text (collections.Counter,
        // scripts/reference_ngrams.py), so that the two do not merely
        // agree with each other.
        crate::common::assert_lines_eq(
            &format!("ingest --word-list, lowercase {lowercase}: Python vs dump"),
            &crate::word_list::python_dump(tmp.path(), &inputs, &file, lowercase, 5),
            &crate::common::dump_sorted(&single, &[]),
        );
        let stats: Value = serde_json::from_str(&expected.stats).unwrap();
        assert!(
            stats["totals"]["mapped_tokens"].as_u64().unwrap() > 0,
            "the list maps no token: {}",
            expected.stats
        );

        let dir = tmp.path().join(format!("shared-{lowercase}"));
        let store = tmp.path().join(format!("store-{lowercase}"));
        let p = plan_with(&dir, 3, 2, &flags, &inputs);
        // The tasks must use the plan's copy: the given file goes away.
        let moved = tmp.path().join("list-moved.txt");
        std::fs::rename(&file, &moved).unwrap();
        run_all(&dir, &store, &p);
        std::fs::rename(&moved, &file).unwrap();
        assert_raw_eq(
            &format!("stages with a word list, lowercase {lowercase}"),
            &expected,
            &raw_view(&store),
        );
        assert_eq!(
            std::fs::read(store.join("word-list.txt")).unwrap(),
            std::fs::read(single.join("word-list.txt")).unwrap(),
            "the store keeps the list as ingest does"
        );
    }

    // A damaged copy in the plan's directory: the map task names it.
    let dir = tmp.path().join("shared-false");
    std::fs::remove_dir_all(dir.join("map")).unwrap();
    let kept = dir.join("word-list.txt");
    let mut bytes = std::fs::read(&kept).unwrap();
    bytes[0] ^= 0x20;
    std::fs::write(&kept, bytes).unwrap();
    let r = run(&[&["stage".to_string()][..], &task_args("map", &dir, 0)].concat());
    r.assert_failure();
    assert!(
        r.stderr.contains(&s(&kept)) && r.stderr.contains("not the word list"),
        "{}",
        r.describe()
    );
    // Planning again: with the same list, the damaged copy is named; without
    // the list, or with another one, it is another plan.
    let other = tmp.path().join("other.txt");
    std::fs::write(&other, "the\nof\n").unwrap();
    for (list, want) in [
        (Some(&file), s(&kept)),
        (None, "holds another plan".to_string()),
        (Some(&other), "holds another plan".to_string()),
    ] {
        let mut a = vec!["stage".to_string(), "plan".into(), "--dir".into(), s(&dir)];
        a.extend(["--order", "5", "--partitions", "3", "--map-tasks", "2"].map(String::from));
        if let Some(l) = list {
            a.extend(["--word-list".to_string(), s(l)]);
        }
        a.extend(inputs.iter().map(|p| s(p)));
        let r = run(&a);
        r.assert_failure();
        assert!(r.stderr.contains(&want), "{}", r.describe());
    }
}

/// Two copies of one task at once: exactly one writes the output, the other
/// finds it finished (skipped) or loses the race (raced); a task killed
/// before or after its commit is redone or skipped by the next attempt; a
/// damaged output is moved aside and written again.
#[test]
fn stage_tasks_twice_at_once_killed_or_damaged() {
    let inputs = gutenberg_files(1);
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("shared");
    plan(&dir, 2, 1, &inputs);
    let mut a = vec!["stage".to_string()];
    a.extend(task_args("map", &dir, 0));
    let children: Vec<_> = (0..2)
        .map(|_| {
            command(&a, &[])
                .stdout(std::process::Stdio::piped())
                .spawn()
                .unwrap()
        })
        .collect();
    let mut outcomes: Vec<String> = children
        .into_iter()
        .map(|c| {
            let o = c.wait_with_output().unwrap();
            assert!(o.status.success());
            let v: Value = serde_json::from_slice(&o.stdout).unwrap();
            outcome(&v).to_string()
        })
        .collect();
    outcomes.sort();
    assert!(
        outcomes == ["raced", "written"] || outcomes == ["skipped", "written"],
        "{outcomes:?}"
    );
    let leftovers: Vec<_> = std::fs::read_dir(dir.join("map"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(leftovers, ["m000000"], "the losing copy removes its folder");

    // Killed after writing, before the commit: the next attempt writes.
    let r = run_env(
        &[&["stage".to_string()][..], &task_args("merge", &dir, 0)].concat(),
        &[(KILL_VAR, Point::StageWritten.at(1).as_str())],
    );
    assert_eq!(r.signal(), Some(9), "{}", r.describe());
    assert_eq!(outcome(&stage_ok(&task_args("merge", &dir, 0))), "written");
    // Killed just after the commit: the next attempt skips.
    let r = run_env(
        &[&["stage".to_string()][..], &task_args("merge", &dir, 1)].concat(),
        &[(KILL_VAR, Point::StageDone.at(1).as_str())],
    );
    assert_eq!(r.signal(), Some(9), "{}", r.describe());
    assert_eq!(outcome(&stage_ok(&task_args("merge", &dir, 1))), "skipped");

    // A flipped byte in a finished output's file: recognised, written again.
    let run_file = std::fs::read_dir(dir.join("map/m000000"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.extension().is_some_and(|x| x == "run"))
        .unwrap();
    let mut bytes = std::fs::read(&run_file).unwrap();
    let before = map_files(&dir);
    bytes[20] ^= 0x40;
    std::fs::write(&run_file, bytes).unwrap();
    assert_eq!(outcome(&stage_ok(&task_args("map", &dir, 0))), "repaired");
    assert_eq!(outcome(&stage_ok(&task_args("map", &dir, 0))), "skipped");
    // The repaired output is the one first written, file for file.
    assert!(
        map_files(&dir) == before,
        "the repaired map output differs from the first one"
    );

    // The store these outputs make (the redone and the skipped reduce,
    // the repaired map's dictionaries) equals the single-machine ingest.
    for p in 0..2 {
        stage_ok(&task_args("join", &dir, p));
    }
    let store = tmp.path().join("store");
    stage_ok(&[
        "assemble".into(),
        "--dir".into(),
        s(&dir),
        "--store".into(),
        s(&store),
    ]);
    let single = tmp.path().join("single");
    ingest_ok(&single, &["--order", "5", "--quiet"], &inputs);
    assert_raw_eq(
        "stages after a killed reduce and a repaired map",
        &raw_view(&single),
        &raw_view(&store),
    );
}

/// The files of map task 0's finished output, by name, with their bytes.
fn map_files(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir.join("map/m000000"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_none_or(|x| x != "json"))
        .map(|p| {
            (
                p.file_name().unwrap().to_string_lossy().into_owned(),
                std::fs::read(&p).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}

/// Missing inputs: a map task whose input vanished after planning fails
/// naming the file; a merge before its maps names the map task to run; a
/// plan given a missing file names it.
#[test]
fn stage_missing_inputs_fail_with_the_file_named() {
    let tmp = tempfile::tempdir().unwrap();
    let copy = tmp.path().join("novel.txt");
    std::fs::copy(&gutenberg_files(1)[0], &copy).unwrap();
    let dir = tmp.path().join("shared");
    plan(&dir, 2, 1, std::slice::from_ref(&copy));

    let r = run(&[&["stage".to_string()][..], &task_args("merge", &dir, 0)].concat());
    r.assert_failure();
    assert!(
        r.stderr.contains("map task 0 has no finished output"),
        "{}",
        r.describe()
    );

    std::fs::remove_file(&copy).unwrap();
    let r = run(&[&["stage".to_string()][..], &task_args("map", &dir, 0)].concat());
    r.assert_failure();
    assert!(
        r.stderr.contains(&s(&copy)) && r.stderr.contains("an input of map task 0"),
        "{}",
        r.describe()
    );

    let missing = tmp.path().join("not-there.txt");
    let r = run(&[
        "stage",
        "plan",
        "--dir",
        &s(&tmp.path().join("other")),
        "--partitions",
        "2",
        "--map-tasks",
        "2",
        &s(&missing),
    ]);
    r.assert_failure();
    assert!(r.stderr.contains(&s(&missing)), "{}", r.describe());
}

/// Another plan in the same directory is refused.
#[test]
fn stage_plan_refuses_another_plan_in_the_same_dir() {
    let inputs = gutenberg_files(1);
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("shared");
    plan(&dir, 2, 1, &inputs);
    let mut a = vec!["stage".to_string(), "plan".into(), "--dir".into(), s(&dir)];
    a.extend(["--partitions", "3", "--map-tasks", "1"].map(String::from));
    a.push(s(&inputs[0]));
    let r = run(&a);
    r.assert_failure();
    assert!(r.stderr.contains("holds another plan"), "{}", r.describe());
}
