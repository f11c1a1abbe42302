//! `ingest --counts`: count tables become stores. A dump read back gives
//! the same store; counts made by Python's collections.Counter, cut into
//! duplicates across two files, give its counts and continuation counts;
//! bad tables are named by file and line; a resume after a kill and
//! `--append` give the store of one ingest.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

use quern::fault::{Point, KILL_VAR};

use crate::common::{
    assert_lines_eq, assert_views_eq, gutenberg_dir, ingest_args, ingest_ok, manifest_dir, python3,
    run, run_env, run_ok, sorted_lines, store_view, StoreView,
};

/// Flags of the resume and append tests: order 3, a small budget (the
/// table of one novel spills several times) and small chunks, so that
/// plain tables are read by several workers from the middle of the file.
const FLAGS: &[&str] = &[
    "--counts",
    "--order",
    "3",
    "--memory",
    "16MiB",
    "--threads",
    "2",
    "--quiet",
];
const CHUNKS: (&str, &str) = (quern::corpus::CHUNK_BYTES_VAR, "200000");

fn s(p: &Path) -> String {
    p.display().to_string()
}

/// `quern dump` (with its header) of `store`, with `extra` flags.
fn dump(store: &Path, extra: &[&str]) -> String {
    let mut a = vec!["dump".to_string(), "--store".into(), s(store)];
    a.extend(extra.iter().map(|x| x.to_string()));
    run_ok(&a).stdout
}

/// `stats --json` of `store`, with the growth curve and the settings'
/// `from_counts` taken out (and returned).
fn stats_apart(store: &Path) -> (Value, Value, Value) {
    let r = run_ok(&["stats", "--store", &s(store), "--json"]);
    let mut v: Value = serde_json::from_str(r.stdout.trim()).unwrap();
    let o = v.as_object_mut().unwrap();
    let growth = o.remove("growth").unwrap();
    let from = o["settings"]
        .as_object_mut()
        .unwrap()
        .remove("from_counts")
        .unwrap_or(Value::Null);
    (v, growth, from)
}

/// Source: quern's own text ingest of the five training novels at orders 3
/// and 5 (checked against the reference counter and Python elsewhere): its
/// dump of every order, read back with --counts (once plain, once as .gz),
/// gives a store whose dump and context dump equal the original byte for
/// byte and whose statistics are equal but for the growth curve, which a
/// count table cannot give (none is shown), and the record that the store
/// came from counts.
#[test]
fn a_dump_read_back_gives_the_same_store() {
    let tmp = tempfile::tempdir().unwrap();
    for (order, text) in [
        (3, crate::query_fixtures::train3()),
        (5, crate::query_fixtures::train5()),
    ] {
        let k = order.to_string();
        let original = dump(text, &[]);
        let table = if order == 3 {
            let p = tmp.path().join("dump3.tsv.gz");
            let mut z = flate2::write::GzEncoder::new(
                std::fs::File::create(&p).unwrap(),
                Default::default(),
            );
            z.write_all(original.as_bytes()).unwrap();
            z.finish().unwrap();
            p
        } else {
            let p = tmp.path().join("dump5.tsv");
            std::fs::write(&p, &original).unwrap();
            p
        };
        let store = tmp.path().join(format!("counts{order}"));
        ingest_ok(&store, &["--counts", "--order", &k, "--quiet"], &[table]);
        let what = format!("order {order}");
        assert!(dump(&store, &[]) == original, "{what}: dump differs");
        assert!(
            dump(&store, &["--contexts"]) == dump(text, &["--contexts"]),
            "{what}: dump --contexts differs"
        );
        let (want, text_growth, text_from) = stats_apart(text);
        let (got, growth, from) = stats_apart(&store);
        crate::common::assert_stats_eq(&what, &want, &got);
        crate::common::assert_stats_eq(&what, &got, &want);
        assert!(
            text_growth.is_object(),
            "{what}: the text store has a curve"
        );
        assert_eq!(growth, Value::Null, "{what}: no growth curve from counts");
        assert_eq!(
            (text_from, from),
            (Value::Null, Value::Bool(true)),
            "{what}"
        );
        let table = run_ok(&["stats", "--store", &s(&store)]).stdout;
        assert!(
            table.contains("count tables") && !table.contains("Heaps "),
            "{what}: stats says where the counts came from and fits no curve\n{table}"
        );
    }
}

