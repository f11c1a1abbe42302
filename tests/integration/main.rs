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
