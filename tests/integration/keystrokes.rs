//! `quern keystrokes` against the definition in README ("Keystroke
//! savings"): a tiny case worked by hand from that definition and the
//! maximum-likelihood bigram estimate (count(h w) / count(h), Jurafsky &
//! Martin, "Speech and Language Processing", ch. 3; from memory), and an
//! independent Python implementation (`keystrokes_check.py`, standard
//! library only) that plays the definition over batch `next --prefix`
//! answers, on an excerpt of fixtures/gutenberg/persuasion.txt, for a
//! store and a frozen model.

use std::path::PathBuf;
use std::process::Command;

use crate::common::{bin, gutenberg_dir, ingest_ok, python3, run_ok};
use crate::query_fixtures::train3;

fn scratch(name: &str) -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
        .join("keystrokes")
        .join(name);
    if d.exists() {
        std::fs::remove_dir_all(&d).unwrap();
    }
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn report(args: &[&str]) -> serde_json::Value {
    let mut a = vec!["keystrokes", "--json"];
    a.extend_from_slice(args);
    serde_json::from_str(&run_ok(&a).stdout).unwrap()
}

/// Training "x bat / x bat / x cat", order 2, mle: P(x | <s>) = 1,
/// P(bat | x) = 2/3, P(cat | x) = 1/3. Held out "x cat / x dog" (dog
/// outside V). Without prediction: (1+1) + (3+1) + (1+1) + (3+1) = 12.
/// Top 1: each x is shown before its first character (cost 1); cat is not
/// (bat is first), then after "c" it is the only word (cost 1 + 1 = 2);
/// dog costs 4. With = 1 + 2 + 1 + 4 = 8, savings 1 − 8/12 = 1/3, before
/// the first character 2 of 4 words, characters typed (0 + 1 + 0 + 3)/4.
/// Top 2: cat is shown at once: with = 1 + 1 + 1 + 4 = 7, savings 5/12,
/// 3 of 4 before the first character, (0 + 0 + 0 + 3)/4 characters.
#[test]
fn tiny_case_by_hand() {
    let d = scratch("tiny");
    std::fs::write(d.join("train.txt"), "x bat\nx bat\nx cat\n").unwrap();
    std::fs::write(d.join("held.txt"), "x cat\nx dog\n").unwrap();
    let store = d.join("store");
    ingest_ok(&store, &["--order", "2", "--quiet"], &[d.join("train.txt")]);
    let s = store.to_str().unwrap();
    let held = d.join("held.txt");
    let r = report(&[
        "--store",
        s,
        "--method",
        "mle",
        "--top",
        "1,2",
        held.to_str().unwrap(),
    ]);
    assert_eq!(r["words"], 4);
    assert_eq!(r["outside_vocabulary"], 1);
    assert_eq!(r["keystrokes_without"], 12);
    let want = [(1, 8, 1.0 / 3.0, 0.5, 1.0), (2, 7, 5.0 / 12.0, 0.75, 0.75)];
    for (x, (k, keys, sav, before, chars)) in r["results"].as_array().unwrap().iter().zip(want) {
        assert_eq!(x["top"], k);
        assert_eq!(x["keystrokes"], keys);
        assert!((x["savings"].as_f64().unwrap() - sav).abs() < 1e-12);
        assert!((x["before_first_char"].as_f64().unwrap() - before).abs() < 1e-12);
        assert!((x["chars_per_word"].as_f64().unwrap() - chars).abs() < 1e-12);
    }
}