/// Runs tests/integration/counts_check.py on `text` at `order`: two tables
/// and the dump a store of them must print.
fn python_tables(dir: &Path, order: usize, text: &Path) -> (PathBuf, PathBuf, Vec<String>) {
    let name = text.file_stem().unwrap().to_string_lossy();
    let (a, b, want) = (
        dir.join(format!("{name}-a.tsv")),
        dir.join(format!("{name}-b.tsv")),
        dir.join(format!("{name}-want.tsv")),
    );
    let out = Command::new(python3())
        .arg(manifest_dir().join("tests/integration/counts_check.py"))
        .arg(order.to_string())
        .args([text, &a, &b, &want])
        .output()
        .expect("run python3");
    assert!(
        out.status.success(),
        "counts_check.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let want = sorted_lines(&std::fs::read_to_string(&want).unwrap());
    (a, b, want)
}

/// Source: Python's collections.Counter (tests/integration/counts_check.py)
/// over persuasion.txt at order 3: its counts, cut into duplicate lines
/// spread over two files, give a store whose count of every n-gram of every
/// order and whose continuation count (the distinct left extensions,
/// counted by the same script) are the script's.
#[test]
fn counts_from_python_with_duplicates_across_two_files() {
    let tmp = tempfile::tempdir().unwrap();
    let (a, b, want) = python_tables(tmp.path(), 3, &gutenberg_dir().join("persuasion.txt"));
    let store = tmp.path().join("store");
    run_env(&ingest_args(&store, FLAGS, &[a, b]), &[CHUNKS]).assert_success();
    let got = sorted_lines(&dump(&store, &["--no-header"]));
    assert_lines_eq("dump vs Python's counts (counts_check.py)", &want, &got);
}

/// Count tables to write: (file name, text).
type Tables<'a> = Vec<(&'a str, String)>;

/// Writes `tables` (file name, text) into `dir`, ingests them as count
/// tables of order 2 into the store `name` with `env`, and returns the
/// error message (the ingest must fail).
fn refused(dir: &Path, name: &str, tables: &[(&str, String)], env: &[(&str, &str)]) -> String {
    let mut inputs = Vec::new();
    for (file, text) in tables {
        let p = dir.join(file);
        std::fs::write(&p, text).unwrap();
        inputs.push(p);
    }
    let store = dir.join(name);
    let r = run_env(
        &ingest_args(&store, &["--counts", "--order", "2", "--quiet"], &inputs),
        env,
    );
    r.assert_failure();
    r.stderr
}

