//! Small end-to-end cases of the CLI.

use std::io::Write;
use std::path::{Path, PathBuf};

use serde_json::Value;

use quern::fault::{Point, KILL_VAR};

use crate::common::{
    assert_lines_eq, assert_views_eq, dump_sorted, ingest_args, ingest_ok, manifest, run, run_env,
    run_ok, run_with_stdin, stats_json, store_view,
};
use crate::reference::{Reference, Settings};

/// CRLF line ends, a blank (CR only) line, literal `<s>`, `<unk>`, `</s>`
/// tokens, invalid UTF-8 bytes.
const MIXED: &[u8] = b"The cat\r\nsat <s> on\r\n\r\n<unk> mat </s>\n\xffdog\xfe\n";

/// The single token made of the invalid bytes and "dog".
const BAD_DOG: &str = "\u{FFFD}dog\u{FFFD}";

fn write(dir: &Path, name: &str, data: &[u8]) -> PathBuf {
    let p = dir.join(name);
    if let Some(parent) = p.parent() {
        std::fs::create_dir_all(parent).unwrap();
    }
    std::fs::write(&p, data).unwrap();
    p
}

fn gzip(data: &[u8]) -> Vec<u8> {
    let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    enc.write_all(data).unwrap();
    enc.finish().unwrap()
}

fn zstd_compress(data: &[u8]) -> Vec<u8> {
    zstd::stream::encode_all(data, 3).unwrap()
}

fn sorted(v: &[&str]) -> Vec<String> {
    let mut v: Vec<String> = v.iter().map(|s| s.to_string()).collect();
    v.sort();
    v
}

