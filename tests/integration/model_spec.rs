//! The model file's specification (DEVELOPERS.md, "The model file, byte
//! by byte") is complete: `model_reader.py`, written from it alone with
//! Python's standard library, opens models frozen from the Gutenberg
//! fixtures and answers `prob` queries exactly as `quern prob --model M
//! --json` does (the source of truth being the independent reader: same
//! probability, log10 and matched length for every query). The models
//! cover order 3 and 5, `mkn`, `katz` with back-off skips, `stupid`
//! (scores, β0 = α) and a pruned model with quantized probabilities and
//! back-off weights (coded sections, sections in the reduced order); the
//! queries cover words outside V, contexts longer than the order, `<s>`
//! and `</s>`, and back-off from every level.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use serde_json::Value;

use crate::common::{bin, manifest_dir, python3, run_ok, run_with_stdin};
use crate::query_fixtures::{heldout_path, train3, train5, train_inputs};

fn scratch() -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("model-spec");
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// splitmix64 (Steele, Lea & Flood 2014), for reproducible queries.
fn next(s: &mut u64) -> u64 {
    *s = s.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *s;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Query lines: windows of 1 to 7 words of the held-out novel and of a
/// training novel (seen and unseen contexts, longer than the order), some
/// with the last word replaced by another word of the text (back-off from
/// a kept context), by a word outside V, or with a context word outside
/// V; some starting with `<s>` or ending with `</s>`.
fn queries(count: usize) -> String {
    let mut words: Vec<String> = Vec::new();
    for p in [heldout_path(), train_inputs()[0].clone()] {
        let text = std::fs::read_to_string(&p).unwrap();
        words.extend(text.split_whitespace().take(60_000).map(str::to_string));
    }
    let mut s = 11u64;
    let mut out = String::new();
    for i in 0..count {
        let len = 1 + (next(&mut s) % 7) as usize;
        let a = (next(&mut s) % (words.len() - len) as u64) as usize;
        let mut q: Vec<String> = words[a..a + len].to_vec();
        match next(&mut s) % 10 {
            0 => *q.last_mut().unwrap() = format!("qqzzx{i}"),
            1 => q[0] = "zzqqy".into(),
            2 | 3 => {
                *q.last_mut().unwrap() = words[(next(&mut s) % words.len() as u64) as usize].clone()
            }
            4 => q.insert(0, "<s>".into()),
            5 => q.push("</s>".into()),
            _ => {}
        }
        out.push_str(&q.join(" "));
        out.push('\n');
    }
    out
}

/// Runs the independent reader on `model` with `input`: its answers and
/// its statistics line.
fn reader(model: &Path, input: &str) -> (Vec<Value>, Value) {
    let script = manifest_dir().join("tests/integration/model_reader.py");
    let mut child = Command::new(python3())
        .arg(&script)
        .arg(model)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("run python3");
    let mut stdin = child.stdin.take().unwrap();
    let input = input.to_string();
    let feed = std::thread::spawn(move || stdin.write_all(input.as_bytes()));
    let out = child.wait_with_output().unwrap();
    feed.join().unwrap().unwrap();
    assert!(
        out.status.success(),
        "model_reader.py failed on {}: {}",
        model.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    let answers = String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let stats = String::from_utf8(out.stderr).unwrap();
    let stats = serde_json::from_str(stats.lines().last().unwrap()).unwrap();
    (answers, stats)
}

/// Freezes `store` with `args` into `name`, and compares the reader's
/// answers with the CLI's on `count` queries: every field equal. Returns
/// the reader's statistics and how many queries matched each length.
fn check(store: &Path, name: &str, args: &[&str], count: usize) -> (Value, Vec<usize>) {
    let model = scratch().join(name);
    let mut a = vec!["freeze", "--store", store.to_str().unwrap()];
    a.extend(["--out", model.to_str().unwrap()]);
    a.extend(args);
    run_ok(&a);
    let input = queries(count);
    let cli = run_with_stdin(
        &["prob", "--model", model.to_str().unwrap(), "--json"],
        input.as_bytes(),
    );
    cli.assert_success();
    let want: Vec<Value> = cli
        .stdout
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let (got, stats) = reader(&model, &input);
    assert_eq!(want.len(), count, "{name}: the CLI's answers");
    assert_eq!(got.len(), count, "{name}: the reader's answers");
    let mut matched = vec![0usize; 8];
    for (i, (w, g)) in want.iter().zip(&got).enumerate() {
        // Exact: the reader multiplies the same stored f32 values in the
        // order the specification gives.
        assert_eq!(w, g, "{name}: query {i}");
        matched[w["matched"].as_u64().unwrap() as usize] += 1;
    }
    (stats, matched)
}

#[test]
fn independent_reader_answers_as_the_cli() {
    let _ = bin();
    let (s, m) = check(train3(), "mkn3.model", &[], 3000);
    assert_eq!(s["value_bits"], 32);
    // Words outside V, and matches of every length 1..=3.
    assert!(
        m[0] > 100 && m[1] > 100 && m[2] > 100 && m[3] > 100,
        "{m:?}"
    );

    let (s, m) = check(train5(), "mkn5.model", &[], 3000);
    assert!(m[4] > 20 && m[5] > 20, "{m:?} {s}");

    let (s, _) = check(train3(), "katz3.model", &["--method", "katz"], 6000);
    // The walk passed a context that skips a level (the Skips section).
    assert!(s["skipped"].as_u64().unwrap() > 0, "{s}");

    check(train3(), "stupid3.model", &["--method", "stupid"], 2000);

    let reduced = [
        "--relative-entropy",
        "1e-7",
        "--bits",
        "8",
        "--weight-bits",
        "6",
    ];
    let (s, m) = check(train5(), "pruned-q8.model", &reduced, 3000);
    assert_eq!(s["value_bits"], 8);
    assert!(m[3] > 20, "{m:?}");
}
