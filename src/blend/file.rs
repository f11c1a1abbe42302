//! The blend file (`quern blend --out`): a small JSON record naming the
//! parts, in their order, and their weights.
//!
//! ```text
//! {"format_version": 1, "preparation": {...},
//!  "parts": [{"path": "/data/ferry-store", "kind": "store", "method": "mkn",
//!             "params": {...}, "settings_checksum": "…", "weight": 0.62}, …],
//!  "fitted": {"heldout": [...], "predictions": …, "perplexity": …,
//!             "iterations": …} or null}
//! ```
//!
//! A part's path is absolute. Its settings checksum is the xxh3-64 of
//! what decides its answers: for a store, its metadata (settings, totals,
//! statistics) with the method and parameters; for a model, its metadata
//! and the file's length. Opening the blend refuses a part whose checksum
//! differs (the store was rebuilt or appended to, the model refrozen).

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::predict::{Method, Params};
use crate::tokenize::Preparation;

use super::mixture::check_weights;

/// The version of the blend file this build writes and reads.
pub const BLEND_FORMAT_VERSION: u32 = 1;

/// What a part is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum PartKind {
    /// A store directory, read with a method.
    Store,
    /// A model file written by `quern freeze`.
    Model,
}

/// One part of a blend.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PartRecord {
    /// The store directory or model file (absolute).
    pub path: PathBuf,
    /// A store or a model.
    pub kind: PartKind,
    /// The method (a model's own).
    pub method: Method,
    /// A store's parameters (none for a model).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub params: Option<Params>,
    /// xxh3-64 (hex) of the part's settings (see the module doc).
    pub settings_checksum: String,
    /// λᵢ.
    pub weight: f64,
}

/// How the weights were fitted (`quern blend --heldout`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Fitted {
    /// The held-out files.
    pub heldout: Vec<PathBuf>,
    /// The predictions the weights were fitted on.
    pub predictions: u64,
    /// The blend's held-out perplexity with the weights.
    pub perplexity: f64,
    /// EM iterations run.
    pub iterations: usize,
}

/// A blend file's content.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BlendFile {
    /// [`BLEND_FORMAT_VERSION`].
    pub format_version: u32,
    /// The text preparation every part shares.
    pub preparation: Preparation,
    /// The parts, in order.
    pub parts: Vec<PartRecord>,
    /// How the weights were found (none: given with `--weights`).
    pub fitted: Option<Fitted>,
}

impl BlendFile {
    /// The weights, in the parts' order.
    pub fn weights(&self) -> Vec<f64> {
        self.parts.iter().map(|p| p.weight).collect()
    }

    /// Reads and checks a blend file: its version, one weight a part, the
    /// weights summing to 1.
    pub fn load(path: &Path) -> Result<BlendFile> {
        let bytes = std::fs::read(path).map_err(|e| Error::io(path, "read", e))?;
        let f: BlendFile =
            crate::fsutil::parse_upgraded(path, &bytes, BLEND_FORMAT_VERSION, |_, _| false)?;
        check_weights(&f.weights(), f.parts.len()).map_err(|e| Error::Input {
            path: path.to_path_buf(),
            detail: e.to_string(),
        })?;
        Ok(f)
    }

    /// Writes the file (atomically), as pretty JSON.
    pub fn save(&self, path: &Path) -> Result<()> {
        let mut text = serde_json::to_string_pretty(self).expect("a blend file serialises");
        text.push('\n');
        // The folder is synced after the rename: name it even for a bare
        // file name.
        let abs = std::path::absolute(path).map_err(|e| Error::io(path, "resolve", e))?;
        crate::fsutil::write_atomic(&abs, text.as_bytes())
    }
}

/// The settings checksum of a part from the bytes that decide its answers.
pub fn settings_checksum(parts: &[&[u8]]) -> String {
    let mut h = xxhash_rust::xxh3::Xxh3::new();
    for p in parts {
        h.update(&(p.len() as u64).to_le_bytes());
        h.update(p);
    }
    format!("{:016x}", h.digest())
}
