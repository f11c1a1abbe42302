//! Integration tests of the `quern` binary against the counting and CLI
//! contract. Every check names its source of truth in a comment beside it.

// Shared helpers: running the binary, fixture paths, reading `dump` output,
// comparing sorted line sets and stats JSON.
mod common;

// Independent single-pass in-memory reference counter written from the
// contract, plus unit tests of it on hand-computed tiny corpora.
mod reference;

// Cross-checks of stores built from fixtures/gutenberg/ (order 5, several
// memory/thread/lowercase settings) against the reference counter.
mod gutenberg;

// Kill-and-resume through QUERN_KILL_AT, order mismatch on resume, --restart,
// refusal to re-ingest a finished store, refusal of a concurrent ingest.
mod resume;

// `--append` equals ingesting everything at once; append with another order
// is refused.
mod append;

// Cross-check against scripts/reference_ngrams.py (Python collections.Counter).
mod python_check;

// Small end-to-end CLI cases: CRLF, blank lines, literal markers, invalid
// UTF-8, .gz/.zst inputs, missing input, `dump --order`, `stats --json`.
mod cli;

// Stores shared by the query tests (five novels at orders 3 and 5).
mod query_fixtures;

// Every smoothing method sums to 1 over V for contexts of every kind.
mod query_normalisation;

// `next` equals a brute-force top K; `ngrams` paging; prob batch = single
// queries; score JSON with infinite perplexity.
mod query_next;

// Hand-worked estimator cases on a tiny corpus (papers named beside each
// check), discount formulas, and a textbook add-one example (from memory).
mod estimators;

// `tune` (add-k search, interp EM with and without buckets) lowers
// held-out perplexity; its file round-trips through --params.
mod query_tune;

// Benchmarks of prob throughput and next latency (ignored; run by hand).
mod query_bench;

// `quern stage` tasks by hand: equal to ingest, rerun skipped, two copies at
// once, killed before/after commit, damaged output, missing inputs.
mod stage;

// scripts/spark_ingest.py under Spark local mode: equal to ingest byte for
// byte; killed and doubled tasks; a missing input fails the job.
mod spark;
