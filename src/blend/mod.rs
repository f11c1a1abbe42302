//! Blending sources: the linear mixture P(w | h) = Σᵢ λᵢ Pᵢ(w | h) of
//! several stores and models, its weights fitted on held-out text, and
//! the blend file that names its parts.
//!
//! * [`mixture`]: [`Blend`], the mixture of boxed predictors with fixed
//!   weights, itself a [`crate::predict::Predictor`] (probabilities, an
//!   exact top K, completion, distributions). A word outside a part's
//!   vocabulary gets that part's `<unk>` probability.
//! * [`fit`]: EM for the weights (Dempster, Laird & Rubin 1977; Jelinek &
//!   Mercer 1980) over the probabilities each part gives held-out text.
//! * [`file`]: the blend file (`quern blend --out`), its parts by path,
//!   kind, method and settings checksum, and their weights.
//! * [`freeze`]: the blend in back-off form (`quern freeze --blend`):
//!   the union of the parts' n-grams with the exact mixture, back-off
//!   weights recomputed so that every context sums to 1.
//! * [`open`]: the one file that opens stores and models: a part by path,
//!   and a blend file with every part checked against its record.
//!
//! [`mixture`], [`fit`], [`file`] and [`freeze`] know only the
//! [`crate::predict::Predictor`] trait and plain records, never a store.

pub mod file;
pub mod fit;
#[cfg(feature = "store")]
pub mod freeze;
pub mod mixture;
pub mod open;

pub use file::{BlendFile, PartKind, PartRecord};
pub use mixture::Blend;
pub use open::Opened;
