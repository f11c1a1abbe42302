//! Shared helpers for the integration tests.

#![allow(dead_code)]

use std::collections::BTreeMap;
use std::ffi::OsStr;
use std::path::{Path, PathBuf};
use std::process::{Command, ExitStatus, Stdio};

use serde_json::Value;

/// Ingest flags of the resume and append tests: order 5 with a small
/// budget, so that the runs spill many times (two of the novels: 17 run
/// files; counting one key a token, 32 MiB gave only 4).
pub const SMALL_BUDGET: &[&str] = &[
    "--order",
    "5",
    "--memory",
    "24MiB",
    "--threads",
    "2",
    "--quiet",
];

/// Ingest flags of the fault tests (soak, damage, disk full): order 5 with
/// 16 MiB, so that one short novel spills a dozen times.
pub const TINY_BUDGET: &[&str] = &[
    "--order",
    "5",
    "--memory",
    "16MiB",
    "--threads",
    "2",
    "--quiet",
];

/// Input of the fault tests: fixtures/gutenberg/persuasion.txt, the
/// shortest novel but one.
pub fn fault_input() -> Vec<PathBuf> {
    vec![gutenberg_dir().join("persuasion.txt")]
}

/// Prints a notice that shows in the output of `cargo test` even when the
/// test passes (it is written to standard error directly, past the test
/// harness's capture): for a check that ran in a reduced form, such as a
/// fallback. `scripts/test` repeats every such line in its last summary.
pub fn notice(msg: &str) {
    use std::io::Write;
    let line = format!("NOTICE (quern tests): {msg}\n");
    let _ = std::io::stderr().write_all(line.as_bytes());
}

/// Prints a measurement (a load test's rate and latencies) past the test
/// harness's capture, like [`notice`] but with its own prefix: it reports
/// a figure of a check that ran in full, so `scripts/test` does not count
/// it among the checks that ran reduced.
pub fn report(msg: &str) {
    use std::io::Write;
    let line = format!("REPORT (quern tests): {msg}\n");
    let _ = std::io::stderr().write_all(line.as_bytes());
}

/// `python3`, which the tests run (scripts/setup installs it). Panics with
/// that advice when it is missing: a Python check is never skipped quietly.
pub fn python3() -> &'static str {
    static FOUND: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    let found = *FOUND.get_or_init(|| {
        Command::new("python3")
            .arg("--version")
            .output()
            .is_ok_and(|o| o.status.success())
    });
    assert!(
        found,
        "python3 is not installed: run scripts/setup (the tests compare with Python's standard library)"
    );
    "python3"
}

/// Path of the binary under test (provided by cargo for integration tests).
pub fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_quern")
}

/// `<crate>/fixtures`.
pub fn fixtures() -> PathBuf {
    PathBuf::from(concat!(env!("CARGO_MANIFEST_DIR"), "/fixtures"))
}

/// `<crate>` root (for scripts/).
pub fn manifest_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// `fixtures/gutenberg`, panicking with a clear message if it is missing.
pub fn gutenberg_dir() -> PathBuf {
    let dir = fixtures().join("gutenberg");
    assert!(
        dir.is_dir(),
        "fixture directory {} is missing (it is supposed to hold six novels)",
        dir.display()
    );
    dir
}

/// All regular files under `dir`, walked recursively, sorted by path.
pub fn files_under(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap_or_else(|e| panic!("read_dir {}: {e}", d.display())) {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.push(p);
            }
        }
    }
    out.sort();
    out
}

/// The first `n` files of fixtures/gutenberg in sorted order (a smaller input
/// for tests that do not need all six novels).
pub fn gutenberg_files(n: usize) -> Vec<PathBuf> {
    let files = files_under(&gutenberg_dir());
    assert!(
        files.len() >= n,
        "fixtures/gutenberg holds {} files, test needs {n}",
        files.len()
    );
    files.into_iter().take(n).collect()
}

/// Captured result of one run of the binary.
pub struct Run {
    pub args: Vec<String>,
    pub status: ExitStatus,
    pub stdout: String,
    pub stderr: String,
}

