//! The page of `quern serve` in a real browser: Debian's `chromium`,
//! headless (scripts/setup installs it), loads the page with a URL query
//! that fills the form, runs its JavaScript, and dumps the DOM; the words
//! it shows for each method must be the CLI's (`next --json`), in order,
//! with the same probabilities. Without chromium the test fails: it is
//! never skipped quietly.

use std::path::PathBuf;
use std::process::{Command, Stdio};

use serde_json::Value;

use crate::common::wait_timeout;
use crate::serve::{cli_next, source_args, strs, Server};

/// The browser: `chromium` (Debian) or `chromium-browser`.
pub fn chromium() -> String {
    for name in ["chromium", "chromium-browser"] {
        if Command::new(name)
            .arg("--version")
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .status()
            .is_ok_and(|s| s.success())
        {
            return name.to_string();
        }
    }
    panic!(
        "chromium is not installed: run scripts/setup (the page is tested in headless Chromium)"
    );
}

/// The DOM of `url` after its scripts ran (headless, loopback only).
fn dump_dom(url: &str, profile: &str) -> String {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(format!("chromium-{profile}"));
    let _ = std::fs::remove_dir_all(&dir);
    let mut child = Command::new(chromium())
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-extensions",
            "--virtual-time-budget=20000",
        ])
        .arg(format!("--user-data-dir={}", dir.display()))
        .args(["--dump-dom", url])
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .expect("starting chromium");
    let mut out = child.stdout.take().unwrap();
    let reader = std::thread::spawn(move || {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut out, &mut s).unwrap();
        s
    });
    let st = wait_timeout(&mut child, 120).expect("chromium did not finish within 120 s");
    assert!(st.success(), "chromium failed: {st:?}");
    reader.join().unwrap()
}

fn unescape(s: &str) -> String {
    s.replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&quot;", "\"")
        .replace("&#39;", "'")
        .replace("&amp;", "&")
}

/// Per method shown: its words and their probabilities, in order.
fn shown(dom: &str) -> Vec<(String, Vec<(String, f64)>)> {
    let mut out = Vec::new();
    for part in dom
        .split("<section class=\"method\" data-method=\"")
        .skip(1)
    {
        let method = part[..part.find('"').unwrap()].to_string();
        let part = &part[..part.find("</section>").unwrap()];
        let mut words = Vec::new();
        for cell in part.split("<td class=\"word\">").skip(1) {
            let w = unescape(&cell[..cell.find("</td>").unwrap()]);
            let p = cell.split("data-p=\"").nth(1).unwrap();
            let shown = &p[p.find('>').unwrap() + 1..p.find("</td>").unwrap()];
            let p: f64 = p[..p.find('"').unwrap()].parse().unwrap();
            // The number the reader sees is the probability written as
            // the page's script promises (4 decimals from 0.001, else 3
            // significant digits), by Rust's formatting here.
            let want = if p >= 0.001 {
                format!("{p:.4}")
            } else {
                format!("{p:.2e}")
            };
            assert_eq!(shown, want, "{method}: {w}: the number shown for {p}");
            words.push((w, p));
        }
        out.push((method, words));
    }
    out
}

/// The rows of the page's n-gram list: words, count, continuation.
fn ngram_rows(dom: &str) -> Vec<(String, String, String)> {
    let cell = |s: &str, class: &str| -> String {
        let tag = format!("<td class=\"{class}\">");
        let s = &s[s.find(&tag).unwrap() + tag.len()..];
        unescape(&s[..s.find("</td>").unwrap()])
    };
    dom.split("<td class=\"ngram\">")
        .skip(1)
        .map(|r| {
            let r = format!("<td class=\"ngram\">{r}");
            (cell(&r, "ngram"), cell(&r, "count"), cell(&r, "cont"))
        })
        .collect()
}

fn cli_words(v: &Value) -> Vec<(String, f64)> {
    v["words"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| {
            let p = w.get("probability").or(w.get("score")).unwrap();
            (w["word"].as_str().unwrap().to_string(), p.as_f64().unwrap())
        })
        .collect()
}

/// The same words in the same order, with the same probabilities: the
/// numbers went through JSON text, JavaScript and back, and serde_json
/// parses decimals without correct rounding (it can be 1 ulp off), so they
/// must agree to 1e-15 relative.
fn same(got: &[(String, f64)], want: &[(String, f64)], what: &str) {
    let words = |v: &[(String, f64)]| v.iter().map(|x| x.0.clone()).collect::<Vec<_>>();
    assert_eq!(words(got), words(want), "{what}: the words");
    for ((w, g), (_, x)) in got.iter().zip(want) {
        assert!(
            (g - x).abs() <= 1e-15 * x.abs(),
            "{what}: {w}: {g} on the page, {x} from the CLI"
        );
    }
}

fn encode(s: &str) -> String {
    s.bytes()
        .map(|b| match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'-' | b'_' | b'.' => (b as char).to_string(),
            _ => format!("%{b:02X}"),
        })
        .collect()
}