/// Source: hand computation over the contract.
///
/// MIXED at order 2:
///   "The cat\r"       -> <s> The cat </s>
///   "sat <s> on\r"    -> <s> sat <unk> on </s>          (1 marker)
///   "\r"              -> blank: not a sentence
///   "<unk> mat </s>"  -> <s> <unk> mat <unk> </s>       (2 markers)
///   "\xffdog\xfe"     -> <s> \u{FFFD}dog\u{FFFD} </s>  (invalid UTF-8)
/// Unigram counts: <s> 4, The 1, cat 1, </s> 4, sat 1, <unk> 3, on 1,
///   mat 1, BAD_DOG 1.
/// Continuations: The {<s>}, cat {The}, </s> {cat,on,<unk>,BAD_DOG} = 4,
///   sat {<s>}, <unk> {sat,<s>,mat} = 3, on {<unk>}, mat {<unk>},
///   BAD_DOG {<s>}; <s> 0.
/// Bigrams (13, each once): <s> The, The cat, cat </s>, <s> sat, sat <unk>,
///   <unk> on, on </s>, <s> <unk>, <unk> mat, mat <unk>, <unk> </s>,
///   <s> BAD_DOG, BAD_DOG </s>.
/// Contexts: "" has children The cat </s> sat <unk> on mat BAD_DOG with raw
///   1 1 4 1 3 1 1 1 (C 13) and left-type 1 1 4 1 3 1 1 1 (A 13): T 8, N1 6,
///   N2 0, N3+ 2. <s>: 4 bigrams of count 1: 4 4 4 4 0 0. <unk>: on, mat,
///   </s>: 3 3 3 3 0 0. The, cat, sat, on, mat, BAD_DOG: 1 1 1 1 0 0.
/// Totals: 4 sentences; tokens 9 words + 4 </s> = 13; types 8; vocabulary 8
///   (<unk> seen); marker_tokens 3; invalid_utf8_lines 1; skipped_lines 0.
/// Count-of-counts order 1: raw = left-type = {1:6, 3:1, 4:1}; order 2:
///   {1:13}. n-grams: 9 unigrams (with <s>), 13 bigrams.
#[test]
fn mixed_tiny_input_hand_computed() {
    let tmp = tempfile::tempdir().unwrap();
    let input = write(tmp.path(), "mixed.txt", MIXED);
    let store = tmp.path().join("store");
    ingest_ok(&store, &["--order", "2"], std::slice::from_ref(&input));

    let dump = dump_sorted(&store, &[]);
    let bd = BAD_DOG;
    let expected_dump = sorted(&[
        "<s>\t4\t0",
        "The\t1\t1",
        "cat\t1\t1",
        "</s>\t4\t4",
        "sat\t1\t1",
        "<unk>\t3\t3",
        "on\t1\t1",
        "mat\t1\t1",
        &format!("{bd}\t1\t1"),
        "<s> The\t1\t-",
        "The cat\t1\t-",
        "cat </s>\t1\t-",
        "<s> sat\t1\t-",
        "sat <unk>\t1\t-",
        "<unk> on\t1\t-",
        "on </s>\t1\t-",
        "<s> <unk>\t1\t-",
        "<unk> mat\t1\t-",
        "mat <unk>\t1\t-",
        "<unk> </s>\t1\t-",
        &format!("<s> {bd}\t1\t-"),
        &format!("{bd} </s>\t1\t-"),
    ]);
    assert_lines_eq("mixed input dump (hand computed)", &expected_dump, &dump);

    let contexts = dump_sorted(&store, &["--contexts"]);
    let expected_contexts = sorted(&[
        "\t13\t8\t13\t6\t0\t2",
        "<s>\t4\t4\t4\t4\t0\t0",
        "<unk>\t3\t3\t3\t3\t0\t0",
        "The\t1\t1\t1\t1\t0\t0",
        "cat\t1\t1\t1\t1\t0\t0",
        "sat\t1\t1\t1\t1\t0\t0",
        "on\t1\t1\t1\t1\t0\t0",
        "mat\t1\t1\t1\t1\t0\t0",
        &format!("{bd}\t1\t1\t1\t1\t0\t0"),
    ]);
    assert_lines_eq(
        "mixed input contexts (hand computed)",
        &expected_contexts,
        &contexts,
    );

    let stats = stats_json(&store);
    let t = &stats["totals"];
    assert_eq!(t["sentences"], 4, "sentences (hand computed)");
    assert_eq!(t["tokens"], 13, "tokens (hand computed)");
    assert_eq!(t["types"], 8, "types (hand computed)");
    assert_eq!(t["vocabulary"], 8, "vocabulary (hand computed)");
    assert_eq!(t["marker_tokens"], 3, "marker_tokens (hand computed)");
    assert_eq!(
        t["invalid_utf8_lines"], 1,
        "invalid_utf8_lines (hand computed)"
    );
    assert_eq!(
        t["skipped_lines"], 0,
        "skipped_lines (hand computed; blank lines are not 'skipped_lines')"
    );
    assert_eq!(
        stats["orders"][0]["ngrams"], 9,
        "unigrams incl. <s> (hand computed)"
    );
    assert_eq!(stats["orders"][1]["ngrams"], 13, "bigrams (hand computed)");
    assert_eq!(
        stats["orders"][0]["count_of_counts"],
        serde_json::json!({"raw": [[1, 6], [3, 1], [4, 1]], "left_type": [[1, 6], [3, 1], [4, 1]]}),
        "order 1 count-of-counts (hand computed)"
    );
    assert_eq!(
        stats["orders"][1]["count_of_counts"],
        serde_json::json!({"raw": [[1, 13]], "left_type": [[1, 13]]}),
        "order 2 count-of-counts (hand computed)"
    );

    // Whole view, including discounts (source: independent reference counter).
    let mut r = Reference::new(Settings::order(2));
    r.add_bytes(MIXED);
    assert_views_eq("mixed input vs reference", &r.view(), &store_view(&store));
}

