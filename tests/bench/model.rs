//! `bench-model`: a frozen model beside its store in one run: `prob`
//! throughput (one thread, batches of running text, warm) and `next --top
//! 10` latency from the store's estimator and from the model, the passes
//! interleaved; the model's open time; printed as JSON.
//!
//! ```sh
//! bench-model --store DIR --model FILE --text HELDOUT.txt [--method mkn] [--cache 256MiB] [--contexts 1000] [--passes 3] [--only next|model-prob] [--residence mapped|loaded|both] [--schedule interleaved|blocks]
//! ```
//!
//! `--schedule interleaved` (the default) alternates the contenders pass by
//! pass, so that a machine's changing load falls on all of them alike, but
//! each pass then starts with the caches and TLB filled by another's
//! (the store's block cache, the other copy of the model). `blocks` runs
//! each contender's passes one after another (the store's, the model's,
//! then the loaded copy's), so that every warm pass finds its own data
//! in the caches, as a program that uses one of them does.
//!
//! Completion (`complete`, issue 16) is timed too, from the store and the
//! model: after each `next` context, the prefixes of 1 and 2 characters of
//! the word that follows it in the held-out text (and the empty prefix);
//! the first pass builds the indexes (its time is reported apart, as
//! `first_ms`), the second is timed. `--only next` skips the `prob` passes.
//!
//! The model must have been frozen from the store with the same method
//! (`quern freeze`). Queries are every prediction of the held-out
//! sentences (tokenized as at ingest), in order: running text, so the
//! model carries its matched context from one prediction to the next.
//! The first pass of each warms caches (block cache, page cache) and is
//! reported apart; "warm" is the mean rate of the later passes. Rates are
//! given per second of wall time and per second of this thread's CPU time
//! (the latter is what a machine shared with other jobs does not distort).

use std::path::PathBuf;
use std::time::Instant;

use quern::model::Model;
use quern::query::{prediction, Estimator, Method, Params};
use quern::store::Store;
use quern::words::WordId;

/// CPU seconds of this thread so far (the rates per CPU second are what a
/// loaded machine does not distort).
fn thread_cpu() -> f64 {
    let mut ts = libc::timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    // clock_gettime only writes the timespec it is given.
    let rc = thread_clock(&mut ts);
    assert_eq!(rc, 0, "clock_gettime");
    ts.tv_sec as f64 + ts.tv_nsec as f64 * 1e-9
}

#[allow(unsafe_code)]
fn thread_clock(ts: &mut libc::timespec) -> i32 {
    // SAFETY: `ts` is a valid, writable timespec for the call's duration.
    unsafe { libc::clock_gettime(libc::CLOCK_THREAD_CPUTIME_ID, ts) }
}

