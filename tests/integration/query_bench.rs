//! Benchmarks (ignored by default; they print figures and check nothing
//! about time): `prob` batch throughput and `next` latency, warm.
//!
//! ```sh
//! QUERN_BENCH_STORE=/tmp/g5 cargo test --release query_bench -- --ignored --nocapture
//! ```
//!
//! Without `QUERN_BENCH_STORE` the five-novel order-5 fixture store is used.

use std::time::Instant;

use quern::query::{prediction, Estimator, Method, Params};
use quern::store::Store;
use quern::words::WordId;

use crate::query_fixtures::{heldout_sentences, train5};

fn store() -> Store {
    let dir = std::env::var_os("QUERN_BENCH_STORE")
        .map(std::path::PathBuf::from)
        .unwrap_or_else(|| train5().to_path_buf());
    Store::open_with_cache(&dir, 192 << 20).unwrap()
}

#[test]
#[ignore]
fn bench_prob_batch_throughput() {
    let store = store();
    let n = store.order();
    let s = heldout_sentences();
    let queries: Vec<&[WordId]> = s
        .iter()
        .flat_map(|x| (1..x.len()).map(move |i| prediction(x, i, n)))
        .collect();
    for m in Method::ALL {
        let est = Estimator::new(&store, m, Params::default()).unwrap();
        let mut rates = Vec::new();
        for _pass in 0..3 {
            let t = Instant::now();
            for c in queries.chunks(4096) {
                std::hint::black_box(est.prob_batch(c).unwrap());
            }
            rates.push(queries.len() as f64 / t.elapsed().as_secs_f64());
        }
        eprintln!(
            "prob_batch {m:>12}: {} predictions, pass 1 {:.0}/s, pass 2 {:.0}/s, pass 3 {:.0}/s",
            queries.len(),
            rates[0],
            rates[1],
            rates[2]
        );
    }
}

#[test]
#[ignore]
fn bench_next_latency() {
    let store = store();
    let n = store.order();
    let s = heldout_sentences();
    let ctxs: Vec<&[WordId]> = s
        .iter()
        .step_by((s.len() / 400).max(1))
        .flat_map(|x| {
            let i = x.len() / 2;
            [&x[..1], &x[(i + 1).saturating_sub(n)..=i]]
        })
        .collect();
    for m in Method::ALL {
        let est = Estimator::new(&store, m, Params::default()).unwrap();
        est.unigram_ranking().unwrap();
        for h in &ctxs {
            est.next(h, 10).unwrap();
        }
        let mut times = Vec::new();
        for h in &ctxs {
            let t = Instant::now();
            std::hint::black_box(est.next(h, 10).unwrap());
            times.push(t.elapsed().as_secs_f64() * 1e3);
        }
        times.sort_by(f64::total_cmp);
        let q = |f: f64| times[((times.len() - 1) as f64 * f) as usize];
        eprintln!(
            "next --top 10 {m:>12}: {} contexts, median {:.3} ms, p99 {:.3} ms, max {:.3} ms",
            times.len(),
            q(0.5),
            q(0.99),
            times[times.len() - 1]
        );
    }
}
