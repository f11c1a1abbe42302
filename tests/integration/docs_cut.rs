//! `quern score --jsonl`, the summary and the cut: percentiles against a
//! plain sort (the nearest-rank definition), the two-model score against
//! two separate runs (Moore & Lewis 2010), the kept/dropped split against
//! the input lines the test wrote, and gzip/zstd inputs made by Python's
//! gzip module and the zstd program.

use std::path::Path;

use quern::scoring::dist::{Distribution, Scale, BIN_WIDTH};
use serde_json::{json, Value};

use crate::common::{run, run_ok};
use crate::docs::{
    close, general_store, input, input_file, paragraphs, plain_score, s, score_docs, tmp,
};
use crate::query_fixtures::train3;

#[test]
fn percentiles_are_the_nearest_rank_of_a_sort_of_all_scores() {
    let sum = tmp().join("summary.json");
    let (out, _) = score_docs(
        train3(),
        &["--jsonl", "--summary", &s(&sum)],
        &[input_file()],
    );
    let mut v: Vec<f64> = out
        .iter()
        .filter_map(|o| o["perplexity"].as_f64())
        .collect();
    // A plain sort; the nearest-rank percentile is the value at rank
    // ceil(p/100 * n), 1-based (the textbook definition).
    v.sort_by(f64::total_cmp);
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(&sum).unwrap()).unwrap();
    let d = &summary["distribution"];
    assert_eq!(d["count"].as_u64().unwrap(), v.len() as u64);
    assert_eq!(d["exact"], json!(true));
    let n = v.len() as f64;
    for p in [1, 5, 10, 25, 50, 75, 90, 95, 99] {
        let rank = ((p as f64 / 100.0 * n).ceil() as usize).max(1);
        let want = v[rank - 1];
        let got = d["percentiles"][format!("p{p}")].as_f64().unwrap();
        assert_eq!(got, want, "p{p}");
    }
    let mean = v.iter().sum::<f64>() / n;
    assert!(close(d["mean"].as_f64().unwrap(), mean));
    // The histogram holds every value, and its percentile (the bin's
    // centre) is within the documented bound of the exact one.
    let bins: Vec<(i64, u64)> = d["bins"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| (b[0].as_i64().unwrap(), b[1].as_u64().unwrap()))
        .collect();
    assert_eq!(bins.iter().map(|b| b.1).sum::<u64>(), v.len() as u64);
    let w = d["bin_width"].as_f64().unwrap();
    for x in &v {
        let b = (x.log10() / w).floor() as i64;
        assert!(bins.iter().any(|&(k, c)| k == b && c > 0));
    }
}

#[test]
fn two_model_score_equals_two_separate_runs() {
    let (a, _) = score_docs(train3(), &["--jsonl"], &[input_file()]);
    let (b, _) = score_docs(general_store(), &["--jsonl"], &[input_file()]);
    let (both, _) = score_docs(
        train3(),
        &["--jsonl", "--minus-store", &s(general_store())],
        &[input_file()],
    );
    let mut checked = 0;
    for ((x, y), z) in a.iter().zip(&b).zip(&both) {
        if x.get("error").is_some() {
            assert_eq!(z["error"], x["error"]);
            continue;
        }
        let n = x["predictions"].as_f64().unwrap();
        // Moore & Lewis (2010): H_I(s) - H_O(s), H = -log10 P / n.
        let want = -x["log10_sum"].as_f64().unwrap() / n + y["log10_sum"].as_f64().unwrap() / n;
        let got = z["ce_difference"].as_f64().unwrap();
        assert!(close(got, want), "line {}: {got} vs {want}", x["line"]);
        assert_eq!(z["perplexity"], x["perplexity"]);
        assert_eq!(z["general"]["perplexity"], y["perplexity"]);
        assert_eq!(z["general"]["outside_vocabulary"], y["outside_vocabulary"]);
        checked += 1;
    }
    assert!(checked > 300);
    // --words with two models: each prediction is the main store's own
    // (`word`, `log10`, `matched`) with `general`, the general store's own
    // `log10` and `matched`.
    let words = |store: &Path, more: &[&str]| {
        let mut a = vec!["--jsonl", "--words"];
        a.extend(more);
        score_docs(store, &a, &[input_file()]).0
    };
    let g = s(general_store());
    let (a, b, both) = (
        words(train3(), &[]),
        words(general_store(), &[]),
        words(train3(), &["--minus-store", &g]),
    );
    let mut predictions = 0;
    for ((x, y), z) in a.iter().zip(&b).zip(&both) {
        let Some(zw) = z["words"].as_array() else {
            assert!(z.get("error").is_some(), "{z}");
            continue;
        };
        let (xw, yw) = (
            x["words"].as_array().unwrap(),
            y["words"].as_array().unwrap(),
        );
        assert_eq!((zw.len(), zw.len()), (xw.len(), yw.len()));
        for ((p, q), r) in xw.iter().zip(yw).zip(zw) {
            let mut main = r.clone();
            let general = main.as_object_mut().unwrap().remove("general").unwrap();
            assert_eq!(&main, p);
            assert_eq!(
                general,
                json!({"log10": q["log10"], "matched": q["matched"]})
            );
            predictions += 1;
        }
    }
    assert!(predictions > 10_000, "{predictions}");
}