impl Run {
    pub fn describe(&self) -> String {
        format!(
            "command: quern {}\nstatus: {:?}\n--- stderr ---\n{}\n--- stdout (first 2000 chars) ---\n{}",
            self.args.join(" "),
            self.status,
            self.stderr,
            self.stdout.chars().take(2000).collect::<String>()
        )
    }

    /// Panics, showing stderr, unless the run exited with status 0.
    pub fn assert_success(&self) -> &Self {
        assert!(self.status.success(), "quern failed\n{}", self.describe());
        self
    }

    /// Panics unless the run exited normally with a non-zero status.
    pub fn assert_failure(&self) -> &Self {
        assert!(
            !self.status.success() && self.status.code().is_some(),
            "expected a non-zero exit code\n{}",
            self.describe()
        );
        self
    }

    /// The signal that ended the process, if any.
    pub fn signal(&self) -> Option<i32> {
        use std::os::unix::process::ExitStatusExt;
        self.status.signal()
    }
}

fn to_strings<S: AsRef<OsStr>>(args: &[S]) -> Vec<String> {
    args.iter()
        .map(|a| a.as_ref().to_string_lossy().into_owned())
        .collect()
}

/// Builds a `Command` for the binary with `args` and extra `env`. The fault
/// injection variable is removed unless `env` sets it.
pub fn command<S: AsRef<OsStr>>(args: &[S], env: &[(&str, &str)]) -> Command {
    let mut cmd = Command::new(bin());
    cmd.args(args);
    cmd.env_remove(quern::fault::KILL_VAR);
    cmd.env_remove(quern::fault::FULL_VAR);
    for (k, v) in env {
        cmd.env(k, v);
    }
    cmd.stdin(Stdio::null());
    cmd
}

