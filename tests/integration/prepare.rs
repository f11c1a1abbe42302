//! Text preparation (`ingest --normalize/--sentences/--tokens/--digits`)
//! against an independent reference: scripts/prepare_reference.py, which
//! prepares text with Python's unicodedata (normalization, general category
//! Nd) and the uniseg package from the Python package index (UAX #29 word
//! and sentence boundaries; its one departure from rule SB8 is corrected
//! there, see the script). A store counted from raw text with a
//! preparation must equal the default ingest of the text the reference
//! prepared (dump, dump --contexts, stats), on Gutenberg novels and on a
//! multi-script sample; and a query on the prepared store must equal the
//! same query, prepared by the reference, on the other.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

use crate::common::{
    assert_views_eq, gutenberg_dir, ingest_ok, manifest_dir, python3, run_ok, store_view, StoreView,
};

/// An invented multi-script sample (not a check value: the checks are the
/// reference's preparation of it). Composed and decomposed accents,
/// compatibility characters (ligature, fullwidth, superscript, circled,
/// Roman numeral), digits of several scripts, a final sigma, Han, Thai,
/// Hangul, Katakana, Arabic, Hebrew, Cyrillic and Devanagari; several
/// sentences a line.
const SAMPLE: &str = "\
Hello, WORLD 42! The café opened at 9:30. The cafe\u{301} closed at 21:00.
The \u{FB01}sh market sells ＦＲＥＳＨ fish for １２ pounds; x² + y² = z². Item ① of Ⅻ.
ΟΔΟΣ ΠΡΟΣ ΤΟ ΣΠΙΤΙ. Η οδός είναι μακριά.
我们明天去北京。你好吗？今天是２０２６年。
ภาษาไทยง่ายนิดเดียว ราคา ๑๒๓ บาท
한국어 문장입니다. 숫자 7과 8.
カタカナのテキストです。コーヒー３杯。
العربية جميلة ٣٤٥ مرة. هل أنت بخير؟
עברית יפה 12 פעמים. שלום!
Привет, МИР! Сегодня 5 мая. Всё хорошо.
हिन्दी में ४२ शब्द हैं। यह दूसरा वाक्य है।
can't won't 3.14 e-mail U.S.A. end.
Mr. Smith went to Washington. He arrived at 5 p.m. It rained.
";

fn prepare_reference(flags: &[&str], inputs: &[PathBuf], out: &Path) {
    let o = Command::new(python3())
        .current_dir(manifest_dir())
        .arg("scripts/prepare_reference.py")
        .args(flags)
        .args(inputs)
        .output()
        .expect("run python3");
    assert!(
        o.status.success(),
        "scripts/prepare_reference.py failed (is uniseg installed? run scripts/setup): {}",
        String::from_utf8_lossy(&o.stderr)
    );
    std::fs::write(out, &o.stdout).unwrap();
}

/// A view without the settings (the prepared store records its
/// preparation, the other store the default) and input bytes.
fn view(store: &Path) -> StoreView {
    let mut v = store_view(store);
    if let Value::Object(o) = &mut v.stats {
        o.remove("settings");
    }
    v
}

/// Ingests `inputs` with `flags` and the reference's preparation of them
/// with the defaults, and compares the stores.
fn check(what: &str, flags: &[&str], inputs: &[PathBuf], tmp: &Path) -> (PathBuf, PathBuf) {
    let common = [
        "--order",
        "3",
        "--memory",
        "64MiB",
        "--threads",
        "2",
        "--quiet",
    ];
    let prepared_text = tmp.join(format!("{what}.prepared.txt"));
    let ref_flags: Vec<&str> = flags.iter().copied().filter(|f| *f != "--quiet").collect();
    prepare_reference(&ref_flags, inputs, &prepared_text);
    let ours = tmp.join(format!("{what}.ours"));
    let mut f = common.to_vec();
    f.extend_from_slice(flags);
    ingest_ok(&ours, &f, inputs);
    let theirs = tmp.join(format!("{what}.reference"));
    ingest_ok(&theirs, &common, &[prepared_text]);
    assert_views_eq(what, &view(&theirs), &view(&ours));
    (ours, theirs)
}

