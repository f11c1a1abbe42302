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

// Random SIGKILLs of fresh and appending ingests, resumed: same store as an
// uninterrupted run, no leftovers (QUERN_SOAK_TRIALS, QUERN_SOAK_SEED).
mod soak;

// Truncated, zeroed and bit-flipped run, dictionary, manifest and merged
// files: detected at resume or merge, redone or named in the error.
mod damage;

// Disk full on a small tmpfs (or injected): a clear error, then resume.
mod disk_full;

// Bad input among good input (binary, empty, blank, NUL, CR, invalid UTF-8,
// markers, a 200 MiB line, truncated .gz/.zst then fixed, a changed input,
// an unreadable file, a link loop): documented outcome, good input exact.
mod bad_input;

// Plain inputs cut into many small chunks (QUERN_CHUNK_BYTES): ingest with
// 3 threads and the stage tasks equal the reference counter.
mod chunks;

// `--append` equals ingesting everything at once; append with another order
// is refused.
mod append;

// `ingest --counts`: a dump read back is the same store (orders 3 and 5);
// Python's counts in duplicate lines across two files; bad tables named by
// file and line; resume after kills and --append equal one ingest.
mod counts_in;

// Cross-check against scripts/reference_ngrams.py (Python collections.Counter).
mod python_check;

// Small end-to-end CLI cases: CRLF, blank lines, literal markers, invalid
// UTF-8, .gz/.zst inputs, missing input, `dump --order`, `stats --json`.
mod cli;

// `stats`: growth curve vs Python at every sample point (budgets, resume,
// append), exports vs general-purpose parsers, tables vs the reference and
// the published formulas, figures, fits in published ranges, compare.
mod stats;

// Stores shared by the query tests (five novels at orders 3 and 5).
mod query_fixtures;

// Every smoothing method sums to 1 over V for contexts of every kind.
mod query_normalisation;

// `next` equals a brute-force top K; `ngrams` paging; prob batch = single
// queries; score JSON with infinite perplexity.
mod query_next;

// `next --prefix` (completion) equals a brute-force top K over V, for
// stores and frozen models; batch `next` equals single queries.
mod complete;

// `quern keystrokes`: a tiny case by hand, and an independent Python
// simulation over batch `next --prefix` answers.
mod keystrokes;

// `ingest --word-list`: counts against Python, kept by the store, the same
// list required by --append and a resume.
mod word_list;

// Hand-worked estimator cases on a tiny corpus (papers named beside each
// check), discount formulas, and a textbook add-one example (from memory);
// a second tiny corpus at order 3 (mkn and Katz by hand).
mod estimators;
mod estimators_order3;

// The nine estimators recomputed independently from the reference
// counter's tables (published formulas), orders 3 and 5, within 1e-12
// (the implementation in `independent`, the comparison beside it).
mod estimators_independent;
mod independent;

// `tune` (add-k search, interp EM with and without buckets) lowers
// held-out perplexity; its file round-trips through --tuned.
mod query_tune;

// `score --jsonl`/`--lines`: order, ids and bad lines kept, any thread
// count the same, documents = plain `score` runs, percentiles = a sort,
// two models = two runs, the kept/dropped split, .gz/.zst, --words; the
// Spark driver equal to single-machine runs.
mod docs;
mod docs_cut;
mod docs_spark;

// `ingest --jsonl`: documents as JSON lines equal a plain ingest of their
// texts (chunks and threads, kill and resume, --append, the stage tasks);
// bad lines counted and named by file and line.
mod crawl;

// Text preparation (normalize, sentences, tokens, case, digits) against
// scripts/prepare_reference.py (Python's unicodedata and uniseg, UAX #29):
// stores and queries equal; --append with other settings refused.
mod prepare;

// Benchmarks of prob throughput and next latency (ignored; run by hand).
mod query_bench;

// `quern stage` tasks by hand: equal to ingest, rerun skipped, two copies at
// once, killed before/after commit, damaged output, missing inputs.
mod stage;

// `quern stage plan --unique`: the hash and mark tasks; equal to ingest
// --unique (lines, JSON-lines documents and their lines), a later --append
// knows the units, killed/damaged tasks redone, refusals, and Spark.
mod stage_unique;

// scripts/spark_ingest.py under Spark local mode: equal to ingest byte for
// byte; killed and doubled tasks; a missing input fails the job.
mod spark;

// Frozen models: every freezable method equals the store's estimator over
// all of V (orders 3 and 5), running text, next; the ARPA export read by an
// independent Python reader (sums to 1, closure, same probabilities);
// count pruning keeps what README says; add-k/mle refused; damaged files
// refused; `--model` on the command line answers like `--store`.
mod freeze;
mod freeze_arpa;
mod freeze_files;

// The model file's specification in DEVELOPERS.md is complete: an
// independent Python reader written from it answers as the CLI.
mod model_spec;

// A truncated or damaged model file is refused on open or answers with
// errors, never a panic (checksums resealed so damage reaches the queries).
mod model_damage;

// What typing needs: folded completion against Python's folding, the
// never-suggest list, `freeze --max-bytes`.
mod typing;

// `freeze --from-arpa`: store → ARPA → model answers like the model frozen
// directly (orders 3 and 5); malformed ARPA files refused at their line.
mod arpa_read;

// `quern blend` and `--blend`: the mixture equals Σ λᵢ Pᵢ from each part
// alone through prob, next (against a brute-force top K over the union),
// score, keystrokes (the Python simulation) and serve; EM weights against
// a plain Python EM; moved, changed and differently prepared parts refused;
// freeze --blend: sums to 1 (the ARPA reader), the union, the exact mixture.
mod blend;
mod blend_fit;
mod blend_freeze;

// `vocab`: coverage and held-out words outside each size against a Python
// count of the same text; the --top list read by `ingest --word-list`.
mod vocab;

// `quern serve`: every endpoint equals the CLI's answer on the Gutenberg
// fixtures (store and frozen model), bad requests get 4xx JSON errors,
// SIGTERM stops it; a bounded load test on loopback; the page in headless
// Chromium shows the CLI's words; slow clients and work limits; the token,
// /metrics, the access log and reloads under load.
mod http_client;
mod serve;
mod serve_limits;
mod serve_load;
mod serve_ops;
mod serve_page;
mod serve_stop;

// Frozen models reduced: relative-entropy pruning and quantization.
mod freeze_reduce;
mod freeze_weights;

// Corpus statistics against plain Python over the Gutenberg texts:
// frequency lists and patterns (and the helpers of the next two).
mod corpus_lists;

// Collocation measures and keyness against their published formulas in
// Python and G² against SciPy; the keyness figure.
mod corpus_measures;

// Concordance lines against Python; occurrences equal the store's counts.
mod corpus_lines;

// `ingest --unique lines|documents` against a Python set of prepared token
// sequences: Gutenberg texts and files of repeated lines and documents,
// many chunks, kills and resumes, --append.
mod unique;
// Document counts (ingest --document-counts): against a Python count of
// each n-gram's documents, through kill/resume, append and stage.
mod documents;
