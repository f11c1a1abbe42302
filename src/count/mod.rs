//! Counting: input spans to sorted, partitioned run files.
//!
//! Several workers take spans of the input from a queue, tokenize their
//! lines and count every k-gram (1 ≤ k ≤ N) into their own [`Table`]. When a
//! table fills its share of the memory budget, the worker spills it as one
//! run file (a section per partition) plus the dictionary of the words it
//! saw, and reports the spill with the input ranges it covers; the caller
//! records that durably before the worker goes on. Spills happen between
//! lines, so every covered range ends at a line boundary.

mod table;
mod worker;

pub use table::{Table, MAX_LOAD};
pub use worker::{count_spans, CountConfig, Spill};