fn sample(tmp: &Path) -> PathBuf {
    let p = tmp.join("sample.txt");
    std::fs::write(&p, SAMPLE).unwrap();
    p
}

/// NFKC, UAX #29 words, lowercase, digits to zero, on two novels and the
/// sample; then `prob` of "Hello, WORLD 42" on the prepared store equals
/// `prob` of the reference's preparation of it on the other.
#[test]
fn words_nfkc_lowercase_digits_equal_the_reference() {
    let tmp = tempfile::tempdir().unwrap();
    let mut inputs = vec![
        gutenberg_dir().join("persuasion.txt"),
        gutenberg_dir().join("northangerabbey.txt"),
    ];
    inputs.push(sample(tmp.path()));
    let flags = [
        "--normalize",
        "nfkc",
        "--tokens",
        "words",
        "--lowercase",
        "--digits",
        "zero",
    ];
    let (ours, theirs) = check("words-nfkc", &flags, &inputs, tmp.path());
    // The query, prepared by the reference.
    let q = tmp.path().join("query.txt");
    std::fs::write(&q, "Hello, WORLD 42\n").unwrap();
    let qp = tmp.path().join("query.prepared.txt");
    prepare_reference(&flags, &[q], &qp);
    let prepared = std::fs::read_to_string(&qp).unwrap();
    let prepared = prepared.trim_end_matches('\n');
    assert_eq!(prepared.split(' ').count(), 4, "{prepared:?}");
    let s = |p: &Path| p.display().to_string();
    for method in ["kn", "witten-bell"] {
        let a = run_ok(&[
            "prob",
            "--store",
            &s(&ours),
            "--method",
            method,
            "Hello, WORLD 42",
        ]);
        let b = run_ok(&["prob", "--store", &s(&theirs), "--method", method, prepared]);
        assert_eq!(
            a.stdout.replace("Hello, WORLD 42", "Q"),
            b.stdout.replace(prepared, "Q"),
            "prob {method}"
        );
    }
    // The store says how it was prepared.
    let st = crate::common::stats_json(&ours);
    assert_eq!(st["settings"]["preparation"]["tokens"], "words", "{st}");
    assert_eq!(st["settings"]["preparation"]["normalize"], "nfkc", "{st}");
}

/// NFC and UAX #29 sentences (whitespace tokens), on a novel and the
/// sample.
#[test]
fn nfc_and_sentence_split_equal_the_reference() {
    let tmp = tempfile::tempdir().unwrap();
    let inputs = vec![gutenberg_dir().join("persuasion.txt"), sample(tmp.path())];
    check(
        "nfc-split",
        &["--normalize", "nfc", "--sentences", "split"],
        &inputs,
        tmp.path(),
    );
}

/// A whole JSON line's text as one sentence, with UAX #29 words, on a
/// crawl made of a novel.
#[test]
fn document_sentences_of_json_lines_equal_the_reference() {
    let tmp = tempfile::tempdir().unwrap();
    let (crawls, _, _) = crate::crawl::crawl_of(tmp.path(), &["persuasion.txt"]);
    check(
        "document",
        &["--jsonl", "--sentences", "document", "--tokens", "words"],
        &crawls,
        tmp.path(),
    );
}

/// `--append` with another preparation is refused, naming both.
#[test]
fn append_with_another_preparation_is_refused_naming_both() {
    let tmp = tempfile::tempdir().unwrap();
    let input = sample(tmp.path());
    let store = tmp.path().join("s");
    ingest_ok(
        &store,
        &["--order", "2", "--quiet", "--tokens", "words"],
        std::slice::from_ref(&input),
    );
    let r = crate::common::run(&crate::common::ingest_args(
        &store,
        &["--order", "2", "--quiet", "--append"],
        &[input],
    ));
    r.assert_failure();
    assert!(
        r.stderr.contains("tokens words") && r.stderr.contains("tokens whitespace"),
        "{}",
        r.describe()
    );
}