/// Orders 1, 3 and 5 on the same tiny input (source: reference counter).
#[test]
fn mixed_tiny_input_other_orders() {
    let tmp = tempfile::tempdir().unwrap();
    let input = write(tmp.path(), "mixed.txt", MIXED);
    for order in [1usize, 3, 5] {
        let store = tmp.path().join(format!("store{order}"));
        ingest_ok(
            &store,
            &["--order", &order.to_string()],
            std::slice::from_ref(&input),
        );
        let mut r = Reference::new(Settings::order(order));
        r.add_bytes(MIXED);
        assert_views_eq(
            &format!("mixed input, order {order}"),
            &r.view(),
            &store_view(&store),
        );
    }
}

/// A `.gz` and a `.zst` input count like the plain file (source: reference
/// counter over the uncompressed bytes); a directory is walked recursively.
#[test]
fn compressed_inputs_and_directories() {
    let tmp = tempfile::tempdir().unwrap();
    let text: &[u8] = b"alpha beta gamma\nbeta gamma delta\r\n\ngamma alpha\n";
    let plain = write(tmp.path(), "in/plain.txt", text);
    let gz = write(tmp.path(), "in/sub/text.gz", &gzip(text));
    let zst = write(tmp.path(), "in/sub/deeper/text.zst", &zstd_compress(text));

    let mut r = Reference::new(Settings::order(3));
    r.add_bytes(text);
    let expected = r.view();
    for (name, input) in [("plain", &plain), ("gz", &gz), ("zst", &zst)] {
        let store = tmp.path().join(format!("store-{name}"));
        ingest_ok(&store, &["--order", "3"], std::slice::from_ref(input));
        assert_views_eq(&format!("{name} input"), &expected, &store_view(&store));
    }

    // The directory holds the text three times (plain, .gz, .zst).
    let store = tmp.path().join("store-dir");
    ingest_ok(&store, &["--order", "3"], &[tmp.path().join("in")]);
    let mut r3 = Reference::new(Settings::order(3));
    for _ in 0..3 {
        r3.add_bytes(text);
    }
    assert_views_eq("directory input", &r3.view(), &store_view(&store));
}

/// `-` reads stdin (source: reference counter over the same bytes).
#[test]
fn stdin_input() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let args = ingest_args(&store, &["--order", "2"], &[PathBuf::from("-")]);
    run_with_stdin(&args, MIXED).assert_success();
    let mut r = Reference::new(Settings::order(2));
    r.add_bytes(MIXED);
    assert_views_eq("stdin input", &r.view(), &store_view(&store));
}

/// Contract: a missing input gives a non-zero exit and a message naming the
/// path.
#[test]
fn missing_input_path() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let missing = tmp.path().join("no-such-input-file.txt");
    let r = run(&ingest_args(&store, &[], std::slice::from_ref(&missing)));
    r.assert_failure();
    assert!(
        r.stderr.contains(&missing.display().to_string())
            || r.stderr.contains("no-such-input-file.txt"),
        "error message does not name the missing path\n{}",
        r.describe()
    );
}

/// `dump --order 2` prints exactly the bigram lines of the full dump
/// (source: the reference's dump filtered to two-word lines).
#[test]
fn dump_single_order() {
    let tmp = tempfile::tempdir().unwrap();
    let input = write(tmp.path(), "mixed.txt", MIXED);
    let store = tmp.path().join("store");
    ingest_ok(&store, &["--order", "3"], &[input]);
    let mut r = Reference::new(Settings::order(3));
    r.add_bytes(MIXED);
    let expected: Vec<String> = r
        .view()
        .dump
        .into_iter()
        .filter(|l| l.split('\t').next().unwrap().split(' ').count() == 2)
        .collect();
    assert_lines_eq(
        "dump --order 2",
        &expected,
        &dump_sorted(&store, &["--order", "2"]),
    );
}

