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
//! metadata record, whose byte layouts therefore live here too, with the
//! conversion of the records older versions wrote ([`upgrade_store_meta`],
//! [`upgrade_partition_records`]).

mod context;
mod meta;
mod partition;
mod upgrade;

pub use context::ContextStats;
pub use meta::{
    GrowthCurve, OrderStats, Settings, StoreMeta, Totals, Unique, WordListInfo, STORE_VERSION,
};
pub use partition::{store_meta, BadLineAt, Joined, Merged, PartitionStats, ReadTotals};
pub use upgrade::{upgrade_partition_records, upgrade_store_meta};
