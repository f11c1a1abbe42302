//! Frozen model files: damaged ones refused naming the file (on open or by
//! `quern check-model`, with the sections read from the layout documented in
//! `quern::model`), and the command line's `--model` answering like
//! `--store` (the store's estimator is the source of truth, within the
//! model's stored precision).

use std::path::Path;
use std::process::Command;

use quern::model::{freeze, FreezeOptions, Model};
use quern::query::{Estimator, Method, Params};
use quern::store::Store;

use crate::common::bin;
use crate::freeze::{bound, close, scratch};
use crate::query_fixtures::train3;

fn verify_cli(path: &Path) -> (bool, String) {
    let out = Command::new(bin())
        .args(["check-model"])
        .arg(path)
        .output()
        .unwrap();
    (
        out.status.success(),
        String::from_utf8_lossy(&out.stderr).into_owned() + &String::from_utf8_lossy(&out.stdout),
    )
}

/// Truncated and damaged model files are refused with an error naming the
/// file: on open (header, trailer, directory, metadata, vocabulary), or by
/// `check-model` (the n-gram arrays).
#[test]
fn damaged_models_refused() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("damage");
    let est = Estimator::new(&store, Method::Kn, Params::default()).unwrap();
    // A model of 32-bit values, and one whose q and β are codes into bins
    // (the sections of format 2 that only quantized models have).
    let coded = FreezeOptions {
        bits: Some(8),
        weight_bits: Some(8),
        ..Default::default()
    };
    for (name, opts) in [("good", FreezeOptions::default()), ("coded", coded)] {
        damaged_model_refused(&est, &dir, name, &opts);
    }
}

/// Freezes `est` with `opts`, then damages the file in every way the test
/// above lists and checks each is refused, naming the file.
fn damaged_model_refused(est: &Estimator<'_>, dir: &Path, name: &str, opts: &FreezeOptions) {
    let good = dir.join(format!("{name}.model"));
    freeze(est, &good, opts).unwrap();
    let bytes = std::fs::read(&good).unwrap();
    let (ok, text) = verify_cli(&good);
    assert!(ok, "{text}");
    let model = Model::open(&good).unwrap();
    let arrays: Vec<(u32, u64, u64)> = model_sections(&bytes);
    drop(model);
    let mut cases: Vec<(String, Vec<u8>, bool)> = Vec::new();
    for cut in [0, 7, 16, 100, bytes.len() / 2, bytes.len() - 1] {
        cases.push((format!("truncated to {cut}"), bytes[..cut].to_vec(), true));
    }
    let flip = |at: usize| {
        let mut b = bytes.clone();
        b[at] ^= 0x20;
        b
    };
    cases.push(("magic".into(), flip(2), true));
    cases.push(("version".into(), flip(8), true));
    cases.push(("trailer".into(), flip(bytes.len() - 3), true));
    cases.push(("directory".into(), flip(bytes.len() - 40), true));
    for (i, &(kind, off, len)) in arrays.iter().enumerate() {
        // The small sections (kinds 1 to 5: metadata, word ids, offsets
        // and text, ranking) are checked on open, wherever they lie in the
        // file (a reduced model writes its metadata last); the n-gram
        // arrays by check-model.
        cases.push((
            format!("section {i} (kind {kind})"),
            flip((off + len / 2) as usize),
            (1..=5).contains(&kind),
        ));
    }
    assert_eq!(
        arrays.iter().filter(|a| (1..=5).contains(&a.0)).count(),
        5,
        "{name}: the five small sections"
    );
    for (what, b, on_open) in cases {
        let p = dir.join("bad.model");
        std::fs::write(&p, &b).unwrap();
        let opened = Model::open(&p);
        if on_open {
            let e = opened
                .err()
                .unwrap_or_else(|| panic!("{name}, {what}: opened"))
                .to_string();
            assert!(e.contains(&p.display().to_string()), "{what}: {e}");
        }
        let (ok, text) = verify_cli(&p);
        assert!(!ok, "{name}, {what}: check-model passed a damaged file");
        assert!(text.contains(&p.display().to_string()), "{what}: {text}");
    }
}

/// (kind, offset, length) of every section, from the directory (read here
/// from the layout documented in `quern::model`, independently of the
/// reader).
fn model_sections(b: &[u8]) -> Vec<(u32, u64, u64)> {
    let u64_at = |i: usize| u64::from_le_bytes(b[i..i + 8].try_into().unwrap());
    let u32_at = |i: usize| u32::from_le_bytes(b[i..i + 4].try_into().unwrap());
    let t = b.len() - 32;
    let dir = u64_at(t) as usize;
    let count = u64_at(t + 8) as usize;
    (0..count)
        .map(|i| {
            let e = dir + 32 * i;
            (u32_at(e), u64_at(e + 8), u64_at(e + 16))
        })
        .filter(|&(_, _, len)| len > 0)
        .collect()
}