/// The case above with words of two-byte characters, worked by hand the
/// same way, lengths in Unicode scalar values (README: "its length in
/// characters (Unicode scalar values)"): training "x été / x été / x œil",
/// held out "x œil / x ça" (ça outside V). Without prediction: (1+1) +
/// (3+1) + (1+1) + (2+1) = 11 (in bytes it would be 13). Top 1: x costs 1;
/// œil is shown after "œ" (cost 2); ça costs 3. With = 1 + 2 + 1 + 3 = 7,
/// savings 4/11, before the first character 2 of 4, characters typed
/// (0 + 1 + 0 + 2)/4. Top 2: œil at once: 6, savings 5/11, 3 of 4,
/// (0 + 0 + 0 + 2)/4. A store counted with --lowercase, trained and asked
/// in capitals, gives the same.
#[test]
fn tiny_case_by_hand_in_two_byte_characters() {
    let d = scratch("tiny-utf8");
    let want = [(1, 7, 4.0 / 11.0, 0.5, 0.75), (2, 6, 5.0 / 11.0, 0.75, 0.5)];
    for (lowercase, train, held) in [
        (false, "x été\nx été\nx œil\n", "x œil\nx ça\n"),
        (true, "X ÉTÉ\nx Été\nX Œil\n", "X ŒIL\nx Ça\n"),
    ] {
        let train_path = d.join(format!("train-{lowercase}.txt"));
        let held_path = d.join(format!("held-{lowercase}.txt"));
        std::fs::write(&train_path, train).unwrap();
        std::fs::write(&held_path, held).unwrap();
        let store = d.join(format!("store-{lowercase}"));
        let mut flags = vec!["--order", "2", "--quiet"];
        if lowercase {
            flags.push("--lowercase");
        }
        ingest_ok(&store, &flags, &[train_path]);
        let r = report(&[
            "--store",
            store.to_str().unwrap(),
            "--method",
            "mle",
            "--top",
            "1,2",
            held_path.to_str().unwrap(),
        ]);
        assert_eq!(r["words"], 4, "lowercase {lowercase}");
        assert_eq!(r["outside_vocabulary"], 1);
        assert_eq!(r["keystrokes_without"], 11, "lengths in scalar values");
        for (x, (k, keys, sav, before, chars)) in r["results"].as_array().unwrap().iter().zip(want)
        {
            assert_eq!(x["top"], k);
            assert_eq!(x["keystrokes"], keys, "lowercase {lowercase}, top {k}");
            assert!((x["savings"].as_f64().unwrap() - sav).abs() < 1e-12);
            assert!((x["before_first_char"].as_f64().unwrap() - before).abs() < 1e-12);
            assert!((x["chars_per_word"].as_f64().unwrap() - chars).abs() < 1e-12);
        }
    }
}

fn python(store: &str, tops: &str, held: &str, source: &[&str]) -> serde_json::Value {
    python_env(store, tops, held, source, false)
}

/// keystrokes_check.py, told whether the store lowercases.
fn python_env(
    store: &str,
    tops: &str,
    held: &str,
    source: &[&str],
    lowercase: bool,
) -> serde_json::Value {
    let script = crate::common::manifest_dir().join("tests/integration/keystrokes_check.py");
    let out = Command::new(python3())
        .env("KEYSTROKES_LOWERCASE", if lowercase { "1" } else { "0" })
        .arg(&script)
        .args([bin(), store, tops, held])
        .args(source)
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "keystrokes_check.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn same(what: &str, a: &serde_json::Value, b: &serde_json::Value) {
    for f in ["words", "outside_vocabulary", "keystrokes_without"] {
        assert_eq!(a[f], b[f], "{what}: {f}");
    }
    let (x, y) = (
        a["results"].as_array().unwrap(),
        b["results"].as_array().unwrap(),
    );
    assert_eq!(x.len(), y.len());
    for (p, q) in x.iter().zip(y) {
        assert_eq!(p["top"], q["top"], "{what}");
        assert_eq!(p["keystrokes"], q["keystrokes"], "{what}: top {}", p["top"]);
        for f in ["savings", "before_first_char", "chars_per_word"] {
            let (u, v) = (p[f].as_f64().unwrap(), q[f].as_f64().unwrap());
            assert!(
                (u - v).abs() < 1e-12,
                "{what}: top {}: {f} {u} against {v}",
                p["top"]
            );
        }
    }
}

