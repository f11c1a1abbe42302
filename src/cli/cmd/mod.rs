//! One file per subcommand.

pub mod blend;
pub mod collocations;
pub mod dump;
pub mod freeze;
pub mod freeze_blend;
pub mod ingest;
pub mod keyness;
pub mod keystrokes;
pub mod lines;
pub mod list;
pub mod next;
pub mod ngrams;
pub mod prob;
pub mod score;
pub mod scoring;
pub mod serve;
pub mod stage;
pub mod stats;
pub mod status;
pub mod top;
pub mod tune;
pub mod vocab;

/// `12345678` → `12,345,678`.
pub fn thousands(n: u64) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// Bytes in binary units, e.g. `1.5 GiB` (the library's formatting, so
/// that errors and summaries agree).
pub use quern::error::human_bytes as bytes;

/// Writes `v` as pretty JSON followed by a newline.
pub fn print_json(out: &mut impl std::io::Write, v: &impl serde::Serialize) -> anyhow::Result<()> {
    serde_json::to_writer_pretty(&mut *out, v)?;
    writeln!(out)?;
    Ok(())
}

/// A preparation as a report's JSON holds it, in words (`normalize nfkc,
/// sentences lines, …`).
pub fn preparation_text(p: &serde_json::Value) -> String {
    serde_json::from_value::<quern::tokenize::Preparation>(p.clone())
        .map_or_else(|_| p.to_string(), |p| p.describe())
}