#[test]
fn the_split_keeps_the_lowest_scores_and_every_line_goes_to_one_file() {
    let (lines, _) = input();
    let (out, _) = score_docs(train3(), &["--jsonl"], &[input_file()]);
    let kept = tmp().join("kept.jsonl");
    let dropped = tmp().join("dropped.jsonl");
    // --keep-fraction 0.25: the round(0.25 n) lowest, ties to earlier lines.
    score_docs(
        train3(),
        &[
            "--jsonl",
            "--keep-fraction",
            "0.25",
            "--kept",
            &s(&kept),
            "--dropped",
            &s(&dropped),
        ],
        &[input_file()],
    );
    let mut scored: Vec<(f64, usize)> = out
        .iter()
        .enumerate()
        .filter_map(|(i, o)| o["perplexity"].as_f64().map(|p| (p, i)))
        .collect();
    scored.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let k = (0.25 * scored.len() as f64).round() as usize;
    let mut want: Vec<usize> = scored[..k].iter().map(|x| x.1).collect();
    want.sort();
    let want_kept: Vec<&str> = want.iter().map(|&i| lines[i].as_str()).collect();
    let want_dropped: Vec<&str> = (0..lines.len())
        .filter(|i| !want.contains(i))
        .map(|i| lines[i].as_str())
        .collect();
    let got_kept = std::fs::read_to_string(&kept).unwrap();
    let got_dropped = std::fs::read_to_string(&dropped).unwrap();
    assert_eq!(got_kept.lines().collect::<Vec<_>>(), want_kept);
    assert_eq!(got_dropped.lines().collect::<Vec<_>>(), want_dropped);
    // --keep-below X: exactly the documents with perplexity below X.
    let x = scored[scored.len() / 2].0;
    score_docs(
        train3(),
        &[
            "--jsonl",
            "--keep-below",
            &x.to_string(),
            "--kept",
            &s(&kept),
            "--dropped",
            &s(&dropped),
        ],
        &[input_file()],
    );
    let want_kept: Vec<&str> = out
        .iter()
        .enumerate()
        .filter(|(_, o)| o["perplexity"].as_f64().is_some_and(|p| p < x))
        .map(|(i, _)| lines[i].as_str())
        .collect();
    let got_kept = std::fs::read_to_string(&kept).unwrap();
    let got_dropped = std::fs::read_to_string(&dropped).unwrap();
    assert_eq!(got_kept.lines().collect::<Vec<_>>(), want_kept);
    assert_eq!(
        got_kept.lines().count() + got_dropped.lines().count(),
        lines.len()
    );
    // The dropped file holds every other line as written, in order.
    let want_dropped: Vec<&str> = out
        .iter()
        .enumerate()
        .filter(|(_, o)| !o["perplexity"].as_f64().is_some_and(|p| p < x))
        .map(|(i, _)| lines[i].as_str())
        .collect();
    assert_eq!(got_dropped.lines().collect::<Vec<_>>(), want_dropped);
    // A cut without its files is refused.
    let r = run(&[
        "score",
        "--store",
        &s(train3()),
        "--method",
        "mkn",
        "--jsonl",
        "--keep-below",
        "10",
        &s(input_file()),
    ]);
    r.assert_failure();
    assert!(r.stderr.contains("--kept"), "{}", r.stderr);
}

