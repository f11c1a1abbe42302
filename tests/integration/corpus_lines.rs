//! `quern lines` (concordance lines) against plain Python over the same
//! text (tests/integration/corpus_check.py), on the Gutenberg texts and on a
//! small file of awkward lines; the number of occurrences of each n-gram
//! equals its count in the store; limit, sample and sort.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::Command;

use serde_json::Value;

use crate::common::{gutenberg_files, ingest_ok, python3, run_env, run_ok};
use crate::corpus_lists::{json_lines, path_args, python_json, quern_json, s, store_of};

fn lines_args(
    store: &std::path::Path,
    pattern: &str,
    context: usize,
    files: &[PathBuf],
) -> Vec<String> {
    let mut a = vec![
        s("lines"),
        s("--store"),
        store.display().to_string(),
        s("--pattern"),
        s(pattern),
        s("--context"),
        context.to_string(),
        s("--json"),
    ];
    a.extend(path_args(files));
    a
}

fn python_lines(
    pattern: &str,
    context: usize,
    lowercase: bool,
    extra: &[String],
    files: &[PathBuf],
) -> Vec<Value> {
    let mut py = vec![
        s("lines"),
        s("--pattern"),
        s(pattern),
        s("--context"),
        context.to_string(),
    ];
    if lowercase {
        py.push(s("--lowercase"));
    }
    py.extend(extra.iter().cloned());
    py.extend(path_args(files));
    python_json(&py)
}

#[test]
fn concordance_lines_equal_python_on_gutenberg() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(2);
    for lowercase in [true, false] {
        let store = store_of(tmp.path(), &files, lowercase);
        // A rare word (the byte filter), two frequent words, a pattern with
        // no word to filter on (every line tokenized), a leading wildcard.
        for pattern in ["harriet", "the * of", "<s> * *", "* of the"] {
            let want = python_lines(pattern, 4, lowercase, &[], &files);
            let args = lines_args(&store, pattern, 4, &files);
            let got = quern_json(&args);
            // Source: Python over the padded sentences of each line.
            assert_eq!(
                got.len(),
                want.len(),
                "{pattern:?}, lowercase {lowercase}: occurrences"
            );
            assert!(
                got == want,
                "{pattern:?}, lowercase {lowercase}: the lines differ"
            );
            // Blocks of 4,000 bytes: many block boundaries, same lines.
            let small = run_env(&args, &[("QUERN_CHUNK_BYTES", "4000")]);
            small.assert_success();
            assert!(
                json_lines(&small.stdout) == want,
                "{pattern:?} with small blocks"
            );
        }
    }
}

#[test]
fn occurrences_equal_store_counts() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(2);
    let store = store_of(tmp.path(), &files, true);
    for pattern in ["the * of", "* of the", "she *"] {
        let seen = occurrences(&lines_args(&store, pattern, 0, &files), &[]);
        // Source: the store's own counts (`ngrams --pattern`), which the
        // Python reference counter checks elsewhere (python_check).
        let stored = stored_counts(&store, pattern);
        assert!(!stored.is_empty());
        assert_eq!(seen, stored, "{pattern:?}: occurrences against counts");
    }
}

#[test]
fn awkward_lines_equal_python() {
    let tmp = tempfile::tempdir().unwrap();
    let file = tmp.path().join("awkward.txt");
    let long = format!("king {}\n", "x".repeat(100));
    let text = format!(
        "The \u{212A}ING and the queen.\r\n\n{long}KING\tof the king\u{3000}King\nno crown here\n\
         {long}{long}a king\u{1c}king <s> king\nking"
    );
    std::fs::write(&file, text).unwrap();
    let files = vec![file];
    let store = tmp.path().join("store");
    ingest_ok(
        &store,
        &["--order", "2", "--lowercase", "--max-line-bytes", "64"],
        &files,
    );
    let extra = [s("--max-line-bytes"), s("64")];
    for pattern in ["king", "* king", "king *"] {
        // Source: Python's str.lower (U+212A KELVIN SIGN lowercases to
        // "k"), the 25 White_Space code points, lines over 64 bytes skipped
        // but numbered.
        let want = python_lines(pattern, 2, true, &extra, &files);
        let got = quern_json(&lines_args(&store, pattern, 2, &files));
        assert_eq!(got, want, "{pattern:?}");
    }
    let kings = quern_json(&lines_args(&store, "king", 0, &files)).len() as u64;
    let counted = quern_json(&[
        s("top"),
        s("--store"),
        store.display().to_string(),
        s("--json"),
    ])
    .into_iter()
    .find(|v| v["ngram"] == "king")
    .map(|v| v["count"].as_u64().unwrap());
    assert_eq!(
        Some(kings),
        counted,
        "occurrences of king against its count"
    );
    // By hand: line 1 \u{212A}ING (no other "king" on it), line 4 KING,
    // king, King, line 8 the last king (U+001C is no space), line 9 king;
    // lines 3, 6 and 7 are over 64 bytes.
    assert_eq!(kings, 6);
}

