//! Counting: input spans to sorted, partitioned run files.
//!
//! Several workers take spans of the input from a queue, tokenize their
//! lines and count the longest k-gram (k ≤ N) starting at each token into
//! their own [`Table`]; every shorter k-gram is a prefix of one of those and
//! is counted when the table is written (`prefixes`). When a table fills
//! its share of the memory budget, the worker spills it as one run file (a
//! section per partition) plus the dictionary of the words it saw, and
//! reports the spill with the input ranges it covers; the caller
//! records that durably before the worker goes on. Spills happen between
//! lines, so every covered range ends at a line boundary.

mod order;
mod prefixes;
mod table;
mod worker;

pub use table::{SortedRecords, SortedTable, Table, MAX_LOAD};
pub use worker::{count_spans, CountConfig, Spill, UniqueSkips, BAD_LINES_KEPT};