fn run_json(args: &[&str], stdin: Option<&str>) -> Vec<serde_json::Value> {
    use std::io::Write;
    let mut c = Command::new(bin());
    c.args(args)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped());
    let mut child = c.spawn().unwrap();
    child
        .stdin
        .take()
        .unwrap()
        .write_all(stdin.unwrap_or("").as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    if text.trim_start().starts_with('{') && text.lines().count() > 1 && text.contains("\n  ") {
        vec![serde_json::from_str(&text).unwrap()]
    } else {
        text.lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect()
    }
}

/// `prob`, `next` and `score` with `--model` in place of `--store` give the
/// same `--json` fields with the same values (within the stored precision;
/// times apart).
#[test]
fn cli_model_answers_like_the_store() {
    let store = train3().display().to_string();
    let dir = scratch("cli");
    let model = dir.join("kn.qm").display().to_string();
    let st = Command::new(bin())
        .args([
            "freeze", "--store", &store, "--method", "kn", "--out", &model,
        ])
        .output()
        .unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    let held = crate::query_fixtures::heldout_path().display().to_string();
    let lines: String = std::fs::read_to_string(&held)
        .unwrap()
        .lines()
        .filter(|l| !l.trim().is_empty())
        .take(300)
        .flat_map(|l| {
            let w: Vec<&str> = l.split_whitespace().collect();
            (1..=w.len()).map(move |i| w[i.saturating_sub(3)..i].join(" ") + "\n")
        })
        .collect();
    let a = run_json(
        &["prob", "--store", &store, "--method", "kn", "--json"],
        Some(&lines),
    );
    let b = run_json(&["prob", "--model", &model, "--json"], Some(&lines));
    // Read into memory instead of mapped: the same output.
    let loaded = run_json(
        &["prob", "--model", &model, "--load-model", "--json"],
        Some(&lines),
    );
    assert_eq!(b, loaded, "--load-model");
    let st = Command::new(bin())
        .args(["prob", "--store", &store, "--load-model", "a b"])
        .output()
        .unwrap();
    assert!(!st.status.success());
    assert!(
        String::from_utf8_lossy(&st.stderr).contains("--load-model reads a model file"),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    assert_eq!(a.len(), b.len());
    assert!(a.len() > 1000);
    let tol = bound(3);
    for (x, y) in a.iter().zip(&b) {
        let keys = |v: &serde_json::Value| -> Vec<String> {
            v.as_object().unwrap().keys().cloned().collect()
        };
        assert_eq!(keys(x), keys(y));
        for k in ["words", "matched"] {
            assert_eq!(x[k], y[k], "{k}: {x} vs {y}");
        }
        let (p, q) = (
            x["probability"].as_f64().unwrap(),
            y["probability"].as_f64().unwrap(),
        );
        assert!(close(p, q, tol), "{x} vs {y}");
    }
    for ctx in ["<s>", "Mr.", "she was", "zzqxw-not-in-austen"] {
        let x = &run_json(
            &[
                "next", "--store", &store, "--method", "kn", "--json", "--top", "5", ctx,
            ],
            None,
        )[0];
        let y = &run_json(
            &["next", "--model", &model, "--json", "--top", "5", ctx],
            None,
        )[0];
        let keys = |v: &serde_json::Value| -> Vec<String> {
            v.as_object().unwrap().keys().cloned().collect()
        };
        assert_eq!(keys(x), keys(y));
        assert_eq!(x["context"], y["context"]);
        for (i, j) in x["words"]
            .as_array()
            .unwrap()
            .iter()
            .zip(y["words"].as_array().unwrap())
        {
            assert_eq!(i["word"], j["word"], "{ctx}");
            assert!(close(
                i["probability"].as_f64().unwrap(),
                j["probability"].as_f64().unwrap(),
                tol
            ));
        }
    }
    let x = &run_json(
        &[
            "score", "--store", &store, "--method", "kn", "--json", &held,
        ],
        None,
    )[0];
    let y = &run_json(&["score", "--model", &model, "--json", &held], None)[0];
    let mut kx: Vec<&String> = x.as_object().unwrap().keys().collect();
    let mut ky: Vec<&String> = y.as_object().unwrap().keys().collect();
    kx.sort();
    ky.sort();
    assert_eq!(kx, ky);
    for k in [
        "sentences",
        "predictions",
        "outside_vocabulary",
        "probability_zero",
        "method",
    ] {
        assert_eq!(x[k], y[k], "{k}");
    }
    let (p, q) = (
        x["perplexity"].as_f64().unwrap(),
        y["perplexity"].as_f64().unwrap(),
    );
    assert!(close(p, q, 1e-6), "perplexity {p} vs {q}");
    // A method other than the model's is refused.
    let st = Command::new(bin())
        .args(["prob", "--model", &model, "--method", "mkn", "she", "was"])
        .output()
        .unwrap();
    assert!(!st.status.success());
    assert!(String::from_utf8_lossy(&st.stderr).contains("frozen with kn"));
}
