//! Merging: per partition, runs to totals, continuation counts and
//! context statistics.
//!
//! Two steps per partition, each a separate, resumable unit:
//!
//! 1. [`merge_partition`]: k-way merge of the partition's sections of every
//!    count run into one sorted file of raw counts `c(g)`. Each merged
//!    n-gram `v·g` of order ≥ 2 also contributes 1 to the continuation count
//!    of its suffix `g`, which belongs to the partition of `g`'s first word:
//!    these contributions are accumulated in a bounded table and spilled as
//!    partitioned runs (the one shuffle quern needs).
//! 2. [`join_partition`]: walks the partition's merged counts in key order
//!    beside the merge of every continuation run's section for it, and
//!    derives everything the store holds: `N1+(•g)`, the left-type count
//!    `a(g)`, count-of-counts, and the context statistics. Because key order
//!    visits a context right before all its extensions, one stack of open
//!    contexts (one per length) is enough: memory O(N).
//!
//! Both steps merge at most `fanin` sections at once, merging in rounds
//! through temporary files when there are more.

mod join;
mod kway;
mod partition;

pub use join::join_partition;
pub use kway::{KWayMerge, RecordSource};
pub use partition::{merge_partition, MergeConfig};
