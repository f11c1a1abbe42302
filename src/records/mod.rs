//! The records that the stages of an ingest hand to each other, and the
//! store's metadata made from them: the bottom layer that `count`, `merge`,
//! `growth`, `ingest`, `stage` and `store` all use, so that every
//! dependency between them points down.
//!
//! * What counting reports: [`ReadTotals`] of the [`Span`]s it read.
//! * What merging and joining report per partition: [`Merged`], [`Joined`]
//!   with its [`PartitionStats`].
//! * What a finished store records: [`StoreMeta`] ([`Settings`], [`Totals`],
//!   [`OrderStats`], the [`GrowthCurve`], the root [`ContextStats`]), made
//!   from the partitions' results by [`store_meta`].
//!
//! Nothing here does I/O; the types serialise with serde into the ingest
//! manifest, the cluster stages' `done.json` files and the store's
//! metadata record, whose byte layouts therefore live here too.

mod meta;
mod partition;

pub use meta::{GrowthCurve, OrderStats, Settings, StoreMeta, Totals, WordListInfo, STORE_VERSION};
pub use partition::{
    store_meta, BadLineAt, ContextStats, Joined, Merged, PartitionStats, ReadTotals,
};