/// `--max-line-bytes`: longer lines are skipped and counted as skipped
/// (source: reference counter with the same limit).
#[test]
fn max_line_bytes_skips_long_lines() {
    let tmp = tempfile::tempdir().unwrap();
    let text: &[u8] = b"short line\nthis line is much longer than twenty bytes\n\nok\n";
    let input = write(tmp.path(), "long.txt", text);
    let store = tmp.path().join("store");
    ingest_ok(
        &store,
        &["--order", "2", "--max-line-bytes", "20"],
        &[input],
    );
    let mut r = Reference::new(Settings::order(2).max_line_bytes(20));
    r.add_bytes(text);
    let view = store_view(&store);
    assert_eq!(
        view.stats["totals"]["skipped_lines"], 1,
        "one over-long line (hand count)"
    );
    assert_views_eq("--max-line-bytes 20", &r.view(), &view);
}

/// `--lowercase` on the tiny input (source: reference counter, lowercase).
#[test]
fn lowercase_tiny() {
    let tmp = tempfile::tempdir().unwrap();
    let text = "Der Hund\nDER hund ÄRGER\n".as_bytes();
    let input = write(tmp.path(), "lc.txt", text);
    let store = tmp.path().join("store");
    ingest_ok(&store, &["--order", "2", "--lowercase"], &[input]);
    let mut r = Reference::new(Settings::order(2).lowercase(true));
    r.add_bytes(text);
    let view = store_view(&store);
    assert_eq!(view.stats["settings"]["lowercase"], true);
    assert!(
        view.dump.contains(&"der hund\t2\t-".to_string()),
        "'der hund' twice (hand count)"
    );
    assert_views_eq("--lowercase", &r.view(), &view);
}

/// Contract: `stats --json` has the documented fields (source: the
/// contract's JSON shape); `ingest --json` prints a JSON object; `status`
/// works on a finished store.
#[test]
fn stats_json_fields_present() {
    let tmp = tempfile::tempdir().unwrap();
    let input = write(tmp.path(), "mixed.txt", MIXED);
    let store = tmp.path().join("store");
    let ing = ingest_ok(&store, &["--order", "3", "--json"], &[input]);
    let summary: Value = serde_json::from_str(ing.stdout.trim())
        .unwrap_or_else(|e| panic!("ingest --json stdout is not JSON ({e}): {:?}", ing.stdout));
    assert!(summary.is_object(), "ingest --json summary: {summary}");

    let s = stats_json(&store);
    assert_eq!(s["format_version"], 3);
    assert_eq!(s["settings"]["order"], 3);
    assert_eq!(s["settings"]["lowercase"], false);
    for key in [
        "sentences",
        "tokens",
        "vocabulary",
        "types",
        "marker_tokens",
        "skipped_lines",
        "invalid_utf8_lines",
    ] {
        assert!(
            s["totals"][key].is_u64(),
            "totals.{key} missing or not an integer: {}",
            s["totals"]
        );
    }
    let orders = s["orders"].as_array().expect("orders array");
    assert_eq!(orders.len(), 3);
    for (i, o) in orders.iter().enumerate() {
        assert_eq!(o["order"], i as u64 + 1);
        assert!(o["ngrams"].is_u64(), "orders[{i}].ngrams: {o}");
        for kind in ["raw", "left_type"] {
            let list = o["count_of_counts"][kind]
                .as_array()
                .unwrap_or_else(|| panic!("orders[{i}].count_of_counts.{kind}: {o}"));
            let mut last = 0;
            for pair in list {
                let (r, n) = (pair[0].as_u64().unwrap(), pair[1].as_u64().unwrap());
                assert!(
                    r > last && n > 0,
                    "count_of_counts.{kind} not sorted by r or has n_r = 0: {o}"
                );
                last = r;
            }
        }
        let d = o
            .get("discounts")
            .unwrap_or_else(|| panic!("orders[{i}].discounts missing: {o}"));
        for k in ["d1", "d2", "d3plus", "kn"] {
            let x = &d[k];
            assert!(
                x["value"].is_number() != x["undefined"].is_string(),
                "orders[{i}].discounts.{k}: a value or a reason: {d}"
            );
        }
    }

    run_ok(&["status", "--store", &store.display().to_string()]);
    let st = run_ok(&["status", "--store", &store.display().to_string(), "--json"]);
    let _: Value = serde_json::from_str(st.stdout.trim())
        .unwrap_or_else(|e| panic!("status --json is not JSON ({e}): {}", st.stdout));
}