#[test]
fn equals_an_independent_python_simulation() {
    let d = scratch("python");
    // An excerpt of the held-out novel (lines 200 to 329), not trained on.
    let text = std::fs::read_to_string(gutenberg_dir().join("persuasion.txt")).unwrap();
    let excerpt: String = text
        .lines()
        .skip(200)
        .take(130)
        .map(|l| format!("{l}\n"))
        .collect();
    let held = d.join("held.txt");
    std::fs::write(&held, &excerpt).unwrap();
    let h = held.to_str().unwrap();
    let store = train3().to_str().unwrap();
    let model = d.join("mkn.qm");
    run_ok(&["freeze", "--store", store, "--out", model.to_str().unwrap()]);
    let m = model.to_str().unwrap();
    let cases: [(&str, &[&str]); 3] = [
        ("1,3,5", &["--store", store, "--method", "mkn"]),
        ("2,7", &["--store", store, "--method", "witten-bell"]),
        ("5,1,3", &["--model", m]),
    ];
    for (tops, source) in cases {
        let mut args = source.to_vec();
        args.extend(["--top", tops, h]);
        let ours = report(&args);
        let theirs = python(store, tops, h, source);
        same(&format!("{source:?} --top {tops}"), &ours, &theirs);
        assert!(ours["words"].as_u64().unwrap() > 1000);
        assert!(ours["outside_vocabulary"].as_u64().unwrap() > 0);
        let s1 = ours["results"][0]["savings"].as_f64().unwrap();
        assert!(s1 > 0.0 && s1 < 1.0);
    }
}

/// The Python simulation on text in several scripts
/// (fixtures/unicode/several-scripts.txt, written for these tests) with
/// tokens spelled like markers, words outside V and words of one to four
/// bytes a character: a store, a frozen model, and a store counted with
/// --lowercase (Python lowercasing with str.lower()).
#[test]
fn equals_the_python_simulation_in_several_scripts() {
    let d = scratch("scripts");
    let fixture = crate::complete::several_scripts();
    let text = std::fs::read_to_string(&fixture).unwrap();
    // Held out: the fixture's first lines, and a line of words outside V
    // and marker spellings (which count as <unk>).
    let mut held_text: String = text.lines().take(12).map(|l| format!("{l}\n")).collect();
    held_text.push_str("Élodie écrit <s> à </s> Šárka , ж <UNK> 猫猫 qqzzx-é .\n");
    let held = d.join("held.txt");
    std::fs::write(&held, &held_text).unwrap();
    let h = held.to_str().unwrap();
    for lowercase in [false, true] {
        let store = d.join(format!("store-{lowercase}"));
        let mut flags = vec!["--order", "3", "--quiet"];
        if lowercase {
            flags.push("--lowercase");
        }
        ingest_ok(&store, &flags, std::slice::from_ref(&fixture));
        let s = store.to_str().unwrap();
        let model = d.join(format!("mkn-{lowercase}.qm"));
        run_ok(&["freeze", "--store", s, "--out", model.to_str().unwrap()]);
        let m = model.to_str().unwrap();
        let cases: [(&str, &[&str]); 2] = [
            ("1,3", &["--store", s, "--method", "kn"]),
            ("2,5", &["--model", m]),
        ];
        for (tops, source) in cases {
            let mut args = source.to_vec();
            args.extend(["--top", tops, h]);
            let ours = report(&args);
            let theirs = python_env(s, tops, h, source, lowercase);
            same(
                &format!("several scripts, lowercase {lowercase}, {source:?} --top {tops}"),
                &ours,
                &theirs,
            );
            assert!(ours["outside_vocabulary"].as_u64().unwrap() >= 5);
            let s1 = ours["results"][0]["savings"].as_f64().unwrap();
            assert!(s1 > 0.0 && s1 < 1.0);
        }
    }
}