#[test]
fn only_the_kelvin_sign_lowercases_into_ascii() {
    // The byte filter of src/linguistics/concordance.rs rests on this.
    // Source: Python's str.lower over every code point (unicodedata's
    // Unicode version).
    let out = Command::new(python3())
        .args([
            "-c",
            "print(' '.join('%x' % c for c in range(0x80, 0x110000) if chr(c).lower().isascii()))",
        ])
        .output()
        .unwrap();
    assert!(out.status.success());
    assert_eq!(String::from_utf8(out.stdout).unwrap().trim(), "212a");
}

#[test]
fn limit_sample_and_sort() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(1);
    let store = store_of(tmp.path(), &files, true);
    let all = quern_json(&lines_args(&store, "the * of", 3, &files));
    assert!(all.len() > 200);
    let with = |more: &[&str]| {
        let mut a = lines_args(&store, "the * of", 3, &files);
        a.splice(1..1, more.iter().map(|x| x.to_string()));
        quern_json(&a)
    };
    assert_eq!(
        with(&["--limit", "25"]),
        all[..25].to_vec(),
        "--limit: the first 25"
    );
    let a = with(&["--sample", "30", "--seed", "7"]);
    let b = with(&["--sample", "30", "--seed", "7"]);
    let c = with(&["--sample", "30", "--seed", "8"]);
    assert_eq!(a.len(), 30);
    assert_eq!(a, b, "the same seed, the same sample");
    assert_ne!(a, c, "another seed, another sample");
    assert!(
        a.iter().all(|x| all.contains(x)),
        "a sample of the occurrences"
    );
    let right = with(&["--sort", "right"]);
    assert_eq!(right.len(), all.len());
    let key = |v: &Value| {
        v["right"]
            .as_str()
            .unwrap()
            .split(' ')
            .map(String::from)
            .collect::<Vec<_>>()
    };
    assert!(
        right.windows(2).all(|w| key(&w[0]) <= key(&w[1])),
        "sorted by the right context"
    );
    // The aligned output: one line per occurrence, the match in the middle.
    let text = run_ok(&[
        "lines",
        "--store",
        &store.display().to_string(),
        "--pattern",
        "the * of",
        "--limit",
        "3",
        &files[0].display().to_string(),
    ])
    .stdout;
    assert_eq!(text.lines().count(), 3);
    for (line, v) in text.lines().zip(&all) {
        assert!(
            line.contains(&format!("  {}  ", v["match"].as_str().unwrap())),
            "{line}"
        );
    }
}

/// `ngrams --pattern` counts of a store, by n-gram.
fn stored_counts(store: &std::path::Path, pattern: &str) -> BTreeMap<String, u64> {
    quern_json(&[
        s("ngrams"),
        s("--store"),
        store.display().to_string(),
        s("--pattern"),
        s(pattern),
        s("--limit"),
        s("10000000"),
        s("--json"),
    ])
    .into_iter()
    .map(|v| {
        (
            v["ngram"].as_str().unwrap().to_string(),
            v["count"].as_u64().unwrap(),
        )
    })
    .collect()
}

/// The occurrences `lines` finds, by matched n-gram.
fn occurrences(args: &[String], env: &[(&str, &str)]) -> BTreeMap<String, u64> {
    let r = run_env(args, env);
    r.assert_success();
    let mut seen: BTreeMap<String, u64> = BTreeMap::new();
    for v in json_lines(&r.stdout) {
        *seen
            .entry(v["match"].as_str().unwrap().to_string())
            .or_default() += 1;
    }
    seen
}