#[test]
fn page_in_chromium_shows_the_clis_words() {
    let browser = chromium();
    let srv = Server::start(&strs(&source_args(false)));
    let context = "she could not";
    // The n-gram list's words: the 3-grams that begin with them.
    let listed = "she could";
    // In the order the page lists methods (the order of /info).
    let methods = ["mkn", "witten-bell", "katz"];
    let url = format!(
        "http://{}/?context={}&methods={}&top=10&ngrams={}",
        srv.addr,
        encode(context),
        methods.join(","),
        encode(listed)
    );
    let dom = dump_dom(&url, "store");
    assert!(
        dom.contains("data-ready=\"1\""),
        "{browser}: the page's scripts did not finish:\n{dom}"
    );
    let got = shown(&dom);
    assert_eq!(
        got.iter().map(|g| g.0.as_str()).collect::<Vec<_>>(),
        methods
    );
    for (m, words) in &got {
        // Source of truth: `quern next --json --method M` for the context.
        let want = cli_words(&cli_next(false, Some(m), context, 10));
        same(words, &want, m);
    }
    // The figure and the n-gram list are on the page too: every row of the
    // list is an n-gram beginning with the words asked, with the count and
    // continuation count `quern dump` gives it (dump is checked against
    // the reference counter in gutenberg.rs).
    assert!(dom.contains("src=\"/stats.svg\""));
    let dump = crate::common::dump_map(&crate::serve::fixture().0);
    let rows = ngram_rows(&dom);
    assert!(!rows.is_empty(), "no n-gram listed:\n{dom}");
    let mut seen = std::collections::HashSet::new();
    for (w, c, x) in &rows {
        assert!(
            w.starts_with(&format!("{listed} ")),
            "{w} listed for {listed:?}"
        );
        assert!(seen.insert(w.clone()), "{w} listed twice");
        let (count, cont) = dump
            .get(w)
            .unwrap_or_else(|| panic!("{w} is not in the store's dump"));
        assert_eq!(c, &count.to_string(), "{w}: count");
        assert_eq!(
            x,
            &cont.map_or("-".to_string(), |v| v.to_string()),
            "{w}: continuation"
        );
    }
    let all = dump
        .keys()
        .filter(|k| k.starts_with(&format!("{listed} ")) && k.split(' ').count() == 3)
        .count();
    assert_eq!(rows.len(), all.min(12), "the n-grams listed, at most 12");

    // A word start: the page's column equals the service's /next (checked
    // against the CLI's brute force in serve.rs).
    let url = format!(
        "http://{}/?context={}&prefix=he&methods=mkn&top=5",
        srv.addr,
        encode(context)
    );
    let dom = dump_dom(&url, "store-prefix");
    let got = shown(&dom);
    let (_, api) = srv.post(
        "/next",
        &serde_json::json!({ "context": context, "prefix": "he", "top": 5 }),
    );
    let want: Vec<(String, f64)> = cli_words(&api);
    assert_eq!(got.len(), 1);
    assert_eq!(got[0].0, "mkn");
    same(&got[0].1, &want, "mkn with a word start");
    let (st, err) = srv.terminate();
    assert!(st.success(), "{err}");
}

#[test]
fn page_in_chromium_for_a_model() {
    chromium();
    let srv = Server::start(&strs(&source_args(true)));
    let context = "I am";
    let url = format!("http://{}/?context={}", srv.addr, encode(context));
    let dom = dump_dom(&url, "model");
    assert!(
        dom.contains("data-ready=\"1\""),
        "the page's scripts did not finish:\n{dom}"
    );
    let got = shown(&dom);
    let want = cli_words(&cli_next(true, None, context, 10));
    assert_eq!(got.len(), 1);
    assert_eq!(got[0].0, "mkn");
    same(&got[0].1, &want, "the model's column");
    // What a model cannot show is said, not hidden.
    assert!(dom.contains("not counts"), "no word on the missing counts");
    assert!(dom.contains("no statistics figure"));
    let (st, err) = srv.terminate();
    assert!(st.success(), "{err}");
}

#[test]
fn page_behind_a_token_asks_for_it_and_keeps_it_out_of_requests_paths() {
    chromium();
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("serve-page-token");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let token = "page-token-7f3a";
    let tf = dir.join("token");
    std::fs::write(&tf, token).unwrap();
    let mut a = source_args(true);
    a.extend(["--token-file".into(), tf.display().to_string()]);
    let srv = Server::start(&strs(&a));
    let context = "I am";
    // Without the token: the page loads (it is open) and shows the form.
    let url = format!("http://{}/?context={}", srv.addr, encode(context));
    let dom = dump_dom(&url, "token-none");
    assert!(
        dom.contains("<form id=\"token-form\" autocomplete=\"off\">"),
        "the token form is not shown:\n{dom}"
    );
    assert!(!dom.contains("data-ready=\"1\""), "{dom}");
    // With the token in the address's fragment (never sent to the server):
    // the CLI's words, as without a token.
    let dom = dump_dom(&format!("{url}#token={token}"), "token-given");
    assert!(
        dom.contains("data-ready=\"1\""),
        "the page's scripts did not finish:\n{dom}"
    );
    let got = shown(&dom);
    let want = cli_words(&cli_next(true, None, context, 10));
    assert_eq!(got.len(), 1);
    same(&got[0].1, &want, "the model's column behind the token");
    let (st, err) = srv.terminate();
    assert!(st.success(), "{err}");
    // The access log saw 401s first, then answers; never the token.
    assert!(err.contains(" 401 "), "{err}");
    assert!(err.contains("\"/next\" 200"), "{err}");
    assert!(
        !err.contains(token),
        "the token reached the server's log:\n{err}"
    );
}