/// Runs the binary with `args` and extra `env`, capturing stdout and stderr.
pub fn run_env<S: AsRef<OsStr>>(args: &[S], env: &[(&str, &str)]) -> Run {
    let out = command(args, env)
        .output()
        .unwrap_or_else(|e| panic!("cannot start {}: {e}", bin()));
    Run {
        args: to_strings(args),
        status: out.status,
        stdout: String::from_utf8(out.stdout).expect("quern stdout is not UTF-8"),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Runs the binary with `args`, capturing output.
pub fn run<S: AsRef<OsStr>>(args: &[S]) -> Run {
    run_env(args, &[])
}

/// Runs the binary and asserts success (stderr shown on failure).
pub fn run_ok<S: AsRef<OsStr>>(args: &[S]) -> Run {
    let r = run(args);
    r.assert_success();
    r
}

/// Runs the binary with stdin fed from `input`.
pub fn run_with_stdin<S: AsRef<OsStr>>(args: &[S], input: &[u8]) -> Run {
    use std::io::Write;
    let mut cmd = command(args, &[]);
    cmd.stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let mut child = cmd.spawn().expect("spawn quern");
    {
        let mut stdin = child.stdin.take().unwrap();
        stdin.write_all(input).unwrap();
    }
    let out = child.wait_with_output().unwrap();
    Run {
        args: to_strings(args),
        status: out.status,
        stdout: String::from_utf8(out.stdout).expect("quern stdout is not UTF-8"),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Argument list `ingest --store STORE <extra...> <inputs...>`.
pub fn ingest_args(store: &Path, extra: &[&str], inputs: &[PathBuf]) -> Vec<String> {
    let mut a = vec![
        "ingest".to_string(),
        "--store".to_string(),
        store.display().to_string(),
    ];
    a.extend(extra.iter().map(|s| s.to_string()));
    a.extend(inputs.iter().map(|p| p.display().to_string()));
    a
}

/// `quern ingest` that must succeed.
pub fn ingest_ok(store: &Path, extra: &[&str], inputs: &[PathBuf]) -> Run {
    run_ok(&ingest_args(store, extra, inputs))
}

/// Splits quern output into lines (on `\n` only; fields may be empty, so
/// nothing is trimmed), sorted.
pub fn sorted_lines(text: &str) -> Vec<String> {
    let mut v: Vec<String> = text.split('\n').map(|s| s.to_string()).collect();
    if v.last().map(|s| s.is_empty()).unwrap_or(false) {
        v.pop();
    }
    v.sort();
    v
}

/// `quern dump --store STORE [extra]`, as sorted lines.
pub fn dump_sorted(store: &Path, extra: &[&str]) -> Vec<String> {
    let mut a = vec![
        "dump".to_string(),
        "--no-header".to_string(),
        "--store".to_string(),
        store.display().to_string(),
    ];
    a.extend(extra.iter().map(|s| s.to_string()));
    sorted_lines(&run_ok(&a).stdout)
}

/// `quern dump --store STORE`, as a map words -> (count, continuation or
/// None for `-`).
pub fn dump_map(store: &Path) -> BTreeMap<String, (u64, Option<u64>)> {
    let mut m = BTreeMap::new();
    for line in dump_sorted(store, &[]) {
        let f: Vec<&str> = line.split('\t').collect();
        assert_eq!(f.len(), 3, "dump line does not have 3 TSV fields: {line:?}");
        let count: u64 = f[1]
            .parse()
            .unwrap_or_else(|_| panic!("bad count in {line:?}"));
        let cont = if f[2] == "-" {
            None
        } else {
            Some(
                f[2].parse()
                    .unwrap_or_else(|_| panic!("bad continuation in {line:?}")),
            )
        };
        assert!(
            m.insert(f[0].to_string(), (count, cont)).is_none(),
            "duplicate dump line for {:?}",
            f[0]
        );
    }
    m
}

/// `quern stats --store STORE --json`, parsed.
pub fn stats_json(store: &Path) -> Value {
    let r = run_ok(&["stats", "--store", &store.display().to_string(), "--json"]);
    serde_json::from_str(r.stdout.trim())
        .unwrap_or_else(|e| panic!("stats --json is not JSON: {e}\n{}", r.stdout))
}

/// Everything a store says, for whole-store comparisons.
#[derive(Clone, PartialEq, Debug)]
pub struct StoreView {
    pub dump: Vec<String>,
    pub contexts: Vec<String>,
    pub stats: Value,
}

pub fn store_view(store: &Path) -> StoreView {
    StoreView {
        dump: dump_sorted(store, &[]),
        contexts: dump_sorted(store, &["--contexts"]),
        stats: stats_json(store),
    }
}

/// Asserts that two views are equal: dump and contexts line by line, stats
/// with `assert_stats_eq`.
pub fn assert_views_eq(what: &str, expected: &StoreView, actual: &StoreView) {
    assert_lines_eq(&format!("{what}: dump"), &expected.dump, &actual.dump);
    assert_lines_eq(
        &format!("{what}: dump --contexts"),
        &expected.contexts,
        &actual.contexts,
    );
    assert_stats_eq(&format!("{what}: stats"), &expected.stats, &actual.stats);
}

/// Asserts that two sorted line lists are equal; on failure lists up to 25
/// lines only in one side, with the total number of such lines.
pub fn assert_lines_eq(what: &str, expected: &[String], actual: &[String]) {
    if expected == actual {
        return;
    }
    let (mut i, mut j) = (0, 0);
    let mut missing = Vec::new();
    let mut extra = Vec::new();
    let (mut n_missing, mut n_extra) = (0usize, 0usize);
    while i < expected.len() || j < actual.len() {
        let take_expected = match (expected.get(i), actual.get(j)) {
            (Some(e), Some(a)) if e == a => {
                i += 1;
                j += 1;
                continue;
            }
            (Some(e), Some(a)) => e < a,
            (Some(_), None) => true,
            (None, _) => false,
        };
        if take_expected {
            n_missing += 1;
            if missing.len() < 25 {
                missing.push(format!("{:?}", expected[i]));
            }
            i += 1;
        } else {
            n_extra += 1;
            if extra.len() < 25 {
                extra.push(format!("{:?}", actual[j]));
            }
            j += 1;
        }
    }
    panic!(
        "{what}: {} expected lines, {} actual lines; {n_missing} expected lines missing from quern, {n_extra} quern lines not expected\n\
         expected but missing (first 25):\n  {}\nunexpected (first 25):\n  {}",
        expected.len(),
        actual.len(),
        missing.join("\n  "),
        extra.join("\n  ")
    );
}

/// Compares stats JSON: every field of `expected` must be in `actual` with
/// an equal value (extra fields in `actual` are allowed), except numbers
/// under `discounts`, which are compared with a 1e-12 absolute tolerance.
pub fn assert_stats_eq(what: &str, expected: &Value, actual: &Value) {
    let mut errors = Vec::new();
    cmp_value("", expected, actual, &mut errors);
    assert!(
        errors.is_empty(),
        "{what}: stats JSON differs:\n  {}\nexpected: {}\nactual:   {}",
        errors.join("\n  "),
        serde_json::to_string(expected).unwrap(),
        serde_json::to_string(actual).unwrap()
    );
}

fn cmp_value(path: &str, e: &Value, a: &Value, errors: &mut Vec<String>) {
    match (e, a) {
        (Value::Object(eo), Value::Object(ao)) => {
            for (k, ev) in eo {
                let p = format!("{path}.{k}");
                match ao.get(k) {
                    None => errors.push(format!("{p}: missing in quern output (expected {ev})")),
                    Some(av) => cmp_value(&p, ev, av, errors),
                }
            }
        }
        (Value::Array(ea), Value::Array(aa)) => {
            if ea.len() != aa.len() {
                errors.push(format!(
                    "{path}: array length {} expected, {} actual: expected {e}, actual {a}",
                    ea.len(),
                    aa.len()
                ));
                return;
            }
            for (i, (ev, av)) in ea.iter().zip(aa).enumerate() {
                cmp_value(&format!("{path}[{i}]"), ev, av, errors);
            }
        }
        (Value::Number(en), Value::Number(an)) if path.contains(".discounts.") => {
            let (x, y) = (en.as_f64().unwrap(), an.as_f64().unwrap());
            if (x - y).abs() > 1e-12 {
                errors.push(format!(
                    "{path}: expected {x:.17}, actual {y:.17} (tolerance 1e-12)"
                ));
            }
        }
        (Value::Number(en), Value::Number(an)) => {
            let same = match (en.as_u64(), an.as_u64()) {
                (Some(x), Some(y)) => x == y,
                _ => en.as_f64() == an.as_f64(),
            };
            if !same {
                errors.push(format!("{path}: expected {e}, actual {a}"));
            }
        }
        _ => {
            if e != a {
                errors.push(format!("{path}: expected {e}, actual {a}"));
            }
        }
    }
}

/// Reads a JSON file written with a trailing `#xxh3=` line (the ingest's
/// `work/manifest.json`, a staged job's `job.json`).
pub fn checked_json(path: &Path) -> Value {
    let text =
        std::fs::read_to_string(path).unwrap_or_else(|e| panic!("read {}: {e}", path.display()));
    let body = text.rsplit_once("\n#xxh3=").map_or(&text[..], |x| x.0);
    serde_json::from_str(body).unwrap_or_else(|e| panic!("{} is not JSON: {e}", path.display()))
}

/// The manifest of an unfinished ingest into `store`.
pub fn manifest(store: &Path) -> Value {
    checked_json(&store.join("work").join("manifest.json"))
}

/// Waits for `child` up to `secs` seconds; kills it and returns None on
/// timeout.
pub fn wait_timeout(child: &mut std::process::Child, secs: u64) -> Option<ExitStatus> {
    let start = std::time::Instant::now();
    loop {
        if let Some(st) = child.try_wait().unwrap() {
            return Some(st);
        }
        if start.elapsed().as_secs() >= secs {
            let _ = child.kill();
            let _ = child.wait();
            return None;
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
}