#[test]
fn compressed_inputs_lines_format_and_words() {
    // gzip by Python's gzip module, zstd by the zstd program.
    let gz = tmp().join("docs.jsonl.gz");
    let st = std::process::Command::new("python3")
        .args([
            "-c",
            "import gzip, shutil, sys; shutil.copyfileobj(open(sys.argv[1], 'rb'), gzip.open(sys.argv[2], 'wb'))",
            &s(input_file()),
            &s(&gz),
        ])
        .status()
        .unwrap();
    assert!(st.success());
    let (_, plain) = score_docs(train3(), &["--jsonl"], &[input_file()]);
    let (_, from_gz) = score_docs(train3(), &["--jsonl"], &[&gz]);
    assert!(plain == from_gz, ".gz input changed the output");
    let zst = tmp().join("docs.jsonl.zst");
    // Without the zstd program the test fails, as it does without python3:
    // a check is never skipped quietly.
    let st = std::process::Command::new("zstd")
        .args(["-q", "-f", &s(input_file()), "-o", &s(&zst)])
        .status()
        .expect(
            "zstd is not installed: run scripts/setup (the .zst input is made by the zstd program)",
        );
    assert!(st.success());
    let (_, from_zst) = score_docs(train3(), &["--jsonl"], &[&zst]);
    assert!(plain == from_zst, ".zst input changed the output");
    // Two inputs: each result names its file, line numbers per file.
    let (two, _) = score_docs(train3(), &["--jsonl"], &[input_file(), &gz]);
    let n = input().0.len();
    assert_eq!(two.len(), 2 * n);
    assert_eq!(two[n]["line"], json!(1));
    assert_eq!(two[n]["file"], json!(s(&gz)));
    // --lines: one document a line, the line number is the id; a one-line
    // document equals `quern score` of that line.
    let txt = tmp().join("lines.txt");
    let some: Vec<String> = paragraphs()
        .iter()
        .take(30)
        .map(|p| p.replace('\n', " "))
        .collect();
    std::fs::write(&txt, some.join("\n") + "\n").unwrap();
    let (ls, _) = score_docs(train3(), &["--lines", "--words"], &[&txt]);
    assert_eq!(ls.len(), 30);
    let store = quern::store::Store::open(train3()).unwrap();
    let stored = |ids: &[quern::words::WordId]| store.get(ids).unwrap().is_some();
    let mut matched_seen = [0usize; 4];
    for (i, o) in ls.iter().enumerate() {
        assert_eq!(o["id"], json!(i + 1));
        // --words: one object per prediction with exactly `word`, `log10`
        // and `matched`; their log10 sum to the total; the predictions
        // that matched 0 words are the ones outside the vocabulary; the
        // last is </s>.
        let w = o["words"].as_array().unwrap();
        assert_eq!(w.len() as u64, o["predictions"].as_u64().unwrap());
        for x in w {
            let keys: Vec<&str> = x.as_object().unwrap().keys().map(|k| k.as_str()).collect();
            let mut sorted = vec!["log10", "matched", "word"];
            sorted.sort();
            assert_eq!(keys, sorted, "{x}");
        }
        let sum: f64 = w.iter().map(|x| x["log10"].as_f64().unwrap()).sum();
        assert!(close(sum, o["log10_sum"].as_f64().unwrap()));
        let oov = w.iter().filter(|x| x["matched"] == json!(0)).count() as u64;
        assert_eq!(oov, o["outside_vocabulary"].as_u64().unwrap());
        assert_eq!(w.last().unwrap()["word"], json!("</s>"));
        let tokens: Vec<&str> = some[i].split_whitespace().collect();
        let got: Vec<&str> = w[..w.len() - 1]
            .iter()
            .map(|x| x["word"].as_str().unwrap())
            .collect();
        assert_eq!(got, tokens);
        // `matched` against the store read directly: 0 for a word that is
        // not a stored unigram, else the longest k (at most the order, 3)
        // for which the word and the k − 1 words before it (after `<s>`,
        // words outside V counted as `<unk>`) are a stored n-gram.
        let mut ids = vec![quern::words::bos_id()];
        for t in tokens
            .iter()
            .map(|t| t.as_bytes())
            .chain([b"</s>".as_slice()])
        {
            let id = quern::words::word_id(t);
            let want = if stored(&[id]) {
                let at = ids.len();
                ids.push(id);
                (1..=3.min(ids.len()))
                    .rev()
                    .find(|&k| stored(&ids[at + 1 - k..]))
                    .unwrap()
            } else {
                ids.push(quern::words::unk_id());
                0
            };
            let j = ids.len() - 2;
            assert_eq!(w[j]["matched"], json!(want), "line {} word {j}", i + 1);
            matched_seen[want] += 1;
        }
    }
    // The check saw every matched length.
    assert!(matched_seen.iter().all(|&n| n > 0), "{matched_seen:?}");
    let p = plain_score(train3(), &format!("{}\n", some[3]), "line4.txt");
    assert!(close(
        ls[3]["perplexity"].as_f64().unwrap(),
        p["perplexity"].as_f64().unwrap()
    ));
}

