//! `ingest --word-list FILE`: every token outside the list is counted as
//! `<unk>`. Checked against Python's `collections.Counter` over
//! `str.split()` tokens of fixtures/gutenberg (the same split as ingest on
//! these files: no whitespace there that the two treat differently); the
//! store keeps the list, `--append` and a resume insist on the same list,
//! and an interrupted ingest resumed with it equals an uninterrupted one.
//! Every order is checked too, continuation counts included: Python maps
//! the text (each token outside the list written as `<unk>`, which the
//! counting contract reads as the marker) and scripts/reference_ngrams.py
//! (`collections.Counter`) counts the mapped text; its dump must equal the
//! store's line for line.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use quern::fault::{Point, KILL_VAR};

use crate::common::{
    assert_lines_eq, dump_map, dump_sorted, gutenberg_dir, ingest_args, manifest_dir, python3, run,
    run_env, run_ok, sorted_lines, SMALL_BUDGET,
};

fn scratch(name: &str) -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
        .join("word-list")
        .join(name);
    if d.exists() {
        std::fs::remove_dir_all(&d).unwrap();
    }
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Python's counts: the unigram counts of the list's words, how many
/// tokens fall outside the list, and the token total.
fn python_counts(inputs: &[PathBuf], list: &Path, lowercase: bool) -> serde_json::Value {
    let prog = r#"
import collections, json, sys
lower = sys.argv[1] == "1"
words = {w.strip() for w in open(sys.argv[2], encoding="utf-8") if w.strip()}
if lower:
    words = {w.lower() for w in words}
c = collections.Counter()
outside = total = 0
for p in sys.argv[3:]:
    for line in open(p, encoding="utf-8"):
        for t in line.split():
            t = t.lower() if lower else t
            total += 1
            if t in words:
                c[t] += 1
            else:
                outside += 1
print(json.dumps({"in": c, "outside": outside, "tokens": total}))
"#;
    let out = Command::new(python3())
        .arg("-c")
        .arg(prog)
        .arg(if lowercase { "1" } else { "0" })
        .arg(list)
        .args(inputs)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// Every n-gram of every order with its count and continuation count, as
/// `quern dump` prints them, from Python: the inputs mapped by the list
/// (a token outside it, after lowercasing, written as `<unk>`), one line
/// for one line, then counted by scripts/reference_ngrams.py at `order`.
pub(crate) fn python_dump(
    dir: &Path,
    inputs: &[PathBuf],
    list: &Path,
    lowercase: bool,
    order: usize,
) -> Vec<String> {
    let prog = r#"
import sys
lower = sys.argv[1] == "1"
words = {w.strip() for w in open(sys.argv[2], encoding="utf-8") if w.strip()}
if lower:
    words = {w.lower() for w in words}
with open(sys.argv[3], "w", encoding="utf-8") as out:
    for p in sys.argv[4:]:
        for line in open(p, encoding="utf-8"):
            toks = [t.lower() if lower else t for t in line.split()]
            out.write(" ".join(t if t in words else "<unk>" for t in toks) + "\n")
"#;
    let mapped = dir.join(format!("mapped-{lowercase}.txt"));
    let out = Command::new(python3())
        .arg("-c")
        .arg(prog)
        .arg(if lowercase { "1" } else { "0" })
        .arg(list)
        .arg(&mapped)
        .args(inputs)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let dump = dir.join(format!("mapped-{lowercase}.dump"));
    let out = Command::new(python3())
        .arg(manifest_dir().join("scripts/reference_ngrams.py"))
        .args(["--order", &order.to_string(), "--dump"])
        .arg(&dump)
        .arg(&mapped)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "scripts/reference_ngrams.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    sorted_lines(&std::fs::read_to_string(&dump).unwrap())
}

/// A list of the 300 most frequent tokens of two novels, plus words that
/// never occur, in mixed case (with --lowercase, "The" and "the" are one).
fn write_list(d: &Path) -> PathBuf {
    let text = std::fs::read_to_string(gutenberg_dir().join("emma.txt")).unwrap();
    let mut c: BTreeMap<&str, u64> = BTreeMap::new();
    for t in text.split_whitespace() {
        *c.entry(t).or_insert(0) += 1;
    }
    let mut v: Vec<(&str, u64)> = c.into_iter().collect();
    v.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
    let mut list: Vec<String> = v[..300].iter().map(|x| x.0.to_string()).collect();
    list.extend([
        "Zyzzogeton".to_string(),
        "  spaced  ".to_string(),
        String::new(),
    ]);
    let p = d.join("list.txt");
    std::fs::write(&p, list.join("\n")).unwrap();
    p
}

fn summary(store: &Path, list: &Path, extra: &[&str], inputs: &[PathBuf]) -> serde_json::Value {
    let mut a = ingest_args(store, extra, inputs);
    a.extend([
        "--json".to_string(),
        "--word-list".to_string(),
        list.display().to_string(),
    ]);
    serde_json::from_str(&run_ok(&a).stdout).unwrap()
}

fn check_counts(store: &Path, want: &serde_json::Value, mapped: u64) {
    assert_eq!(
        mapped,
        want["outside"].as_u64().unwrap(),
        "tokens mapped to <unk>"
    );
    let dump = dump_map(store);
    let unigrams: BTreeMap<&str, u64> = dump
        .iter()
        .filter(|(k, _)| !k.contains(' '))
        .map(|(k, v)| (k.as_str(), v.0))
        .collect();
    let inl = want["in"].as_object().unwrap();
    for (w, c) in &unigrams {
        match *w {
            "<s>" | "</s>" => {}
            "<unk>" => assert_eq!(*c, want["outside"].as_u64().unwrap(), "<unk>"),
            _ => assert_eq!(Some(*c), inl.get(*w).and_then(|x| x.as_u64()), "{w}"),
        }
    }
    // Every list word that occurs is a unigram, and nothing else is.
    assert_eq!(unigrams.len(), inl.len() + 3);
}

#[test]
fn counts_outside_the_list_as_unk() {
    let d = scratch("counts");
    let list = write_list(&d);
    let inputs = vec![
        gutenberg_dir().join("persuasion.txt"),
        gutenberg_dir().join("northangerabbey.txt"),
    ];
    for lowercase in [false, true] {
        let store = d.join(format!("store-{lowercase}"));
        let mut extra = vec!["--order", "3", "--quiet"];
        if lowercase {
            extra.push("--lowercase");
        }
        let s = summary(&store, &list, &extra, &inputs);
        let want = python_counts(&inputs, &list, lowercase);
        assert_eq!(
            s["totals"]["tokens"].as_u64().unwrap(),
            want["tokens"].as_u64().unwrap() + s["totals"]["sentences"].as_u64().unwrap()
        );
        check_counts(
            &store,
            &want,
            s["totals"]["mapped_tokens"].as_u64().unwrap(),
        );
        // Every order, continuation counts included: Python's count of the
        // mapped text (collections.Counter, scripts/reference_ngrams.py).
        assert_lines_eq(
            &format!("word list, lowercase {lowercase}: Python's count of the mapped text vs dump"),
            &python_dump(&d, &inputs, &list, lowercase, 3),
            &dump_sorted(&store, &[]),
        );
        // The store keeps the list (canonical: as counted, sorted, one a line).
        let kept = std::fs::read_to_string(store.join("word-list.txt")).unwrap();
        let mut canon: Vec<String> = std::fs::read_to_string(&list)
            .unwrap()
            .lines()
            .map(|w| w.trim())
            .filter(|w| !w.is_empty())
            .map(|w| {
                if lowercase {
                    w.to_lowercase()
                } else {
                    w.to_string()
                }
            })
            .collect();
        canon.sort();
        canon.dedup();
        assert_eq!(kept.lines().collect::<Vec<_>>(), canon);
        // `stats` shows the list's size and the tokens it mapped, in every format.
        check_stats(
            &store,
            canon.len() as u64,
            want["outside"].as_u64().unwrap(),
        );
        // The text summary says how many tokens were mapped.
        let text = run_ok(&{
            let mut a = ingest_args(&d.join(format!("text-{lowercase}")), &extra, &inputs[..1]);
            a.extend(["--word-list".to_string(), list.display().to_string()]);
            a.retain(|x| x != "--quiet");
            a
        })
        .stdout;
        let one = python_counts(&inputs[..1], &list, lowercase);
        let n = one["outside"].as_u64().unwrap();
        let shown = text
            .lines()
            .find(|l| l.contains("tokens outside the word list"))
            .unwrap_or_else(|| panic!("no word-list line in {text}"));
        assert!(shown.ends_with(&crate_thousands(n)), "{shown} against {n}");
    }
}

/// `quern stats` of a store counted with a list of `words` words that
/// mapped `mapped` tokens: JSON, text and CSV say so.
fn check_stats(store: &Path, words: u64, mapped: u64) {
    let s = store.display().to_string();
    let json: serde_json::Value =
        serde_json::from_str(&run_ok(&["stats", "--store", &s, "--json"]).stdout).unwrap();
    assert_eq!(json["settings"]["word_list"]["words"].as_u64(), Some(words));
    assert_eq!(json["totals"]["mapped_tokens"].as_u64(), Some(mapped));
    let text = run_ok(&["stats", "--store", &s]).stdout;
    let head = text.lines().next().unwrap();
    assert!(
        head.ends_with(&format!("word list {} words", crate_thousands(words))),
        "{head}"
    );
    let line = text
        .lines()
        .find(|l| l.starts_with("mapped "))
        .unwrap_or_else(|| panic!("no mapped line in {text}"));
    assert!(
        line.contains(&format!(
            " {}   (tokens outside the word list",
            crate_thousands(mapped)
        )),
        "{line}"
    );
    let csv = run_ok(&["stats", "--store", &s, "--format", "csv"]).stdout;
    for (name, v) in [("word_list_words", words), ("mapped_tokens", mapped)] {
        let row = format!("totals,,,{name},{v},");
        assert!(csv.lines().any(|l| l == row), "no row {row:?} in the CSV");
    }
}

fn crate_thousands(n: u64) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, ch) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(ch);
    }
    out
}