fn main() {
    let (mut store, mut model, mut text) = (None, None, None);
    let (mut method, mut cache, mut contexts, mut passes) =
        ("mkn".to_string(), 256usize << 20, 1000usize, 3usize);
    let mut only_next = false;
    let mut only_model = false;
    let mut residence = quern::model::Residence::Mapped;
    let mut both = false;
    let mut blocks = false;
    let mut it = std::env::args().skip(1);
    while let Some(a) = it.next() {
        let v = it.next().unwrap_or_else(|| panic!("{a} needs a value"));
        match a.as_str() {
            "--store" => store = Some(PathBuf::from(v)),
            "--model" => model = Some(PathBuf::from(v)),
            "--text" => text = Some(PathBuf::from(v)),
            "--method" => method = v,
            "--cache" => cache = quern::memory::parse_size(&v).expect("size") as usize,
            "--contexts" => contexts = v.parse().expect("number"),
            "--passes" => passes = v.parse::<usize>().expect("number").max(2),
            "--only" if v == "next" => only_next = true,
            "--only" if v == "model-prob" => only_model = true,
            "--residence" if v == "mapped" => residence = quern::model::Residence::Mapped,
            "--residence" if v == "loaded" => residence = quern::model::Residence::Loaded,
            "--residence" if v == "both" => both = true,
            "--schedule" if v == "interleaved" => blocks = false,
            "--schedule" if v == "blocks" => blocks = true,
            _ => panic!("unknown flag {a}"),
        }
    }
    let t = Instant::now();
    let path = model.expect("--model");
    let model = Model::open_as(&path, residence).expect("open model");
    let open_ms = t.elapsed().as_secs_f64() * 1e3;
    // `--residence both`: the same file also read into memory, its passes
    // interleaved with the mapped one's (a side-by-side in one run).
    let t = Instant::now();
    let loaded =
        both.then(|| Model::open_as(&path, quern::model::Residence::Loaded).expect("load model"));
    let load_ms = t.elapsed().as_secs_f64() * 1e3;
    let mut loaded_cpu = Vec::new();
    let store = Store::open_with_cache(&store.expect("--store"), cache).expect("open store");
    let m: Method = method.parse().expect("method");
    assert_eq!(
        model.method(),
        m,
        "the model was frozen with another method"
    );
    let est = Estimator::new(&store, m, Params::default()).expect("estimator");
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
    let mut store_rates = Vec::new();
    let mut model_rates = Vec::new();
    let mut store_cpu = Vec::new();
    let mut model_cpu = Vec::new();
    let mut check = (0.0f64, 0.0f64);
    // One pass of every query through a model, in batches of running text:
    // the sum of the finite log10 probabilities.
    let model_pass = |m: &Model| -> f64 {
        let mut sum = 0.0;
        for c in queries.chunks(4096) {
            sum += m
                .prob_batch(c)
                .expect("prob")
                .iter()
                .map(|p| p.log10)
                .filter(|x| x.is_finite())
                .sum::<f64>();
        }
        sum
    };
    // The passes to run, in order: 0 the store, 1 the model, 2 its loaded
    // copy.
    let mut who: Vec<u8> = vec![0, 1, 2];
    who.retain(|&w| (w != 0 || !only_model) && (w != 2 || loaded.is_some()));
    let schedule: Vec<u8> = match (only_next, blocks) {
        (true, _) => Vec::new(),
        (false, false) => (0..passes).flat_map(|_| who.iter().copied()).collect(),
        (false, true) => who
            .iter()
            .flat_map(|&w| std::iter::repeat_n(w, passes))
            .collect(),
    };
    let mut model_sums = Vec::new();
    let mut loaded_sums = Vec::new();
    for w in schedule {
        let (t, c0) = (Instant::now(), thread_cpu());
        match w {
            0 => {
                for c in queries.chunks(4096) {
                    let r = est.prob_batch(c).expect("prob");
                    check.0 += r
                        .iter()
                        .map(|p| p.log10)
                        .filter(|x| x.is_finite())
                        .sum::<f64>();
                }
                store_rates.push(queries.len() as f64 / t.elapsed().as_secs_f64());
                store_cpu.push(queries.len() as f64 / (thread_cpu() - c0));
            }
            1 => {
                let pass_sum = model_pass(&model);
                check.1 += pass_sum;
                model_sums.push(pass_sum);
                model_rates.push(queries.len() as f64 / t.elapsed().as_secs_f64());
                model_cpu.push(queries.len() as f64 / (thread_cpu() - c0));
            }
            _ => {
                let l = loaded.as_ref().expect("scheduled only when loaded");
                loaded_sums.push(model_pass(l));
                loaded_cpu.push(queries.len() as f64 / (thread_cpu() - c0));
            }
        }
    }
    for s in &loaded_sums {
        assert!(
            model_sums.iter().all(|m| m == s),
            "loaded and mapped answer the same"
        );
    }
    let warm = |r: &[f64]| {
        if r.len() < 2 {
            return f64::NAN;
        }
        r[1..].iter().sum::<f64>() / (r.len() - 1) as f64
    };
    if only_model {
        let out = serde_json::json!({
            "predictions": queries.len(),
            "residence": format!("{residence:?}"),
            "schedule": if blocks { "blocks" } else { "interleaved" },
            "model_open_ms": open_ms,
            "model_prob_per_second": model_rates,
            "model_prob_per_cpu_second": model_cpu,
            "loaded_open_ms": both.then_some(load_ms),
            "loaded_prob_per_cpu_second": loaded_cpu,
            "log10_sum_per_pass": check.1 / passes as f64,
        });
        println!("{out}");
        return;
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
    // The word after each context (as text), for the completion prefixes.
    let nexts: Vec<String> = s
        .iter()
        .step_by((s.len() / half).max(1))
        .flat_map(|x| {
            let i = x.len() / 2;
            [x[1], x[(i + 1).min(x.len() - 1)]]
        })
        .map(|w| model.word(w).unwrap_or_default())
        .collect();
    let time_complete = |f: &dyn Fn(&[WordId], &str), chars: usize| {
        let mut times = Vec::new();
        let mut first = Vec::new();
        for pass in 0..2 {
            times.clear();
            for (h, w) in ctxs.iter().zip(&nexts) {
                let p: String = w.chars().take(chars).collect();
                if p.chars().count() < chars {
                    continue;
                }
                let t = Instant::now();
                f(h, &p);
                times.push(t.elapsed().as_secs_f64() * 1e3);
            }
            if pass == 0 {
                first = times.clone();
            }
        }
        times.sort_by(f64::total_cmp);
        let q = |f: f64| times[((times.len() - 1) as f64 * f).round() as usize];
        serde_json::json!({"queries": times.len(), "median_ms": q(0.5), "p99_ms": q(0.99), "max_ms": times[times.len() - 1], "first_ms": first.iter().sum::<f64>()})
    };
    let mut complete = serde_json::Map::new();
    for chars in [0, 1, 2] {
        let m = time_complete(
            &|h, p| {
                std::hint::black_box(model.complete(h, p, 10).expect("complete"));
            },
            chars,
        );
        let st = time_complete(
            &|h, p| {
                std::hint::black_box(est.complete(h, p, 10).expect("complete"));
            },
            chars,
        );
        complete.insert(
            format!("prefix_{chars}_chars"),
            serde_json::json!({"model": m, "store": st}),
        );
    }
    let time_next = |f: &dyn Fn(&[WordId])| {
        let mut times = Vec::new();
        for _ in 0..2 {
            times.clear();
            for h in &ctxs {
                let t = Instant::now();
                f(h);
                times.push(t.elapsed().as_secs_f64() * 1e3);
            }
        }
        times.sort_by(f64::total_cmp);
        let q = |f: f64| times[((times.len() - 1) as f64 * f).round() as usize];
        serde_json::json!({"median_ms": q(0.5), "p99_ms": q(0.99), "max_ms": times[times.len() - 1]})
    };
    let next_store = time_next(&|h| {
        std::hint::black_box(est.next(h, 10).expect("next"));
    });
    let next_model = time_next(&|h| {
        std::hint::black_box(model.next(h, 10).expect("next"));
    });
    let ngrams: u64 = model.meta().ngrams.iter().sum();
    let first = |r: &[f64]| r.first().copied().unwrap_or(f64::NAN);
    let out = serde_json::json!({
        "method": m.name(),
        "order": n,
        "predictions": queries.len(),
        "model_bytes": model.file_bytes(),
        "model_ngrams": ngrams,
        "bytes_per_ngram": model.file_bytes() as f64 / ngrams as f64,
        "model_open_ms": open_ms,
        "schedule": if blocks { "blocks" } else { "interleaved" },
        "prob_per_second": {
            "store": {"first": first(&store_rates), "warm": warm(&store_rates)},
            "model": {"first": first(&model_rates), "warm": warm(&model_rates)},
            "model_over_store_warm": warm(&model_rates) / warm(&store_rates),
        },
        "prob_per_cpu_second": {
            "store": {"first": first(&store_cpu), "warm": warm(&store_cpu)},
            "model": {"first": first(&model_cpu), "warm": warm(&model_cpu)},
            "model_over_store_warm": warm(&model_cpu) / warm(&store_cpu),
            "loaded": loaded.as_ref().map(|_| serde_json::json!({
                "first": first(&loaded_cpu),
                "warm": warm(&loaded_cpu),
                "open_ms": load_ms,
                "over_store_warm": warm(&loaded_cpu) / warm(&store_cpu),
            })),
        },
        "log10_sum_per_pass": {"store": check.0 / passes as f64, "model": check.1 / passes as f64},
        "next_contexts": ctxs.len(),
        "next_top10_warm": {"store": next_store, "model": next_model},
        "complete_top10_warm": complete,
    });
    println!("{out}");
}