/// The nearest-rank percentile: the value at rank ⌈p/100 · n⌉ (1-based) of
/// the sorted values (the definition in the Wikipedia article "Percentile",
/// nearest-rank method; from memory).
fn nearest_rank(sorted: &[f64], p: f64) -> f64 {
    let rank = ((p / 100.0 * sorted.len() as f64).ceil() as usize).max(1);
    sorted[rank - 1]
}

/// The worked examples of the nearest-rank method in the Wikipedia article
/// "Percentile" (from memory), which pin ⌈p/100 · n⌉ against rounding and
/// truncation; then 251 values with ties (n not a multiple of 100, so that
/// the three rules disagree) against a sort, exact and from the histogram
/// within its stated bound (half a bin), and the k-th value a cut keeps up
/// to, from the histogram: the upper edge of the k-th value's bin.
#[test]
fn percentiles_follow_the_nearest_rank_rule_and_the_histogram_its_bound() {
    for (values, ps, want) in [
        (
            &[15.0, 20.0, 35.0, 40.0, 50.0][..],
            &[5.0, 30.0, 40.0, 50.0, 100.0][..],
            &[15.0, 20.0, 20.0, 35.0, 50.0][..],
        ),
        (
            &[3.0, 6.0, 7.0, 8.0, 8.0, 10.0, 13.0, 15.0, 16.0, 20.0][..],
            &[25.0, 50.0, 75.0, 100.0][..],
            &[7.0, 8.0, 15.0, 20.0][..],
        ),
        (
            &[3.0, 6.0, 7.0, 8.0, 8.0, 9.0, 10.0, 13.0, 15.0, 16.0, 20.0][..],
            &[25.0, 50.0, 75.0, 100.0][..],
            &[7.0, 9.0, 15.0, 20.0][..],
        ),
    ] {
        let mut d = Distribution::new(Scale::Linear);
        // Added in reverse: the order added must not matter.
        for &v in values.iter().rev() {
            d.add(v);
        }
        assert_eq!(d.percentiles(ps), want, "{values:?}");
    }
    // 251 values, shuffled, two and three of them tied; plus values the
    // distribution ignores (infinite, NaN).
    let vals: Vec<f64> = (0..251u64)
        .map(|i| {
            let j = match (i * 7919) % 251 {
                63 => 62,
                125 | 126 => 124,
                j => j,
            };
            1.0 + j as f64 * 0.37
        })
        .collect();
    let n = vals.len();
    for scale in [Scale::Log10, Scale::Linear] {
        let mut d = Distribution::new(scale);
        for &v in &vals {
            d.add(v);
        }
        d.add(f64::INFINITY);
        d.add(f64::NAN);
        assert_eq!(d.count, n as u64);
        let mut sorted = vals.clone();
        sorted.sort_by(f64::total_cmp);
        let ps = quern::scoring::dist::PERCENTILES;
        let exact = d.percentiles(&ps);
        let mut pinned = (false, false);
        for (&p, &got) in ps.iter().zip(&exact) {
            assert_eq!(got, nearest_rank(&sorted, p), "p{p}");
            let x = p / 100.0 * n as f64;
            pinned.0 |= sorted[x.round().max(1.0) as usize - 1] != got;
            pinned.1 |= sorted[x.floor().max(1.0) as usize - 1] != got;
        }
        assert!(
            pinned.0 && pinned.1,
            "the values do not tell ⌈⌉ from rounding and truncation"
        );
        // The k-th value, exact: the value and how many lie below it.
        for k in [1, 63, 64, 128, 250, 251] {
            let (t, below) = d.kth(k).unwrap();
            assert_eq!(t, sorted[k as usize - 1]);
            assert_eq!(
                below,
                Some(sorted.iter().filter(|&&v| v < t).count() as u64)
            );
        }
        assert_eq!(d.kth(0), None);
        assert_eq!(d.kth(n as u64 + 1), None);
        // From the histogram (as beyond EXACT_LIMIT values): within half a
        // bin of the exact percentile in x (module doc of dist.rs).
        d.exact = None;
        let x = |v: f64| match scale {
            Scale::Log10 => v.log10(),
            Scale::Linear => v,
        };
        for (&p, (&a, &e)) in ps.iter().zip(d.percentiles(&ps).iter().zip(&exact)) {
            assert!(
                (x(a) - x(e)).abs() <= BIN_WIDTH / 2.0 + 1e-12,
                "{scale:?} p{p}: histogram {a}, exact {e}"
            );
        }
        // A cut from the histogram keeps every value up to the upper edge
        // of the k-th value's bin: at least k, and beyond the k-th value
        // only values of its bin.
        for k in [1u64, 63, 64, 128, 250, 251] {
            let (t, below) = d.kth(k).unwrap();
            assert_eq!(below, None);
            let vk = sorted[k as usize - 1];
            let bin = |v: f64| (x(v) / BIN_WIDTH).floor() as i64;
            let kept: Vec<f64> = sorted.iter().copied().filter(|&v| v <= t).collect();
            assert!(
                kept.len() as u64 >= k,
                "{scale:?} k {k}: {} kept",
                kept.len()
            );
            for v in kept {
                assert!(
                    v <= vk || bin(v) == bin(vk),
                    "{scale:?} k {k}: {v} kept beyond the bin of {vk} (threshold {t})"
                );
            }
            assert!(
                bin(t) <= bin(vk) + 1 && t >= vk,
                "{scale:?} k {k}: threshold {t}"
            );
        }
    }
}

