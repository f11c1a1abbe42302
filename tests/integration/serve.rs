//! `quern serve` against the command line's own answers on the Gutenberg
//! fixtures, for a store and for a frozen model: every endpoint answers
//! what `prob --json`, `next --json`, `score --jsonl`, `ngrams --json`,
//! `stats --json` and `stats --plot` say for the same query (the source of
//! truth is the CLI, whose numbers the other tests check against published
//! formulas); bad requests get a 4xx status with a JSON error; SIGTERM
//! stops it cleanly. The HTTP client is written here on `std::net` (HTTP/1.1
//! as RFC 9112 defines it) so that the tests share no code with the server.

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitStatus, Stdio};
use std::sync::{Arc, Mutex, OnceLock};
use std::time::Duration;

use serde_json::{json, Value};

use crate::common::{bin, gutenberg_files, ingest_ok, run_ok, run_with_stdin, wait_timeout};

/// The store (order 3, all six novels) and its mkn model, built once.
pub fn fixture() -> &'static (PathBuf, PathBuf) {
    static F: OnceLock<(PathBuf, PathBuf)> = OnceLock::new();
    F.get_or_init(|| {
        let base = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("serve");
        let _ = std::fs::remove_dir_all(&base);
        std::fs::create_dir_all(&base).unwrap();
        let store = base.join("gutenberg");
        ingest_ok(
            &store,
            &["--order", "3", "--memory", "512MiB", "--quiet"],
            &gutenberg_files(6),
        );
        let model = base.join("gutenberg-mkn.qm");
        run_ok(&[
            "freeze",
            "--store",
            store.to_str().unwrap(),
            "--out",
            model.to_str().unwrap(),
        ]);
        (store, model)
    })
}

/// A running `quern serve`, stopped (SIGKILL) when dropped.
pub struct Server {
    child: Option<Child>,
    /// `127.0.0.1:PORT`.
    pub addr: String,
    stderr: Arc<Mutex<String>>,
}

impl Server {
    /// Starts `quern serve ARGS --listen 127.0.0.1:0` and waits for its
    /// "serving … on http://ADDR/" line.
    pub fn start(args: &[&str]) -> Server {
        let mut child = Command::new(bin())
            .arg("serve")
            .args(args)
            .args(["--listen", "127.0.0.1:0"])
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .expect("starting quern serve");
        let mut err = BufReader::new(child.stderr.take().unwrap());
        let mut seen = String::new();
        let addr = loop {
            let mut line = String::new();
            if err.read_line(&mut line).unwrap() == 0 {
                let _ = child.kill();
                panic!("quern serve {args:?} ended before serving:\n{seen}");
            }
            seen.push_str(&line);
            if let Some(i) = line.find("http://") {
                let rest = &line[i + 7..];
                break rest[..rest.find('/').unwrap()].to_string();
            }
        };
        let stderr = Arc::new(Mutex::new(seen));
        let sink = stderr.clone();
        std::thread::spawn(move || {
            // A line at a time, so that `stderr` sees it while it runs.
            let mut line = String::new();
            while err.read_line(&mut line).is_ok_and(|n| n > 0) {
                sink.lock().unwrap().push_str(&line);
                line.clear();
            }
        });
        Server {
            child: Some(child),
            addr,
            stderr,
        }
    }

    /// Sends SIGTERM and waits up to 20 s: its exit status and standard
    /// error.
    pub fn terminate(mut self) -> (ExitStatus, String) {
        let mut child = self.child.take().unwrap();
        // SAFETY: kill(2) on our own child's pid.
        assert_eq!(unsafe { libc::kill(child.id() as i32, libc::SIGTERM) }, 0);
        let st =
            wait_timeout(&mut child, 20).expect("quern serve did not stop within 20 s of SIGTERM");
        std::thread::sleep(Duration::from_millis(100));
        let err = self.stderr.lock().unwrap().clone();
        (st, err)
    }

