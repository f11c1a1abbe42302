//! `bench-query`: `prob` batch throughput and `next` latency on a finished
//! store, cold (the first pass of a fresh process: empty block cache; the
//! operating system's file cache may still hold the store) and warm (later
//! passes), printed as JSON.
//!
//! ```sh
//! bench-query --store DIR --text HELDOUT.txt [--method mkn] [--cache 256MiB] [--contexts 1000] [--only prob|next]
//! ```
//!
//! Queries are every prediction of the held-out sentences (tokenized as at
//! ingest); `next --top 10` contexts are the sentence starts and
//! mid-sentence contexts of evenly spaced sentences.

use std::path::PathBuf;
use std::time::Instant;

use quern::query::{prediction, Estimator, Method, Params};
use quern::store::Store;
use quern::words::WordId;

fn main() {
    let (mut store, mut text, mut method, mut cache, mut contexts) =
        (None, None, "mkn".to_string(), 256usize << 20, 1000usize);
    let mut only = String::new();
    let mut it = std::env::args().skip(1);
    while let Some(a) = it.next() {
        let v = it.next().unwrap_or_else(|| panic!("{a} needs a value"));
        match a.as_str() {
            "--store" => store = Some(PathBuf::from(v)),
            "--text" => text = Some(PathBuf::from(v)),
            "--method" => method = v,
            "--cache" => cache = quern::memory::parse_size(&v).expect("size") as usize,
            "--contexts" => contexts = v.parse().expect("number"),
            "--only" => only = v,
            _ => panic!("unknown flag {a}"),
        }
    }
    let store_path = store.expect("--store");
    let store = Store::open_with_cache(&store_path, cache).expect("open store");
    let m: Method = method.parse().expect("method");
    let n = store.order();
    let s = quern::query::score::read_sentences(
        &[text.expect("--text")],
        quern::tokenize::Preparation::default(),
    )
    .expect("text");
    let queries: Vec<&[WordId]> = s
        .iter()
        .flat_map(|x| (1..x.len()).map(move |i| prediction(x, i, n)))
        .collect();

    let t = Instant::now();
    let est = Estimator::new(&store, m, Params::default()).expect("estimator");
    let open_seconds = t.elapsed().as_secs_f64();
    let mut rates = Vec::new();
    for _pass in 0..3 {
        if only == "next" {
            rates.push(0.0);
            continue;
        }
        let t = Instant::now();
        for c in queries.chunks(4096) {
            std::hint::black_box(est.prob_batch(c).expect("prob"));
        }
        rates.push(queries.len() as f64 / t.elapsed().as_secs_f64());
    }

    let half = (contexts / 2).max(1);
    let ctxs: Vec<&[WordId]> = s
        .iter()
        .step_by((s.len() / half).max(1))
        .flat_map(|x| {
            let i = x.len() / 2;
            [&x[..1], &x[(i + 1).saturating_sub(n)..=i]]
        })
        .collect();
    // A store opened afresh, so that the first pass of `next` is cold too.
    drop(est);
    drop(store);
    let store = Store::open_with_cache(&store_path, cache).expect("open store");
    let est = Estimator::new(&store, m, Params::default()).expect("estimator");
    let t = Instant::now();
    est.unigram_ranking().expect("ranking");
    let ranking_seconds = t.elapsed().as_secs_f64();
    let mut passes = Vec::new();
    for _pass in 0..2 {
        if only == "prob" {
            passes.push(serde_json::json!({"median_ms": 0.0, "p99_ms": 0.0, "max_ms": 0.0}));
            continue;
        }
        let mut times = Vec::new();
        for h in &ctxs {
            let t = Instant::now();
            std::hint::black_box(est.next(h, 10).expect("next"));
            times.push(t.elapsed().as_secs_f64() * 1e3);
        }
        times.sort_by(f64::total_cmp);
        let q = |f: f64| times[((times.len() - 1) as f64 * f).round() as usize];
        passes.push(serde_json::json!({"median_ms": q(0.5), "p99_ms": q(0.99), "max_ms": times[times.len() - 1]}));
    }
    let out = serde_json::json!({
        "method": m.name(),
        "predictions": queries.len(),
        "estimator_seconds": open_seconds,
        "prob_per_second": {"cold": rates[0], "warm": (rates[1] + rates[2]) / 2.0},
        "next_contexts": ctxs.len(),
        "next_ranking_seconds": ranking_seconds,
        "next_top10": {"cold": passes[0], "warm": passes[1]},
    });
    println!("{out}");
}
