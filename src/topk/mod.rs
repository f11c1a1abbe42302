//! The exact top K of a distribution without scoring all of it: one
//! collector and one prefix index, shared by the store's estimators and
//! the frozen model.
//!
//! # The search both back ends run
//!
//! After a context, a back end splits V into **groups** such that within
//! a group the probability is a non-decreasing function of a key the back
//! end can enumerate in order (a ranking of a context's children, the
//! unigram ranking of V): every word of a group backs off through the
//! same levels and is multiplied by the same factor. A group is handed to
//! the [`TopK`] collector either
//!
//! - **ranked** ([`TopK::take_ranked`]): its candidates in an order where
//!   the probability never increases; the collector takes the first K,
//!   then every further candidate whose probability equals the K-th's
//!   (a tie at the boundary), and stops; it also stops at the first
//!   candidate less probable than the K-th best of the groups taken
//!   before. [`TopK::take_ranked_if`] is the same for a group whose
//!   membership is a test that costs more than the probability (the frozen
//!   model's "not kept under a longer context"): the test is asked only of
//!   candidates that pass the stops; or
//! - **whole** ([`TopK::take_all`]): every candidate (short lists); or
//! - **tied** ([`TopK::take_tied`]): a group whose every word has the same
//!   probability (with `add-k` and `mle`, the words unseen after the
//!   context), in byte order: its first K.
//!
//! The best K of the union of the groups' candidates are the best K of V:
//! a word that a ranked group never offered comes after a candidate of
//! strictly lower probability than the group's K-th, so K words of its own
//! group beat it whatever the tie-break; or after a candidate strictly
//! below the K-th best of the earlier groups, whose K words beat it.
//!
//! # Ties
//!
//! Words of equal probability are ordered by their bytes (UTF-8, byte
//! order), everywhere: the store, the model, the service and the Python
//! module answer the same list. Because a ranked group is followed past
//! its K-th candidate while the probability stays equal, the order in
//! which a back end meets tied words does not matter. The cost: a tie at
//! the boundary is read whole (with `add-k` and `mle`, every word unseen
//! after the context ties, so a top K that reaches them reads them all).
//!
//! # Prefixes
//!
//! [`PrefixIndex`] holds V in byte order, where the words that begin with
//! a prefix are one range, over a tree of minima of the words' places in
//! a ranking: [`PrefixIndex::best_first`] yields a range's words in
//! ranking order, reading O(log |V|) nodes a word.

mod collect;
mod fold;
mod prefix;

pub use collect::TopK;
pub use fold::{fold, PrefixMatch};
pub use prefix::PrefixIndex;