    /// Sends SIGTERM and returns at once (see [`Server::wait_exit`]).
    pub fn sigterm(&self) {
        let child = self.child.as_ref().unwrap();
        // SAFETY: kill(2) on our own child's pid.
        assert_eq!(unsafe { libc::kill(child.id() as i32, libc::SIGTERM) }, 0);
    }

    /// Waits up to 20 s for the process to end (after [`Server::sigterm`]):
    /// its exit status and standard error.
    pub fn wait_exit(mut self) -> (ExitStatus, String) {
        let mut child = self.child.take().unwrap();
        let st = wait_timeout(&mut child, 20).expect("quern serve did not stop within 20 s");
        std::thread::sleep(Duration::from_millis(100));
        let err = self.stderr.lock().unwrap().clone();
        (st, err)
    }

    /// What it has written on standard error so far.
    pub fn stderr(&self) -> String {
        self.stderr.lock().unwrap().clone()
    }

    /// Sends `sig` (a libc signal number).
    pub fn signal(&self, sig: i32) {
        let child = self.child.as_ref().unwrap();
        // SAFETY: kill(2) on our own child's pid.
        assert_eq!(unsafe { libc::kill(child.id() as i32, sig) }, 0);
    }

    /// One request on a new connection.
    pub fn call(&self, method: &str, path: &str, body: Option<&str>) -> (u16, String) {
        Conn::open(&self.addr).call(method, path, body.map(str::as_bytes))
    }

    /// `POST path` with a JSON body: status and parsed answer.
    pub fn post(&self, path: &str, body: &Value) -> (u16, Value) {
        let (st, text) = self.call("POST", path, Some(&body.to_string()));
        (st, parse(&text))
    }
}

