//! `ingest --jsonl`: documents as JSON lines. Source of truth: a plain
//! ingest of the texts the test put into the documents (each text's lines
//! written as input lines), from the same Gutenberg novels; the JSON lines
//! are written by serde_json (RFC 8259 escapes), the bad lines by hand with
//! their line numbers known by construction.

use std::path::{Path, PathBuf};

use serde_json::{json, Value};

use crate::common::{
    assert_views_eq, gutenberg_dir, ingest_args, ingest_ok, run, run_env, store_view, StoreView,
};

/// A crawl made from `novels`: documents of 1 to 6 consecutive lines of a
/// novel (some joined with `\r\n`), with other fields around the text, and
/// bad lines among them. Written to `dir/crawl-<i>.jsonl`, one file per
/// novel, with the same texts as plain lines to `dir/texts-<i>.txt`.
/// Returns the two lists of files and, per crawl file, the line numbers of
/// its bad lines.
pub(crate) fn crawl_of(dir: &Path, novels: &[&str]) -> (Vec<PathBuf>, Vec<PathBuf>, Vec<Vec<u64>>) {
    let bad: [&[u8]; 5] = [
        b"{\"text\": \"cut off",
        b"[\"a list\", \"not an object\"]",
        b"{\"url\": \"https://example.org/no-text\"}",
        b"{\"text\": 42}",
        b"",
    ];
    let (mut crawls, mut texts, mut bad_at) = (Vec::new(), Vec::new(), Vec::new());
    for (i, novel) in novels.iter().enumerate() {
        let raw = std::fs::read(gutenberg_dir().join(novel)).unwrap();
        let body = String::from_utf8_lossy(&raw);
        let lines: Vec<&str> = body.split('\n').collect();
        let (mut crawl, mut plain) = (Vec::<u8>::new(), String::new());
        let (mut at, mut doc, mut line_no) = (0, 0usize, 0u64);
        let mut bads = Vec::new();
        while at < lines.len() {
            let k = 1 + doc % 6;
            let part = &lines[at..(at + k).min(lines.len())];
            at += part.len();
            let sep = if doc % 5 == 3 { "\r\n" } else { "\n" };
            let text = part.join(sep);
            for l in part {
                plain.push_str(l);
                plain.push('\n');
            }
            let v = json!({
                "url": format!("https://example.org/{novel}/{doc}"),
                "meta": {"lines": part.len(), "tags": ["a", {"b": null}]},
                "text": text,
                "id": doc,
            });
            crawl.extend(serde_json::to_vec(&v).unwrap());
            crawl.push(b'\n');
            line_no += 1;
            if doc % 97 == 13 {
                crawl.extend(bad[(doc / 97) % bad.len()]);
                crawl.push(b'\n');
                line_no += 1;
                bads.push(line_no);
            }
            doc += 1;
        }
        let c = dir.join(format!("crawl-{i}.jsonl"));
        let t = dir.join(format!("texts-{i}.txt"));
        std::fs::write(&c, crawl).unwrap();
        std::fs::write(&t, plain).unwrap();
        crawls.push(c);
        texts.push(t);
        bad_at.push(bads);
    }
    (crawls, texts, bad_at)
}

/// A store's view without `input_bytes` (JSON lines are longer than their
/// texts) and the bad-line count (the plain texts have none).
pub(crate) fn view(store: &Path) -> StoreView {
    let mut v = store_view(store);
    strip(&mut v.stats);
    v
}

fn strip(v: &mut Value) {
    match v {
        Value::Object(o) => {
            o.remove("input_bytes");
            o.remove("bad_lines");
            o.values_mut().for_each(strip);
        }
        Value::Array(a) => a.iter_mut().for_each(strip),
        _ => {}
    }
}

const FLAGS: &[&str] = &[
    "--order",
    "4",
    "--memory",
    "24MiB",
    "--threads",
    "3",
    "--quiet",
];

fn jsonl_flags() -> Vec<&'static str> {
    let mut f = FLAGS.to_vec();
    f.push("--jsonl");
    f
}

/// The summary's bad lines, as `(file name, line)`.
fn named_bad_lines(summary: &Value) -> Vec<(String, u64)> {
    summary["bad_lines"]
        .as_array()
        .map(|a| {
            a.iter()
                .map(|b| {
                    let p = PathBuf::from(b["path"].as_str().unwrap());
                    (
                        p.file_name().unwrap().to_string_lossy().into_owned(),
                        b["line"].as_u64().unwrap(),
                    )
                })
                .collect()
        })
        .unwrap_or_default()
}