#[test]
fn append_and_resume_insist_on_the_same_list() {
    let d = scratch("append");
    let list = write_list(&d);
    let other = d.join("other.txt");
    std::fs::write(&other, "the\nof\n").unwrap();
    let a = vec![gutenberg_dir().join("persuasion.txt")];
    let b = vec![gutenberg_dir().join("northangerabbey.txt")];
    let both: Vec<PathBuf> = a.iter().chain(&b).cloned().collect();
    let once = d.join("once");
    summary(&once, &list, &["--order", "3", "--quiet"], &both);
    let store = d.join("appended");
    summary(&store, &list, &["--order", "3", "--quiet"], &a);
    // Without the list, or with another one: refused, the store untouched.
    let mut no_list = ingest_args(&store, &["--order", "3", "--quiet", "--append"], &b);
    let r = run(&no_list);
    r.assert_failure();
    assert!(
        r.stderr.contains("--append must use the same --word-list"),
        "{}",
        r.stderr
    );
    no_list.extend(["--word-list".to_string(), other.display().to_string()]);
    run(&no_list).assert_failure();
    // With it: the same store as counting both at once.
    let s = summary(&store, &list, &["--order", "3", "--quiet", "--append"], &b);
    assert_eq!(dump_map(&store), dump_map(&once));
    // Every order of the appended store against Python's count of the
    // mapped text (collections.Counter, scripts/reference_ngrams.py).
    assert_lines_eq(
        "word list, appended: Python's count of the mapped text vs dump",
        &python_dump(&d, &both, &list, false, 3),
        &dump_sorted(&store, &[]),
    );
    let want = python_counts(&both, &list, false);
    check_counts(
        &store,
        &want,
        s["totals"]["mapped_tokens"].as_u64().unwrap(),
    );

    // Killed after its first spill, an ingest resumes only with its list.
    let killed = d.join("killed");
    let mut args = ingest_args(&killed, SMALL_BUDGET, &both);
    args.extend(["--word-list".to_string(), list.display().to_string()]);
    let r = run_env(&args, &[(KILL_VAR, Point::Committed.at(1).as_str())]);
    assert!(!r.status.success(), "the kill point was not reached");
    let plain = ingest_args(&killed, SMALL_BUDGET, &both);
    let r = run(&plain);
    r.assert_failure();
    assert!(r.stderr.contains("word list"), "{}", r.stderr);
    run_ok(&args);
    let full = d.join("full");
    let mut fargs = ingest_args(&full, SMALL_BUDGET, &both);
    fargs.extend(["--word-list".to_string(), list.display().to_string()]);
    run_ok(&fargs);
    assert_eq!(dump_map(&killed), dump_map(&full));
    // The resumed store, every order, against Python's count of the
    // mapped text (collections.Counter, scripts/reference_ngrams.py).
    assert_lines_eq(
        "word list, resumed: Python's count of the mapped text vs dump",
        &python_dump(&d, &both, &list, false, 5),
        &dump_sorted(&killed, &[]),
    );
}