/// Contract (src/count/tsv.rs, README "Count tables in"): each bad table is
/// refused with the file and the exact line that breaks it. A missing prefix
/// or suffix is named at the first line (in input order) whose n-gram lacks
/// it; a bad line in the middle of a large table, read from a chunk that
/// starts mid-file, gets its line number in the whole file.
#[test]
fn bad_tables_are_named_by_file_and_line() {
    let tmp = tempfile::tempdir().unwrap();
    let good = "a\t3\nb\t2\nc\t1\na b\t1\nb c\t1\n";
    let cases: Vec<(&str, Tables, &str)> = vec![
        // "d a": its prefix "d" is on no line (line 7 of t.tsv, the first
        // of its two lines).
        (
            "prefix",
            vec![("t.tsv", format!("{good}b a\t1\nd a\t1\nd a\t2\n"))],
            "t.tsv:7: expected the prefix \"d\"",
        ),
        // "c d" in the second file: its suffix "d" is on no line.
        (
            "suffix",
            vec![
                ("t.tsv", good.to_string()),
                ("u.tsv", "ngram\tcount\nc\t1\nc d\t4\n".to_string()),
            ],
            "u.tsv:3: expected the suffix \"d\"",
        ),
        (
            "zero",
            vec![("t.tsv", format!("{good}c a\t0\n"))],
            "t.tsv:6: expected a positive count",
        ),
        (
            "negative",
            vec![("t.tsv", format!("{good}c a\t-1\n"))],
            "t.tsv:6: expected a count",
        ),
        (
            "overflow",
            vec![("t.tsv", format!("a\t18446744073709551616\n{good}"))],
            "t.tsv:1: expected a count",
        ),
        (
            "sum",
            vec![("t.tsv", format!("{good}a\t18446744073709551610\n"))],
            "t.tsv:6: expected counts that add up",
        ),
        (
            "one field",
            vec![("t.tsv", format!("{good}c a 1\n"))],
            "t.tsv:6: expected n-gram<TAB>count",
        ),
        (
            "five fields",
            vec![("t.tsv", format!("{good}c\t1\t1\t1\t1\n"))],
            "t.tsv:6: expected n-gram<TAB>count",
        ),
        (
            "documents not a number",
            vec![("t.tsv", format!("{good}c\t1\t1\tx\n"))],
            "t.tsv:6: expected a number of documents",
        ),
        (
            "order",
            vec![("t.tsv", format!("{good}a b c\t1\n"))],
            "t.tsv:6: expected an n-gram of at most 2 words",
        ),
        (
            "empty word",
            vec![("t.tsv", format!("{good}a  b\t1\n"))],
            "t.tsv:6: expected words separated by single spaces",
        ),
        (
            "header not first",
            vec![("t.tsv", format!("{good}ngram\tcount\tcontinuation\n"))],
            "t.tsv:6: expected a count",
        ),
    ];
    for (name, tables, want) in cases {
        let err = refused(tmp.path(), name, &tables, &[]);
        assert!(err.contains(want), "{name}: want {want:?} in\n{err}");
    }
    // 3,000 good lines, a bad one at line 2,345, read in 4 KiB chunks.
    let mut big = String::new();
    for i in 0..3000 {
        if i == 2344 {
            big.push_str("w2344\tmany\n");
        } else {
            big.push_str(&format!("w{i}\t{}\n", i + 1));
        }
    }
    let err = refused(
        tmp.path(),
        "chunked",
        &[("big.tsv", big)],
        &[(quern::corpus::CHUNK_BYTES_VAR, "4096")],
    );
    assert!(
        err.contains("big.tsv:2345: expected a count"),
        "chunked: the line in the whole file\n{err}"
    );
    // Standard input is read once: a bad line is named by its number, a
    // missing prefix without one (there is nothing to read again).
    let store = tmp.path().join("stdin");
    let args = ingest_args(
        &store,
        &["--counts", "--order", "2", "--quiet"],
        &["-".into()],
    );
    let r = crate::common::run_with_stdin(&args, b"a\t1\nb\tx\n");
    assert!(
        r.stderr.contains("-:2: expected a count"),
        "stdin, bad count\n{}",
        r.stderr
    );
    let store = tmp.path().join("stdin2");
    let args = ingest_args(
        &store,
        &["--counts", "--order", "2", "--quiet"],
        &["-".into()],
    );
    let r = crate::common::run_with_stdin(&args, b"a\t1\nb a\t1\n");
    assert!(
        r.stderr
            .contains("-: an n-gram of 2 words was counted, but not its prefix"),
        "stdin, missing prefix\n{}",
        r.stderr
    );
}

/// Contract: the options that prepare text are refused with --counts, and
/// count tables and text do not mix in one store (append or resume).
#[test]
fn text_options_and_mixing_are_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let table = tmp.path().join("t.tsv");
    std::fs::write(&table, "a\t1\n").unwrap();
    let text = tmp.path().join("t.txt");
    std::fs::write(&text, "a b\n").unwrap();
    for flag in [
        &["--lowercase"][..],
        &["--tokens", "words"],
        &["--jsonl"],
        &["--unique", "lines"],
    ] {
        let store = tmp.path().join("refused");
        let mut f = vec!["--counts", "--quiet"];
        f.extend_from_slice(flag);
        let r = run(&ingest_args(&store, &f, std::slice::from_ref(&table)));
        r.assert_failure();
        assert!(
            r.stderr.contains("applies to text only"),
            "{flag:?}\n{}",
            r.stderr
        );
    }
    let counts = tmp.path().join("counts");
    ingest_ok(
        &counts,
        &["--counts", "--quiet"],
        std::slice::from_ref(&table),
    );
    let r = run(&ingest_args(
        &counts,
        &["--append", "--quiet"],
        std::slice::from_ref(&text),
    ));
    r.assert_failure();
    assert!(
        r.stderr
            .contains("built from count tables (--counts), this command reads text"),
        "{}",
        r.stderr
    );
    let texts = tmp.path().join("text");
    ingest_ok(&texts, &["--quiet"], std::slice::from_ref(&text));
    let r = run(&ingest_args(
        &texts,
        &["--append", "--counts", "--quiet"],
        &[table],
    ));
    r.assert_failure();
    assert!(
        r.stderr
            .contains("built from text, this command reads count tables"),
        "{}",
        r.stderr
    );
}