/// Two novels as JSON lines, cut into chunks of 4,099 bytes and counted by
/// 3 threads: the store equals the plain ingest of their texts (`dump`,
/// `dump --contexts`, `stats --json`), and the bad lines are counted in
/// the summary and `stats`, and named by file and line.
#[test]
fn jsonl_ingest_equals_plain_ingest_of_the_texts() {
    let tmp = tempfile::tempdir().unwrap();
    let (crawls, texts, bad_at) = crawl_of(tmp.path(), &["emma.txt", "persuasion.txt"]);
    let plain = tmp.path().join("plain");
    ingest_ok(&plain, FLAGS, &texts);
    let docs = tmp.path().join("docs");
    let mut flags = jsonl_flags();
    flags.push("--json");
    let r = run_env(
        &ingest_args(&docs, &flags, &crawls),
        &[("QUERN_CHUNK_BYTES", "4099")],
    );
    r.assert_success();
    assert_views_eq(
        "JSON lines against plain texts",
        &view(&plain),
        &view(&docs),
    );
    let summary: Value = serde_json::from_str(r.stdout.trim()).unwrap();
    let total_bad: usize = bad_at.iter().map(Vec::len).sum();
    assert!(
        total_bad > 10,
        "the crawl has too few bad lines: {total_bad}"
    );
    assert_eq!(
        summary["totals"]["bad_lines"], total_bad as u64,
        "{summary}"
    );
    let stats = crate::common::stats_json(&docs);
    assert_eq!(stats["totals"]["bad_lines"], total_bad as u64, "{stats}");
    // The first ten, in input order, by file and line.
    let expected: Vec<(String, u64)> = bad_at
        .iter()
        .enumerate()
        .flat_map(|(i, v)| v.iter().map(move |&l| (format!("crawl-{i}.jsonl"), l)))
        .take(10)
        .collect();
    assert_eq!(named_bad_lines(&summary), expected, "{summary}");
    // The text summary names them too, with why.
    let text = run(&ingest_args(
        &tmp.path().join("docs-text"),
        &jsonl_flags(),
        &crawls[..1],
    ));
    text.assert_success();
    assert!(
        text.stdout.contains(&format!(
            "lines without a document, skipped: {}",
            bad_at[0].len()
        )),
        "{}",
        text.describe()
    );
    let first = format!("crawl-0.jsonl, line {}: not JSON: ", bad_at[0][0]);
    assert!(text.stdout.contains(&first), "{}", text.describe());
    assert!(
        text.stdout.contains("no field \"text\""),
        "{}",
        text.describe()
    );
}

/// Killed while counting JSON lines and resumed: the same store as the
/// plain ingest; a resume that reads the inputs as plain lines is refused
/// with a message naming both formats.
#[test]
fn jsonl_ingest_resumes_after_a_kill() {
    let tmp = tempfile::tempdir().unwrap();
    let (crawls, texts, _) = crawl_of(tmp.path(), &["emma.txt", "persuasion.txt"]);
    let plain = tmp.path().join("plain");
    ingest_ok(&plain, FLAGS, &texts);
    let docs = tmp.path().join("docs");
    let flags = jsonl_flags();
    let env = [("QUERN_CHUNK_BYTES", "65536"), ("QUERN_KILL_AT", "spill:3")];
    let killed = run_env(&ingest_args(&docs, &flags, &crawls), &env);
    assert!(
        killed.signal() == Some(9),
        "the ingest was not killed at its third spill\n{}",
        killed.describe()
    );
    let other = run(&ingest_args(&docs, FLAGS, &crawls));
    other.assert_failure();
    assert!(
        other.stderr.contains("JSON lines (text field \"text\")")
            && other.stderr.contains("plain lines"),
        "{}",
        other.describe()
    );
    let resumed = run_env(
        &ingest_args(&docs, &flags, &crawls),
        &[("QUERN_CHUNK_BYTES", "65536")],
    );
    resumed.assert_success();
    assert!(resumed.stdout.contains("resumed"), "{}", resumed.describe());
    assert_views_eq(
        "JSON lines, killed and resumed",
        &view(&plain),
        &view(&docs),
    );
}

/// JSON lines appended to a store of plain text: the plain ingest of
/// everything at once.
#[test]
fn jsonl_appended_to_a_plain_store_equals_one_plain_ingest() {
    let tmp = tempfile::tempdir().unwrap();
    let (crawls, texts, _) = crawl_of(tmp.path(), &["persuasion.txt", "northangerabbey.txt"]);
    let all = tmp.path().join("all");
    ingest_ok(&all, FLAGS, &texts);
    let store = tmp.path().join("store");
    ingest_ok(&store, FLAGS, &texts[..1]);
    let mut flags = jsonl_flags();
    flags.push("--append");
    ingest_ok(&store, &flags, &crawls[1..]);
    assert_views_eq(
        "plain, then JSON lines appended",
        &view(&all),
        &view(&store),
    );
}

/// `stage plan --jsonl`: the staged store equals the plain ingest of the
/// texts.
#[test]
fn staged_jsonl_equals_plain_ingest_of_the_texts() {
    let tmp = tempfile::tempdir().unwrap();
    let (crawls, texts, _) = crawl_of(tmp.path(), &["persuasion.txt", "northangerabbey.txt"]);
    let plain = tmp.path().join("plain");
    ingest_ok(&plain, FLAGS, &texts);
    let dir = tmp.path().join("job");
    let store = tmp.path().join("staged");
    let s = |p: &Path| p.display().to_string();
    let stage = |args: Vec<String>| -> Value {
        let mut a = vec!["stage".to_string()];
        a.extend(args);
        let r = run_env(&a, &[("QUERN_CHUNK_BYTES", "20000")]);
        r.assert_success();
        serde_json::from_str(r.stdout.trim()).unwrap()
    };
    let mut plan = vec![
        "plan",
        "--dir",
        &s(&dir),
        "--order",
        "4",
        "--partitions",
        "3",
        "--map-tasks",
        "4",
        "--jsonl",
    ]
    .into_iter()
    .map(String::from)
    .collect::<Vec<_>>();
    plan.extend(crawls.iter().map(|p| s(p)));
    let p = stage(plan);
    for t in 0..p["map_tasks"].as_u64().unwrap() {
        stage(vec![
            "map".into(),
            "--dir".into(),
            s(&dir),
            "--task".into(),
            t.to_string(),
        ]);
    }
    for st in ["merge", "join"] {
        for q in 0..3 {
            stage(vec![
                st.into(),
                "--dir".into(),
                s(&dir),
                "--partition".into(),
                q.to_string(),
            ]);
        }
    }
    stage(vec![
        "assemble".into(),
        "--dir".into(),
        s(&dir),
        "--store".into(),
        s(&store),
    ]);
    assert_views_eq("staged JSON lines", &view(&plain), &view(&store));
}
