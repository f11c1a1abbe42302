//! `quern lines`: concordance lines of a pattern, streamed from the corpus
//! files with the store's text preparation.

use std::io::Write;

use anyhow::bail;
use quern::corpus::discover;
use quern::linguistics::concordance::{Concordancer, Occurrence};

use super::prob::open_store;
use crate::cli::args::LinesArgs;

/// One occurrence as JSON.
#[derive(serde::Serialize)]
struct LineJson<'a> {
    file: &'a str,
    line: u64,
    left: String,
    #[serde(rename = "match")]
    matched: String,
    right: String,
}

/// splitmix64 (Steele, Lea & Flood 2014): the sample's random numbers.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in 0..n (n > 0), by rejection.
    fn below(&mut self, n: u64) -> u64 {
        let zone = u64::MAX - u64::MAX % n;
        loop {
            let x = self.next();
            if x < zone {
                return x % n;
            }
        }
    }
}

enum Mode {
    Stream,
    Collect,
    Sample(usize, Rng, u64),
}

pub fn run(a: LinesArgs) -> anyhow::Result<()> {
    let store = open_store(&a.store)?;
    let files = discover(&a.inputs)?;
    let conc = Concordancer::new(&store, &a.pattern, a.context, a.documents.format())?;
    if a.limit == Some(0) || a.sample == Some(0) {
        bail!("--limit and --sample must be at least 1");
    }
    let names: Vec<String> = files.iter().map(|f| f.path.display().to_string()).collect();
    let loc_width = names.iter().map(|n| n.chars().count()).max().unwrap_or(1) + 8;
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let printer = Printer {
        names: &names,
        loc_width,
        width: a.width,
        tsv: a.tsv,
        json: a.json,
    };
    if a.tsv {
        writeln!(out, "file\tline\tleft\tmatch\tright")?;
    }
    let mut mode = match (a.sample, &a.sort) {
        (Some(n), _) => Mode::Sample(n, Rng(a.seed), 0),
        (None, Some(_)) => Mode::Collect,
        (None, None) => Mode::Stream,
    };
    let mut kept: Vec<Occurrence> = Vec::new();
    let mut printed = 0usize;
    let limit = a.limit.unwrap_or(usize::MAX);
    let mut failed: Option<anyhow::Error> = None;
    conc.search(&files, |o| {
        match &mut mode {
            Mode::Stream => {
                if let Err(e) = printer.print(&mut out, &o) {
                    failed = Some(e);
                    return Ok(false);
                }
                printed += 1;
            }
            Mode::Collect => {
                kept.push(o);
                printed += 1;
            }
            // Reservoir sampling, Algorithm R (Vitter 1985): the i-th
            // occurrence replaces a kept one with probability n / i.
            Mode::Sample(n, rng, seen) => {
                *seen += 1;
                if kept.len() < *n {
                    kept.push(o);
                } else {
                    let j = rng.below(*seen) as usize;
                    if j < *n {
                        kept[j] = o;
                    }
                }
            }
        }
        Ok(printed < limit)
    })?;
    if let Some(e) = failed {
        return Err(e);
    }
    match a.sort.as_deref() {
        Some("right") => kept.sort_by(|x, y| {
            (&x.right, &x.matched, x.file, x.line).cmp(&(&y.right, &y.matched, y.file, y.line))
        }),
        Some(_) => kept.sort_by(|x, y| {
            let l = |o: &Occurrence| o.left.iter().rev().cloned().collect::<Vec<_>>();
            (l(x), &x.matched, x.file, x.line).cmp(&(l(y), &y.matched, y.file, y.line))
        }),
        None => kept.sort_by_key(|o| (o.file, o.line)), // a sample in file order
    }
    for o in &kept {
        printer.print(&mut out, o)?;
    }
    out.flush()?;
    Ok(())
}

struct Printer<'a> {
    names: &'a [String],
    loc_width: usize,
    width: usize,
    tsv: bool,
    json: bool,
}

impl Printer<'_> {
    fn print(&self, out: &mut impl Write, o: &Occurrence) -> anyhow::Result<()> {
        let (left, matched, right) = (o.left.join(" "), o.matched.join(" "), o.right.join(" "));
        let file = &self.names[o.file];
        if self.json {
            let j = LineJson {
                file,
                line: o.line,
                left,
                matched,
                right,
            };
            serde_json::to_writer(&mut *out, &j)?;
            writeln!(out)?;
        } else if self.tsv {
            writeln!(out, "{file}\t{}\t{left}\t{matched}\t{right}", o.line)?;
        } else {
            let loc = format!("{file}:{}", o.line);
            let w = self.width;
            writeln!(
                out,
                "{loc:<lw$} {:>w$}  {matched}  {}",
                last_chars(&left, w),
                first_chars(&right, w),
                lw = self.loc_width,
            )?;
        }
        Ok(())
    }
}

/// The last `n` characters of `s`.
fn last_chars(s: &str, n: usize) -> &str {
    let count = s.chars().count();
    if count <= n {
        return s;
    }
    let skip = s.char_indices().nth(count - n).map_or(s.len(), |(i, _)| i);
    &s[skip..]
}

/// The first `n` characters of `s`.
fn first_chars(s: &str, n: usize) -> &str {
    let end = s.char_indices().nth(n).map_or(s.len(), |(i, _)| i);
    &s[..end]
}