/// A JSON string holding `text`; with `escape_t`, every `t` written as
/// `\u0074` and every `/` as `\/` (both valid JSON, RFC 8259 section 7), so
/// that the word's bytes do not appear in the line.
fn json_string(text: &str, escape_t: bool) -> String {
    let mut out = String::from("\"");
    for c in text.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            't' if escape_t => out.push_str("\\u0074"),
            '/' if escape_t => out.push_str("\\/"),
            c if (c as u32) < 0x20 => out.push_str(&format!("\\u{:04x}", c as u32)),
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// Under the whole text preparation (NFKC, Unicode word tokens, lowercase,
/// digits to 0, sentences split at UAX #29 boundaries) and from JSON lines
/// (documents of three lines, every seventh with escapes that hide words'
/// bytes, and lines that hold no document), the occurrences of every
/// n-gram a pattern matches are its count in a store counted from the
/// same input; and under word tokens alone, from plain text and from the
/// JSON lines, where the byte filter is on. Source: the store's counts, which the reference counter
/// checks elsewhere; these runs check that `lines` reads the text as the
/// ingest did.
#[test]
fn prepared_and_json_lines_occurrences_equal_counts() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(2);
    let mut text = String::new();
    for f in &files {
        text.push_str(&std::fs::read_to_string(f).unwrap());
    }
    let lines: Vec<&str> = text.lines().collect();
    let mut jsonl = String::new();
    for (i, doc) in lines.chunks(3).enumerate() {
        if i % 101 == 50 {
            jsonl.push_str("not a document\n{\"id\": 1}\n");
            // Digits (fullwidth too, which NFKC makes ASCII) for "0000 *".
            jsonl.push_str(
                "{\"text\": \"In \\uff11\\uff18\\uff11\\uff11 and 1812 the year 1813.\"}\n",
            );
        }
        let body = json_string(&doc.join("\n"), i % 7 == 0);
        jsonl.push_str(&format!("{{\"id\": {i}, \"text\": {body}}}\n"));
    }
    let json_file = tmp.path().join("docs.jsonl");
    std::fs::write(&json_file, jsonl).unwrap();
    let json_files = vec![json_file];
    let prepared = tmp.path().join("prepared");
    let prep = [
        "--order",
        "3",
        "--normalize",
        "nfkc",
        "--tokens",
        "words",
        "--lowercase",
        "--digits",
        "zero",
        "--sentences",
        "split",
    ];
    ingest_ok(&prepared, &[&prep[..], &["--jsonl"]].concat(), &json_files);
    let words = tmp.path().join("words");
    ingest_ok(&words, &["--order", "3", "--tokens", "words"], &files);
    // JSON lines without normalization: the byte filter is on, and the
    // escaped documents must still be read.
    let json_words = tmp.path().join("json-words");
    ingest_ok(
        &json_words,
        &[
            "--order",
            "3",
            "--tokens",
            "words",
            "--lowercase",
            "--jsonl",
        ],
        &json_files,
    );
    for (store, inputs, jsonl) in [
        (&prepared, &json_files, true),
        (&words, &files, false),
        (&json_words, &json_files, true),
    ] {
        for pattern in [
            "Harriet", "the * of", "* of the", "she *", ", and *", "0000 *",
        ] {
            let stored = stored_counts(store, pattern);
            if pattern != "0000 *" || store == &prepared {
                assert!(!stored.is_empty(), "{pattern:?}: nothing stored");
            }
            // The byte filter's route: on for plain words, off for "0000 *"
            // under --digits zero (and for all under NFKC).
            let mut args = lines_args(store, pattern, 1, inputs);
            if jsonl {
                args.push(s("--jsonl"));
            }
            for env in [&[][..], &[("QUERN_CHUNK_BYTES", "4000")][..]] {
                assert_eq!(
                    occurrences(&args, env),
                    stored,
                    "{pattern:?} (JSON lines {jsonl}, {env:?}): occurrences against counts"
                );
            }
        }
    }
}
