//! `quern blend --heldout`: the EM weights against a plain Python EM over
//! the per-prediction probabilities of each part alone
//! (tests/integration/blend_em_check.py, standard library only), and the
//! held-out perplexity never rising between iterations (the EM property,
//! Dempster, Laird & Rubin 1977). Blend files refused: a part that moved or
//! changed, parts that prepare text differently.

use std::process::Command;

use serde_json::Value;

use crate::blend::{fixture, heldout, s, with_parts, Spec};
use crate::common::{ingest_ok, manifest_dir, python3, run, run_ok};

fn python_em(probs: &[Vec<f64>], dir: &std::path::Path) -> Value {
    let file = dir.join("em-probs.json");
    std::fs::write(&file, serde_json::json!({ "probs": probs }).to_string()).unwrap();
    let out = Command::new(python3())
        .arg(manifest_dir().join("tests/integration/blend_em_check.py"))
        .arg(&file)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn em_weights_equal_a_plain_python_em() {
    let f = fixture();
    let cases: [(&str, Vec<Spec>); 2] = [
        (
            "stores",
            vec![
                Spec::Store(f.a.clone(), quern::query::Method::Mkn),
                Spec::Store(f.b.clone(), quern::query::Method::Mkn),
            ],
        ),
        (
            "models",
            vec![Spec::Model(f.a_wb.clone()), Spec::Model(f.b_mkn.clone())],
        ),
    ];
    for (name, parts) in cases {
        let paths: Vec<&str> = parts
            .iter()
            .map(|p| match p {
                Spec::Store(d, _) => s(d),
                Spec::Model(m) => s(m),
            })
            .collect();
        let out = f.dir.join(format!("em-{name}.json"));
        let r = run_ok(&[
            "blend",
            "--part",
            paths[0],
            "--part",
            paths[1],
            "--heldout",
            s(&heldout()),
            "--out",
            s(&out),
            "--json",
        ]);
        let ours: Value = serde_json::from_str(&r.stdout).unwrap();
        let sentences = crate::query_fixtures::heldout_sentences();
        let probs = with_parts(&parts, |ps| {
            quern::blend::fit::part_probabilities(ps, sentences).unwrap()
        });
        let theirs = python_em(&probs, &f.dir);
        let w: Vec<f64> = ours["weights"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        let tw: Vec<f64> = theirs["weights"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        for (a, b) in w.iter().zip(&tw) {
            assert!(
                (a - b).abs() < 1e-6,
                "{name}: weights {w:?} against Python's {tw:?}"
            );
        }
        assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-12, "{name}: {w:?}");
        // Neither source alone is the whole answer on this held-out text.
        assert!(w.iter().all(|&x| x > 0.05 && x < 0.95), "{name}: {w:?}");
        let its = ours["fit"]["iterations"].as_array().unwrap();
        let ppl: Vec<f64> = its
            .iter()
            .map(|i| i["perplexity"].as_f64().unwrap())
            .collect();
        let tppl: Vec<f64> = theirs["perplexities"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        assert_eq!(ppl.len(), tppl.len(), "{name}: iterations");
        for (i, (a, b)) in ppl.iter().zip(&tppl).enumerate() {
            assert!(
                (a - b).abs() <= 1e-9 * b,
                "{name}: iteration {i}: {a} against {b}"
            );
        }
        for p in [&ppl, &tppl] {
            for i in 1..p.len() {
                assert!(
                    p[i] <= p[i - 1],
                    "{name}: the perplexity rose at iteration {i}: {p:?}"
                );
            }
        }
        assert!(ppl.len() > 2, "{name}: EM ran");
        // Each part alone, and the blend below both.
        for (i, part) in ours["parts"].as_array().unwrap().iter().enumerate() {
            let a = part["perplexity_alone"].as_f64().unwrap();
            let b = theirs["alone"][i].as_f64().unwrap();
            assert!(
                (a - b).abs() <= 1e-9 * b,
                "{name}: part {i} alone {a} against {b}"
            );
            assert!(
                ppl[ppl.len() - 1] < a,
                "{name}: the blend beats part {i} alone"
            );
        }
        // The blend file holds the weights, and `score --blend` the
        // perplexity the fit reports.
        let file: Value = serde_json::from_slice(&std::fs::read(&out).unwrap()).unwrap();
        for (i, p) in file["parts"].as_array().unwrap().iter().enumerate() {
            assert_eq!(p["weight"].as_f64().unwrap(), w[i]);
        }
        let sc: Value = serde_json::from_str(
            &run_ok(&["score", "--blend", s(&out), "--json", s(&heldout())]).stdout,
        )
        .unwrap();
        let p = sc["perplexity"].as_f64().unwrap();
        let fitted = ours["fit"]["perplexity"].as_f64().unwrap();
        assert!(
            (p - fitted).abs() <= 1e-9 * p,
            "{name}: score {p} against the fit's {fitted}"
        );
    }
}

fn error_of(args: &[&str]) -> String {
    let r = run(args);
    assert!(!r.status.success(), "{}", r.describe());
    r.stderr
}

#[test]
fn a_moved_or_changed_part_is_refused_by_name() {
    let f = fixture();
    let d = f.dir.join("refusals");
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    let model = d.join("b.qm");
    std::fs::copy(&f.b_mkn, &model).unwrap();
    let file = d.join("blend.json");
    run_ok(&[
        "blend",
        "--part",
        s(&f.a),
        "--part",
        s(&model),
        "--weights",
        "0.5,0.5",
        "--out",
        s(&file),
    ]);
    run_ok(&["prob", "--blend", s(&file), "she", "was"]);
    // Moved.
    let moved = d.join("b-moved.qm");
    std::fs::rename(&model, &moved).unwrap();
    let e = error_of(&["prob", "--blend", s(&file), "she", "was"]);
    assert!(
        e.contains(&format!("part 2 ({})", model.display())) && e.contains("moved"),
        "{e}"
    );
    // Changed: frozen again at the same path with another method.
    run_ok(&[
        "freeze",
        "--store",
        s(&f.b),
        "--method",
        "kn",
        "--out",
        s(&model),
    ]);
    let e = error_of(&["next", "--blend", s(&file), "she", "was"]);
    assert!(
        e.contains(&format!("part 2 ({})", model.display())) && e.contains("changed"),
        "{e}"
    );
    // A store part read with other parameters is another part too.
    let mut v: Value = serde_json::from_slice(&std::fs::read(&file).unwrap()).unwrap();
    std::fs::rename(&moved, &model).unwrap();
    run_ok(&["prob", "--blend", s(&file), "she", "was"]);
    v["parts"][0]["params"]["discounts"] = "estimate".into();
    let edited = d.join("edited.json");
    std::fs::write(&edited, v.to_string()).unwrap();
    let e = error_of(&["score", "--blend", s(&edited), s(&heldout())]);
    assert!(
        e.contains(&format!("part 1 ({})", f.a.display())) && e.contains("changed"),
        "{e}"
    );
    // Weights that do not sum to 1.
    let mut w = v.clone();
    w["parts"][0]["params"]["discounts"] = "estimate-or-single".into();
    w["parts"][0]["weight"] = 0.9.into();
    std::fs::write(&edited, w.to_string()).unwrap();
    let e = error_of(&["prob", "--blend", s(&edited), "she", "was"]);
    assert!(e.contains("sum to 1.4"), "{e}");
}

#[test]
fn parts_that_prepare_text_differently_are_refused() {
    let f = fixture();
    let d = f.dir.join("preparations");
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    let lower = d.join("lower");
    ingest_ok(
        &lower,
        &["--order", "3", "--lowercase", "--quiet"],
        &crate::blend::source_b(),
    );
    let e = error_of(&[
        "blend",
        "--part",
        s(&f.a),
        "--part",
        s(&lower),
        "--weights",
        "0.5,0.5",
        "--out",
        s(&d.join("x.json")),
    ]);
    assert!(
        e.contains(s(&f.a))
            && e.contains(s(&lower))
            && e.contains("lowercase yes")
            && e.contains("lowercase no"),
        "{e}"
    );
    assert!(!d.join("x.json").exists());
    // A stupid back-off part gives scores, not probabilities.
    let e = error_of(&[
        "blend",
        "--part",
        s(&f.a),
        "--part",
        s(&f.b),
        "--method",
        "stupid",
        "--weights",
        "0.5,0.5",
        "--out",
        s(&d.join("y.json")),
    ]);
    assert!(
        e.contains("stupid") && e.contains("not probabilities"),
        "{e}"
    );
}