#[test]
fn one_huge_sentence_overflowing_the_table() {
    // A single line of 60,000 tokens with 20,000 distinct words makes more
    // distinct n-grams than a 16 MiB budget's table holds, so the table is
    // emptied in the middle of the sentence. Source of truth: the
    // independent reference counter over the contract.
    let tmp = tempfile::tempdir().unwrap();
    let input = tmp.path().join("huge.txt");
    let mut line = String::new();
    let mut x: u64 = 7;
    for _ in 0..60_000 {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        line.push_str(&format!("w{} ", (x >> 33) % 20_000));
    }
    line.push_str("\nshort line after it\n");
    std::fs::write(&input, &line).unwrap();
    let store = tmp.path().join("store");
    let args = [
        "--order",
        "4",
        "--memory",
        "16MiB",
        "--threads",
        "1",
        "--quiet",
    ];
    let expected = Reference::from_paths(Settings::order(4), std::slice::from_ref(&input)).view();
    // The table really was emptied inside the sentence: the first recorded
    // spill (at the end of the huge line at the latest) holds more than one
    // run file, which only a table written out in the middle of a sentence
    // makes (DEVELOPERS.md, "How is text counted?"). Read from the manifest
    // of an ingest stopped right after that spill was recorded; the resume
    // must then give the reference's counts too.
    let stopped = run_env(
        &ingest_args(&store, &args, std::slice::from_ref(&input)),
        &[(KILL_VAR, Point::Committed.at(1).as_str())],
    );
    assert_eq!(stopped.signal(), Some(9), "{}", stopped.describe());
    let runs = manifest(&store)["runsets"][0]["runs"]
        .as_array()
        .unwrap()
        .len();
    assert!(
        runs >= 2,
        "the first spill holds {runs} run file: the table was not emptied mid-sentence"
    );
    ingest_ok(&store, &args, std::slice::from_ref(&input));
    assert_views_eq("huge sentence, resumed", &expected, &store_view(&store));
    // Uninterrupted, with the summary's count of run files: at least the
    // run written mid-sentence and the last one.
    let again = tmp.path().join("again");
    let mut json_args = args.to_vec();
    json_args.push("--json");
    let r = ingest_ok(&again, &json_args, std::slice::from_ref(&input));
    let summary: Value = serde_json::from_str(r.stdout.trim()).unwrap();
    assert!(summary["runs_written"].as_u64().unwrap() >= 2, "{summary}");
    assert_views_eq("huge sentence", &expected, &store_view(&again));
}