/// The Python tables of persuasion.txt, and the view of one uninterrupted
/// --counts ingest of them.
fn baseline(dir: &Path) -> (Vec<PathBuf>, StoreView) {
    let (a, b, _) = python_tables(dir, 3, &gutenberg_dir().join("persuasion.txt"));
    let store = dir.join("baseline");
    let inputs = vec![a, b];
    run_env(&ingest_args(&store, FLAGS, &inputs), &[CHUNKS]).assert_success();
    (inputs, store_view(&store))
}

/// Source: quern's own uninterrupted --counts ingest (whose counts the test
/// against Python checks): killed at every kind of point and resumed with
/// the same command, the store is the same.
#[test]
fn resume_after_a_kill_gives_the_same_store() {
    let tmp = tempfile::tempdir().unwrap();
    let (inputs, want) = baseline(tmp.path());
    for spec in [
        Point::Spill.at(2),
        Point::Committed.at(3),
        Point::Merge.at(2),
        Point::Join.at(3),
        Point::Build.at(1),
    ] {
        let store = tmp.path().join(format!("killed-{spec}"));
        let args = ingest_args(&store, FLAGS, &inputs);
        let r = run_env(&args, &[CHUNKS, (KILL_VAR, spec.as_str())]);
        assert_eq!(r.signal(), Some(9), "{spec}: not killed\n{}", r.describe());
        run_env(&args, &[CHUNKS]).assert_success();
        assert_views_eq(&format!("resumed after {spec}"), &want, &store_view(&store));
    }
    // A resume must read count tables again.
    let store = tmp.path().join("killed-text");
    let args = ingest_args(&store, FLAGS, &inputs);
    let r = run_env(&args, &[CHUNKS, (KILL_VAR, Point::Merge.at(1).as_str())]);
    assert_eq!(r.signal(), Some(9), "{}", r.describe());
    let text: Vec<&str> = FLAGS.iter().copied().filter(|f| *f != "--counts").collect();
    let r = run(&ingest_args(&store, &text, &inputs));
    r.assert_failure();
    assert!(
        r.stderr
            .contains("was started reading count tables (--counts); this command reads text"),
        "{}",
        r.stderr
    );
}

/// Source: one --counts ingest of the tables of two novels (Python's, as
/// above; each pair holds every prefix and suffix of its n-grams, which
/// one table of a pair alone does not): the first novel's tables ingested,
/// then the second's appended, is the same store.
#[test]
fn append_gives_the_same_store() {
    let tmp = tempfile::tempdir().unwrap();
    let gutenberg = gutenberg_dir();
    let (a1, b1, _) = python_tables(tmp.path(), 3, &gutenberg.join("persuasion.txt"));
    let (a2, b2, _) = python_tables(tmp.path(), 3, &gutenberg.join("northangerabbey.txt"));
    let joint = tmp.path().join("joint");
    let all = [a1.clone(), b1.clone(), a2.clone(), b2.clone()];
    run_env(&ingest_args(&joint, FLAGS, &all), &[CHUNKS]).assert_success();
    let store = tmp.path().join("appended");
    run_env(&ingest_args(&store, FLAGS, &[a1, b1]), &[CHUNKS]).assert_success();
    let mut flags = FLAGS.to_vec();
    flags.push("--append");
    run_env(&ingest_args(&store, &flags, &[a2, b2]), &[CHUNKS]).assert_success();
    assert_views_eq(
        "one novel's tables, then --append the other's",
        &store_view(&joint),
        &store_view(&store),
    );
}