/// Runs `quern score --jsonl --method M ARGS INPUT` on the order-3 store;
/// the output, one JSON object a line.
fn score_jsonl(method: &str, extra: &[&str], input: &Path) -> Vec<Value> {
    let mut args = vec![
        "score".to_string(),
        "--store".into(),
        s(train3()),
        "--method".into(),
        method.into(),
        "--jsonl".into(),
    ];
    args.extend(extra.iter().map(|x| x.to_string()));
    args.push(s(input));
    run_ok(&args)
        .stdout
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

/// The cut and the percentiles on an input that tells the rules apart:
/// 257 scored documents (lines of a training novel, finite under `mle`),
/// three copies of one document tied across the k-th rank, empty
/// documents, documents with an infinite perplexity (a word outside V has
/// probability 0 under `mle`) and a bad line. Checked against a stable sort
/// of the scores the output shows: `--keep-fraction 0.25` keeps the
/// round(0.25 · 257) = 64 lowest (⌈⌉ would keep 65), ties to the earlier
/// lines, 0.35 keeps round(89.95) = 90 (truncation 89); the kept and the
/// dropped files hold exactly the lines written, in order; the summary's
/// percentiles are the nearest-rank ones of the finite scores; the same
/// with `--minus-store` (the cross-entropy difference).
#[test]
fn the_cut_tells_rounding_apart_with_ties_empty_and_infinite_documents() {
    let dir = tmp().join("cut-rules");
    std::fs::create_dir_all(&dir).unwrap();
    let emma = std::fs::read_to_string(crate::common::gutenberg_dir().join("emma.txt")).unwrap();
    let base: Vec<String> = emma
        .lines()
        .map(str::trim)
        .filter(|l| l.split_whitespace().count() >= 4)
        .step_by(37)
        .take(255)
        .map(|l| json!({ "text": l }).to_string())
        .collect();
    assert_eq!(base.len(), 255);
    let first = dir.join("base.jsonl");
    std::fs::write(&first, base.join("\n") + "\n").unwrap();
    let v0: Vec<f64> = score_jsonl("mle", &[], &first)
        .iter()
        .map(|o| {
            o["perplexity"]
                .as_f64()
                .expect("a training line is finite under mle")
        })
        .collect();
    // The document at rank 63 of the base: with two more copies it takes
    // ranks 63 to 65 of 257, across k = 64.
    let mut order: Vec<usize> = (0..v0.len()).collect();
    order.sort_by(|&a, &b| v0[a].total_cmp(&v0[b]).then(a.cmp(&b)));
    let tied = order[62];
    let mut lines: Vec<String> = Vec::new();
    for (i, l) in base.iter().enumerate() {
        match i {
            5 | 100 => lines.push(json!({ "text": if i == 5 { "" } else { "  \t " } }).to_string()),
            10 | 200 => lines.push(base[tied].clone()),
            20 | 150 => {
                let t = format!("{} zzqxw-not-in-austen", emma.lines().nth(40 + i).unwrap());
                lines.push(json!({ "text": t }).to_string());
            }
            30 => lines.push("{not json".into()),
            _ => {}
        }
        lines.push(l.clone());
    }
    let input = dir.join("docs.jsonl");
    std::fs::write(&input, lines.join("\n") + "\n").unwrap();
    for (general, field) in [
        (None, "perplexity"),
        (Some(general_store()), "ce_difference"),
    ] {
        let mut extra: Vec<String> = Vec::new();
        if let Some(g) = general {
            extra.extend(["--minus-store".to_string(), s(g)]);
        }
        let e: Vec<&str> = extra.iter().map(String::as_str).collect();
        let out = score_jsonl("mle", &e, &input);
        assert_eq!(out.len(), lines.len());
        let vals: Vec<Option<f64>> = out.iter().map(|o| o[field].as_f64()).collect();
        let finite: Vec<(f64, usize)> = vals
            .iter()
            .enumerate()
            .filter_map(|(i, v)| v.filter(|x| x.is_finite()).map(|x| (x, i)))
            .collect();
        if general.is_none() {
            assert_eq!(finite.len(), 257, "255 lines and two copies are scored");
            let none = vals.iter().filter(|v| v.is_none()).count();
            assert_eq!(none, 5, "two empty, two infinite, one bad");
        }
        let n = finite.len();
        let mut sorted = finite.clone();
        sorted.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        for fraction in [0.25, 0.35] {
            let kept = dir.join("kept.jsonl");
            let dropped = dir.join("dropped.jsonl");
            let sum = dir.join("summary.json");
            let f = fraction.to_string();
            let mut a = e.clone();
            a.extend([
                "--keep-fraction",
                &f,
                "--kept",
                kept.to_str().unwrap(),
                "--dropped",
                dropped.to_str().unwrap(),
                "--summary",
                sum.to_str().unwrap(),
            ]);
            score_jsonl("mle", &a, &input);
            // round(F · n), README; the three rules differ on one of the
            // two fractions.
            let k = (fraction * n as f64).round() as usize;
            let mut keep: Vec<usize> = sorted[..k].iter().map(|x| x.1).collect();
            keep.sort();
            let want_kept: Vec<&str> = keep.iter().map(|&i| lines[i].as_str()).collect();
            let want_dropped: Vec<&str> = (0..lines.len())
                .filter(|i| keep.binary_search(i).is_err())
                .map(|i| lines[i].as_str())
                .collect();
            let got_kept = std::fs::read_to_string(&kept).unwrap();
            let got_dropped = std::fs::read_to_string(&dropped).unwrap();
            assert_eq!(
                got_kept.lines().collect::<Vec<_>>(),
                want_kept,
                "{field}, --keep-fraction {f}: the kept lines"
            );
            assert_eq!(
                got_dropped.lines().collect::<Vec<_>>(),
                want_dropped,
                "{field}, --keep-fraction {f}: the dropped lines"
            );
            if general.is_none() && fraction == 0.25 {
                // The tie straddles the cut: some copies kept, some not.
                let copies: Vec<bool> = (0..lines.len())
                    .filter(|&i| lines[i] == base[tied])
                    .map(|i| keep.binary_search(&i).is_ok())
                    .collect();
                assert_eq!(copies, [true, true, false], "the earliest copies are kept");
                assert_ne!(k, (fraction * n as f64).ceil() as usize);
            }
            if general.is_none() && fraction == 0.35 {
                assert_ne!(k, (fraction * n as f64).floor() as usize);
            }
            let summary: Value =
                serde_json::from_str(&std::fs::read_to_string(&sum).unwrap()).unwrap();
            let d = &summary["distribution"];
            assert_eq!(d["count"].as_u64().unwrap(), n as u64);
            let sv: Vec<f64> = sorted.iter().map(|x| x.0).collect();
            for p in [1, 5, 10, 25, 50, 75, 90, 95, 99] {
                let got = d["percentiles"][format!("p{p}")].as_f64().unwrap();
                assert_eq!(got, nearest_rank(&sv, p as f64), "{field} p{p}");
            }
        }
    }
}