/// The first hour on the demo corpus: `mkn` is the default method and runs
/// although the counts put order 2's D3+ out of range (left-type n1..n4 =
/// 2050, 243, 95, 96, so D3+ = 3 − 4·(2050/2536)·(96/95) < 0 by Chen &
/// Goodman's formula); a note names it and the single discount used
/// instead, D = 2050/2536 (Ney, Essen & Kneser). The strict policy refuses.
/// `dump` and `ngrams` start with their header line, and `--no-header`
/// leaves exactly the rows.
#[test]
fn demo_corpus_default_method_and_headers() {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("ferry");
    let demo = crate::common::fixtures().join("demo").join("ferry-log.txt");
    ingest_ok(
        &store,
        &["--order", "3", "--quiet"],
        std::slice::from_ref(&demo),
    );
    let s = store.display().to_string();
    let r = run_ok(&["prob", "--store", &s, "<s>", "Guillemot", "departed"]);
    assert!(
        r.stdout.starts_with("<s> Guillemot departed\t"),
        "{}",
        r.stdout
    );
    assert!(
        r.stderr.contains("mkn: order 2: D3+ would be -0.26")
            && r.stderr
                .contains(&format!("D = n1/(n1 + 2 n2) = {:.6}", 2050.0 / 2536.0)),
        "{}",
        r.stderr
    );
    let r = run(&[
        "prob",
        "--store",
        &s,
        "--discounts",
        "estimate",
        "<s>",
        "Guillemot",
    ]);
    r.assert_failure();
    assert!(
        r.stderr.contains("order 2") && r.stderr.contains("D3+"),
        "{}",
        r.stderr
    );

    let with = run_ok(&["dump", "--store", &s, "--order", "2"]).stdout;
    let without = run_ok(&["dump", "--store", &s, "--order", "2", "--no-header"]).stdout;
    assert_eq!(with, format!("ngram\tcount\tcontinuation\n{without}"));
    let ctx = run_ok(&["dump", "--store", &s, "--contexts", "--order", "0"]).stdout;
    let lines: Vec<&str> = ctx.lines().collect();
    assert_eq!(lines[0], "context\tC\tT\tA\tN1\tN2\tN3+");
    // The empty context: C = every token (the words and one </s> per
    // sentence), T = the distinct ones; counted here with the standard
    // library's split_whitespace (the demo corpus holds no marker tokens).
    let text = std::fs::read_to_string(&demo).unwrap();
    let sentences: Vec<Vec<&str>> = text
        .lines()
        .map(|l| l.split_whitespace().collect::<Vec<_>>())
        .filter(|w| !w.is_empty())
        .collect();
    let tokens: usize = sentences.iter().map(|w| w.len() + 1).sum();
    let types = sentences
        .iter()
        .flatten()
        .collect::<std::collections::HashSet<_>>()
        .len()
        + 1;
    assert!(
        lines[1].starts_with(&format!("\t{tokens}\t{types}\t")),
        "{} (tokens {tokens}, types {types})",
        lines[1]
    );
    assert_eq!(lines.len(), 2);
    let r = run(&["dump", "--store", &s, "--contexts", "--order", "3"]);
    r.assert_failure();
    assert!(r.stderr.contains("at most 2 words"), "{}", r.stderr);
    let page = run_ok(&["ngrams", "--store", &s, "--method", "kn", "Guillemot"]).stdout;
    assert!(
        page.starts_with("ngram\tcount\tcontinuation\tprobability\tlog10\n"),
        "{page}"
    );
}

/// Flag values are parsed before a command runs: a bad method, discount
/// policy or size is refused with the library's message (the one the
/// Python module gives), even where the store does not exist, which the
/// command would otherwise report first.
#[test]
fn flag_values_are_refused_before_the_command_runs() {
    let tmp = tempfile::tempdir().unwrap();
    let missing = tmp.path().join("no-store");
    let m = missing.to_str().unwrap();
    for (args, says) in [
        (
            vec!["prob", "--store", m, "--method", "nope", "a", "b"],
            "unknown method \"nope\"",
        ),
        (
            vec!["ngrams", "--store", m, "--method", "nope", "a"],
            "unknown method \"nope\"",
        ),
        (
            vec!["prob", "--store", m, "--discounts", "sometimes", "a", "b"],
            "--discounts \"sometimes\"",
        ),
        (
            vec!["ingest", "--store", m, "--memory", "lots", m],
            "\"lots\" is not a size",
        ),
        (
            vec!["serve", "--store", m, "--max-request-bytes", "1XB"],
            "unknown unit",
        ),
        (
            vec![
                "stage",
                "merge",
                "--dir",
                m,
                "--partition",
                "0",
                "--memory",
                "lots",
            ],
            "\"lots\" is not a size",
        ),
    ] {
        let r = run(&args);
        r.assert_failure();
        let errors: Vec<&str> = r
            .stderr
            .lines()
            .filter(|l| l.starts_with("quern: error: "))
            .collect();
        assert!(
            errors.len() == 1 && errors[0].contains(says) && !errors[0].contains("no-store"),
            "{args:?}: want one error saying {says:?}\n{}",
            r.describe()
        );
    }
}