impl Drop for Server {
    fn drop(&mut self) {
        if let Some(c) = &mut self.child {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

pub(crate) fn parse(text: &str) -> Value {
    serde_json::from_str(text).unwrap_or_else(|e| panic!("not JSON ({e}): {text:?}"))
}

pub use crate::http_client::Conn;

/// `--store S` or `--model M` as arguments.
pub fn source_args(model: bool) -> Vec<String> {
    let (s, m) = fixture();
    if model {
        vec!["--model".into(), m.display().to_string()]
    } else {
        vec!["--store".into(), s.display().to_string()]
    }
}

/// `1234567` → `1,234,567`, as the CLI writes counts.
pub fn thousands(n: u64) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

pub fn strs(v: &[String]) -> Vec<&str> {
    v.iter().map(String::as_str).collect()
}

/// Queries taken from the novels: (context, word) pairs, some with a word
/// outside the vocabulary, and an empty context.
pub fn prob_queries() -> Vec<(String, String)> {
    let text = std::fs::read_to_string(&gutenberg_files(6)[0]).unwrap();
    let words: Vec<&str> = text.split_whitespace().collect();
    let mut out = Vec::new();
    for i in (1000..words.len()).step_by(words.len() / 40).take(40) {
        out.push((words[i - 2..i].join(" "), words[i].to_string()));
    }
    out.push((String::new(), "the".into()));
    out.push(("I am".into(), "zyxwvut".into()));
    out.push(("<s> It".into(), "is".into()));
    out
}

/// The contexts of the `/next` checks.
pub fn next_contexts() -> Vec<&'static str> {
    vec![
        "",
        "I am",
        "<s> It is a",
        "she could not",
        "in the",
        "zyxwvut of",
    ]
}

/// `quern next --json --top K CONTEXT` (and `--method`).
pub fn cli_next(model: bool, method: Option<&str>, context: &str, top: usize) -> Value {
    let mut a = vec![
        "next".to_string(),
        "--json".into(),
        "--top".into(),
        top.to_string(),
    ];
    a.extend(source_args(model));
    if let Some(m) = method {
        a.extend(["--method".into(), m.into()]);
    }
    if context.split_whitespace().next().is_none() {
        // No context words: `next` reads its queries from standard input,
        // and an empty line asks after the empty context.
        let r = run_with_stdin(&a, b"\n");
        r.assert_success();
        return parse(r.stdout.lines().next().unwrap_or(""));
    }
    a.push("--".into());
    a.extend(context.split_whitespace().map(String::from));
    parse(&run_ok(&a).stdout)
}

fn check_prob(srv: &Server, model: bool) {
    let qs = prob_queries();
    let input: String = qs.iter().map(|(c, w)| format!("{c} {w}\n")).collect();
    let mut a = vec!["prob".to_string(), "--json".into()];
    a.extend(source_args(model));
    let cli = run_with_stdin(&a, input.as_bytes());
    cli.assert_success();
    let want: Vec<Value> = cli.stdout.lines().map(parse).collect();
    assert_eq!(want.len(), qs.len());
    for ((c, w), want) in qs.iter().zip(&want) {
        let (st, got) = srv.post("/prob", &json!({ "context": c, "word": w }));
        assert_eq!(st, 200, "{got}");
        // Source of truth: `quern prob --json`, field for field.
        assert_eq!(&got, want, "/prob {c:?} {w:?}");
        assert!(got["probability"].is_number() && got["log10"].is_number());
    }
}

fn check_next(srv: &Server, model: bool, methods: &[&str]) {
    for &m in methods {
        for ctx in next_contexts() {
            let want = cli_next(model, Some(m), ctx, 10);
            let (st, got) = srv.post("/next", &json!({ "context": ctx, "top": 10, "method": m }));
            assert_eq!(st, 200, "{got}");
            // Source of truth: `quern next --json`, the same `words`.
            assert_eq!(got["words"], want["words"], "/next {m} {ctx:?}");
            assert_eq!(got["rest"], want["rest"], "/next {m} {ctx:?}");
            assert_eq!(got["context"], want["context"], "/next {m} {ctx:?}");
            assert_eq!(got["method"], want["method"]);
            assert_eq!(got["words_scored"], want["words_scored"]);
        }
    }
    // With a prefix: the CLI's whole ranking of V (`next --top |V|`),
    // filtered to the words that begin with the prefix, `<s>`, `<unk>` and
    // `</s>` left out, is the brute force the answer must equal.
    let v = {
        let (_, info) = (0, parse(&srv.call("GET", "/info", None).1));
        info["vocabulary_size"].as_u64().unwrap() as usize
    };
    for (ctx, prefix) in [
        ("I am", "s"),
        ("she could not", "he"),
        ("", "Ma"),
        ("in the", "zq"),
    ] {
        let all = cli_next(model, None, ctx, v);
        let want: Vec<&Value> = all["words"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|w| {
                let s = w["word"].as_str().unwrap();
                s.starts_with(prefix) && !["<s>", "</s>", "<unk>"].contains(&s)
            })
            .take(7)
            .collect();
        let (st, got) = srv.post(
            "/next",
            &json!({ "context": ctx, "prefix": prefix, "top": 7 }),
        );
        assert_eq!(st, 200, "{got}");
        let got_words: Vec<&Value> = got["words"].as_array().unwrap().iter().collect();
        assert_eq!(got_words, want, "/next {ctx:?} prefix {prefix:?}");
        let shown: f64 = want
            .iter()
            .map(|w| w["probability"].as_f64().unwrap())
            .sum();
        let rest = got["rest"].as_f64().unwrap();
        assert!(
            (rest - (1.0 - shown)).abs() < 1e-12,
            "rest {rest} vs 1 - {shown}"
        );
    }
}

fn check_score(srv: &Server, model: bool, dir: &Path) {
    let texts = vec![
        "It is a truth universally acknowledged, that a single man".to_string(),
        "She was not sorry.\nHe said nothing zyxwvut at all.".to_string(),
        String::new(),
        "Emma Woodhouse, handsome, clever, and rich".to_string(),
    ];
    let file = dir.join(format!("texts-{model}.jsonl"));
    let lines: String = texts
        .iter()
        .map(|t| json!({ "text": t }).to_string() + "\n")
        .collect();
    std::fs::write(&file, lines).unwrap();
    let mut a = vec![
        "score".to_string(),
        "--jsonl".into(),
        file.display().to_string(),
    ];
    a.extend(source_args(model));
    let want: Vec<Value> = run_ok(&a).stdout.lines().map(parse).collect();
    let (st, got) = srv.post("/score", &json!({ "texts": texts }));
    assert_eq!(st, 200, "{got}");
    let got = got["results"].as_array().unwrap();
    assert_eq!(got.len(), texts.len());
    for (g, w) in got.iter().zip(&want) {
        // Source of truth: `quern score --jsonl`'s record of each document
        // (its id is the JSON id field, here absent; ours the text's number).
        for k in [
            "line",
            "sentences",
            "predictions",
            "outside_vocabulary",
            "probability_zero",
            "log10_sum",
            "perplexity",
        ] {
            assert_eq!(g[k], w[k], "/score field {k}: {g} vs {w}");
        }
    }
    assert_eq!(got[1]["sentences"], 2);
    assert_eq!(got[1]["outside_vocabulary"], 1);
    assert_eq!(got[2]["predictions"], 0);
}

fn check_info(srv: &Server, model: bool) {
    let (st, text) = srv.call("GET", "/info", None);
    assert_eq!(st, 200);
    // The keys come in the order the API table of src/serve/mod.rs lists
    // them (serde_json's map would sort them by name).
    let at: Vec<usize> = [
        "source",
        "order",
        "method",
        "methods",
        "vocabulary_size",
        "ngrams",
    ]
    .iter()
    .map(|k| {
        text.find(&format!("\"{k}\":"))
            .unwrap_or_else(|| panic!("no {k}: {text}"))
    })
    .collect();
    assert!(
        at.windows(2).all(|w| w[0] < w[1]),
        "/info key order: {text}"
    );
    let got = parse(&text);
    let (store, m) = fixture();
    let stats = parse(&run_ok(&["stats", "--json", "--store", store.to_str().unwrap()]).stdout);
    // Source of truth: `quern stats --json` of the store the model was
    // frozen from, and `quern check-model` for what the model holds.
    assert_eq!(got["order"], stats["settings"]["order"]);
    assert_eq!(got["vocabulary_size"], stats["totals"]["vocabulary"]);
    let per_order: Vec<Value> = stats["orders"]
        .as_array()
        .unwrap()
        .iter()
        .map(|o| o["ngrams"].clone())
        .collect();
    if model {
        assert_eq!(got["store_ngrams"], Value::Array(per_order));
        let held: u64 = got["ngrams"]
            .as_array()
            .unwrap()
            .iter()
            .map(|n| n.as_u64().unwrap())
            .sum();
        let verify = run_ok(&["check-model", m.to_str().unwrap()]);
        let said = thousands(held);
        assert!(
            verify.stdout.contains(&format!("{said} n-grams"))
                || verify.stderr.contains(&format!("{said} n-grams")),
            "{held} n-grams: {}{}",
            verify.stdout,
            verify.stderr
        );
        assert_eq!(got["source"], "model");
        assert_eq!(got["method"], "mkn");
        assert_eq!(got["path"], m.display().to_string());
    } else {
        assert_eq!(got["ngrams"], Value::Array(per_order));
        assert_eq!(got["source"], "store");
        assert_eq!(got["methods"].as_array().unwrap().len(), 9);
    }
}

#[test]
fn store_endpoints_equal_the_cli() {
    let (store, _) = fixture();
    let srv = Server::start(&strs(&source_args(false)));
    assert_eq!(
        srv.call("GET", "/health", None),
        (200, r#"{"ok":true}"#.to_string())
    );
    check_info(&srv, false);
    check_prob(&srv, false);
    check_next(&srv, false, &["mkn", "katz", "witten-bell", "stupid"]);
    check_score(&srv, false, store.parent().unwrap());

    // /ngrams: `quern ngrams --json` of the same words.
    for words in ["I am", "", "of the"] {
        let mut a = vec![
            "ngrams",
            "--json",
            "--limit",
            "15",
            "--store",
            store.to_str().unwrap(),
            "--",
        ];
        a.extend(words.split_whitespace());
        let want = parse(&run_ok(&a).stdout);
        let (st, got) = srv.post("/ngrams", &json!({ "words": words, "limit": 15 }));
        assert_eq!(st, 200, "{got}");
        assert_eq!(got["order"], want["order"]);
        let strip = |v: &Value| -> Vec<Value> {
            v.as_array()
                .unwrap()
                .iter()
                .map(|g| json!([g["words"], g["count"], g["continuation"]]))
                .collect()
        };
        assert_eq!(
            strip(&got["ngrams"]),
            strip(&want["ngrams"]),
            "/ngrams {words:?}"
        );
        assert_eq!(got["more"], json!(!want["next"].is_null()));
    }
    // Paging: the endpoint's pages (`after` = the page before's `next`) are
    // `quern ngrams --json --after` pages, item for item and cursor for
    // cursor, to the last page; together they are every n-gram once.
    for (words, order) in [("of", None), ("I", Some(3)), ("I am", Some(3))] {
        let ngrams_args = |limit: usize, after: Option<&str>| {
            let mut a = vec!["ngrams".to_string(), "--json".into(), "--limit".into()];
            a.push(limit.to_string());
            a.extend(["--store".into(), store.display().to_string()]);
            if let Some(k) = order {
                a.extend(["--order".into(), k.to_string()]);
            }
            if let Some(c) = after {
                a.extend(["--after".into(), c.to_string()]);
            }
            a.push("--".into());
            a.extend(words.split_whitespace().map(String::from));
            a
        };
        let all = parse(&run_ok(&ngrams_args(1_000_000, None)).stdout);
        assert!(all["next"].is_null());
        let total = all["ngrams"].as_array().unwrap().len();
        assert!(total >= 3, "{words:?}: {total} n-grams");
        // About four pages (at most 1000 a page), the last one short.
        let limit = total.div_ceil(4).min(1000);
        let mut cursor = Value::Null;
        let mut pages = Vec::new();
        loop {
            let want = parse(&run_ok(&ngrams_args(limit, cursor.as_str())).stdout);
            let mut body = json!({ "words": words, "limit": limit, "after": cursor });
            if let Some(k) = order {
                body["order"] = json!(k);
            }
            let (st, got) = srv.post("/ngrams", &body);
            assert_eq!(st, 200, "{body}: {got}");
            assert_eq!(got["ngrams"], want["ngrams"], "{body}");
            assert_eq!(got["next"], want["next"], "{body}");
            assert_eq!(got["order"], want["order"], "{body}");
            assert_eq!(got["more"], json!(!got["next"].is_null()));
            pages.extend(got["ngrams"].as_array().unwrap().iter().cloned());
            cursor = got["next"].clone();
            if cursor.is_null() {
                break;
            }
        }
        assert_eq!(
            Value::Array(pages),
            all["ngrams"],
            "{words:?}: the pages joined"
        );
    }

    // /stats.svg: the figure `quern stats --plot` draws, byte for byte.
    let svg = store.parent().unwrap().join("stats-cli.svg");
    run_ok(&[
        "stats",
        "--store",
        store.to_str().unwrap(),
        "--plot",
        svg.to_str().unwrap(),
    ]);
    let (st, got) = srv.call("GET", "/stats.svg", None);
    assert_eq!(st, 200);
    assert!(got.starts_with("<svg"), "{}", &got[..got.len().min(200)]);
    assert_eq!(
        got,
        std::fs::read_to_string(&svg).unwrap(),
        "/stats.svg against stats --plot"
    );

    let (st, page) = srv.call("GET", "/", None);
    assert_eq!(st, 200);
    assert!(page.contains("<title>quern</title>") && page.contains("/next"));
    let (status, err) = srv.terminate();
    assert!(status.success(), "{status:?}\n{err}");
}

#[test]
fn model_endpoints_equal_the_cli() {
    let (store, _) = fixture();
    let srv = Server::start(&strs(&source_args(true)));
    check_info(&srv, true);
    check_prob(&srv, true);
    check_next(&srv, true, &["mkn"]);
    check_score(&srv, true, store.parent().unwrap());
    // What a model cannot show: counts and the statistics figure.
    let (st, got) = srv.post("/ngrams", &json!({ "words": "I am" }));
    assert_eq!(st, 400);
    assert!(
        got["error"].as_str().unwrap().contains("not counts"),
        "{got}"
    );
    let (st, got) = srv.call("GET", "/stats.svg", None);
    assert_eq!(st, 404);
    assert!(parse(&got)["error"]
        .as_str()
        .unwrap()
        .contains("needs a store"));
    let (st, got) = srv.post("/next", &json!({ "context": "I am", "method": "katz" }));
    assert_eq!(st, 400);
    assert!(
        got["error"].as_str().unwrap().contains("frozen with mkn"),
        "{got}"
    );
    let (status, err) = srv.terminate();
    assert!(status.success(), "{status:?}\n{err}");
}

#[test]
fn bad_requests_get_4xx_json_errors() {
    let mut a = source_args(false);
    a.extend(["--max-request-bytes".into(), "4KiB".into()]);
    let srv = Server::start(&strs(&a));
    let big = json!({ "texts": ["word ".repeat(2000)] }).to_string();
    let cases: Vec<(&str, &str, Option<&str>, u16, &str)> = vec![
        ("POST", "/prob", Some("not json"), 400, "bad request body"),
        ("POST", "/prob", Some(""), 400, "bad request body"),
        (
            "POST",
            "/prob",
            Some(r#"{"context": "I am"}"#),
            400,
            "missing field `word`",
        ),
        (
            "POST",
            "/prob",
            Some(r#"{"context": 3, "word": "x"}"#),
            400,
            "invalid type",
        ),
        (
            "POST",
            "/prob",
            Some(r#"{"word": "x", "cotnext": "a"}"#),
            400,
            "unknown field `cotnext`",
        ),
        (
            "POST",
            "/prob",
            Some(r#"{"word": "two words"}"#),
            400,
            "not one word",
        ),
        (
            "POST",
            "/prob",
            Some(r#"{"word": "x", "method": "nope"}"#),
            400,
            "unknown method",
        ),
        ("POST", "/next", Some(r#"{"top": 0}"#), 400, "top: 0"),
        (
            "POST",
            "/next",
            Some(r#"{"top": "ten"}"#),
            400,
            "invalid type",
        ),
        (
            "POST",
            "/next",
            Some(r#"{"prefix": "a b"}"#),
            400,
            "no spaces",
        ),
        ("POST", "/next", Some("[1, 2]"), 400, "bad request body"),
        (
            "POST",
            "/score",
            Some(r#"{"texts": "one"}"#),
            400,
            "invalid type",
        ),
        ("POST", "/score", Some(&big), 413, "larger than the limit"),
        (
            "POST",
            "/ngrams",
            Some(r#"{"words": "I", "order": 9}"#),
            400,
            "order 9",
        ),
        (
            "POST",
            "/ngrams",
            Some(r#"{"words": "I", "after": "zz"}"#),
            400,
            "is not a cursor",
        ),
        (
            "POST",
            "/ngrams",
            Some(r#"{"words": "I", "after": "0000000000000001"}"#),
            400,
            "does not belong to this prefix",
        ),
        ("GET", "/prob", None, 405, "does not take GET"),
        ("POST", "/health", Some("{}"), 405, "does not take POST"),
        ("GET", "/nowhere", None, 404, "no such endpoint"),
    ];
    for (method, path, body, want, says) in cases {
        let (st, text) = srv.call(method, path, body);
        assert_eq!(st, want, "{method} {path} {body:?}: {text}");
        let v = parse(&text);
        let e = v["error"]
            .as_str()
            .unwrap_or_else(|| panic!("no error field: {text}"));
        assert!(
            e.contains(says),
            "{method} {path} {body:?}: {e:?} should say {says:?}"
        );
    }
    // The service still answers after all that.
    assert_eq!(srv.call("GET", "/health", None).0, 200);
    let (status, err) = srv.terminate();
    assert!(status.success(), "{status:?}\n{err}");
}
