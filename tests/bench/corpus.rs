//! `bench-corpus`: a deterministic generator of crawl-like text for the
//! ingest benchmark (`scripts/bench`).
//!
//! ```sh
//! bench-corpus --size 1GiB --seed 1 --out /tmp/c.txt [--growth g.json] [--source DIR]
//! ```
//!
//! The text is one sentence a line, built from a source corpus (default
//! `fixtures/gutenberg/`) in four ways at once:
//!
//! - **Sentence structure from the source.** The source is read as one
//!   token stream and cut into sentences after tokens that end in `.`, `!`
//!   or `?` (closing quotes allowed; not titles such as `Mr.`) and at blank
//!   lines. A generated
//!   sentence starts at a random sentence start of the source and walks on:
//!   after each token it either continues with the source's next token or,
//!   with probability `--jump` (default 0.5), jumps to a random other
//!   occurrence of the same token and continues from there (a bigram
//!   Markov walk over the source's own positions). It ends where the walk
//!   reaches a sentence end (or after 200 tokens). Lengths therefore vary
//!   like the source's, word frequencies keep its Zipf-like shape, and
//!   short phrases recur like real ones.
//! - **Class-based substitution, so that longer n-grams stay new.** The
//!   walk alone only ever emits the source's own bigrams and copies its
//!   longer runs, so text many times the size of the source repeats every
//!   source n-gram about size / source-size times, and n-grams of order 2
//!   to 5 pile up at counts of 3 to 8 instead of staying singletons. So
//!   the source types are grouped into classes of the same shape (case or
//!   leading punctuation of the first character, trailing punctuation,
//!   whether the word ends a sentence) and similar source frequency (counts
//!   within a factor `BAND_RATIO` = 1.5 of each other), and each source
//!   token the walk emits is, with probability `--substitute` (default
//!   0.5), replaced by a member of its class drawn uniformly. Uniform
//!   within a class of similar frequencies keeps every type's expected
//!   frequency about what it was. Types seen `COMMON` = 1000 times or more
//!   in the source (function words: `the`, `of`, `her`, `was`, …) are
//!   never substituted: their n-grams are the frequent ones in real text
//!   too, and substituting them made orders 4 and 5 more singleton-heavy
//!   at 32 MiB than the source itself. The constants and the default rate
//!   were chosen by measuring the count-of-counts shape at 32 and 256 MiB
//!   (DEVELOPERS.md), not derived.
//! - **A vocabulary that keeps growing (Heaps' law).** After `n` tokens the
//!   generator has introduced `K ((n + n0)^β − n0^β)` invented types
//!   (defaults `K` = 30, `β` = 0.6, `n0` = 10^7; about 2.4 million new
//!   types at 1 GiB). A token is replaced by the next new type whenever
//!   the count falls behind that curve. Heaps' law V(n) = K n^β with β
//!   between 0.4 and 0.6 for English text is common practice (from
//!   memory); the offset n0 keeps the rate of new types at the start to
//!   about 3 % of tokens instead of nearly all of them.
//! - **A long tail that recurs, in the rare words' slots.** A token whose
//!   source type occurs at most `RARE` = 8 times in the source (about 9 %
//!   of the source's tokens) is, with probability `--reuse` (default 0.5),
//!   replaced by an invented type seen before, drawn log-uniformly by
//!   index (so P(index i) ∝ 1/i: a Zipf tail among the invented types).
//!   The rare words' classes are thereby open-ended: the pool they draw
//!   from grows with the output, as a crawl's rare words do, where a
//!   closed class of source words would saturate (the bigrams of a
//!   frequent word and a rare-class member would recur more often the
//!   longer the output). It also makes invented types recur often enough
//!   that the unigram singleton share stays below the bigram one.
//!
//! Invented types are numbers, capitalised names and junk tokens, spelled
//! from their index so that they are distinct by construction (never from a
//! stored list): the generator's memory does not grow with the output.
//! The same arguments always give the same bytes (the random numbers are a
//! seeded splitmix64 stream).
//!
//! `--growth FILE` writes JSON checkpoints at every power-of-two MiB and at
//! the end: bytes, sentences, tokens, source types used so far, invented
//! types so far and their sum (the vocabulary; exact, because invented
//! types are distinct from each other by construction and are counted only
//! if they do not spell a source word).

use std::collections::HashMap;
use std::io::Write;
use std::path::{Path, PathBuf};

struct Args {
    size: u64,
    seed: u64,
    out: PathBuf,
    growth: Option<PathBuf>,
    source: PathBuf,
    jump: f64,
    substitute: f64,
    reuse: f64,
    heaps_k: f64,
    heaps_beta: f64,
    heaps_n0: f64,
}

fn parse_size(s: &str) -> u64 {
    quern::memory::parse_size(s).unwrap_or_else(|e| die(&e.to_string()))
}

fn die(msg: &str) -> ! {
    eprintln!("bench-corpus: {msg}");
    std::process::exit(2)
}

fn args() -> Args {
    let mut a = Args {
        size: 16 << 20,
        seed: 1,
        out: PathBuf::from("-"),
        growth: None,
        source: PathBuf::from(concat!(env!("CARGO_MANIFEST_DIR"), "/fixtures/gutenberg")),
        jump: 0.5,
        substitute: 0.5,
        reuse: 0.5,
        heaps_k: 30.0,
        heaps_beta: 0.6,
        heaps_n0: 1e7,
    };
    let mut it = std::env::args().skip(1);
    while let Some(flag) = it.next() {
        let mut val = || {
            it.next()
                .unwrap_or_else(|| die(&format!("{flag} needs a value")))
        };
        let num = |v: String| -> f64 {
            v.parse()
                .unwrap_or_else(|_| die(&format!("{v:?} is not a number")))
        };
        match flag.as_str() {
            "--size" => a.size = parse_size(&val()),
            "--seed" => a.seed = num(val()) as u64,
            "--out" => a.out = PathBuf::from(val()),
            "--growth" => a.growth = Some(PathBuf::from(val())),
            "--source" => a.source = PathBuf::from(val()),
            "--jump" => a.jump = num(val()),
            "--substitute" => a.substitute = num(val()),
            "--reuse" => a.reuse = num(val()),
            "--heaps-k" => a.heaps_k = num(val()),
            "--heaps-beta" => a.heaps_beta = num(val()),
            "--heaps-n0" => a.heaps_n0 = num(val()),
            _ => die(&format!(
                "unknown flag {flag:?} (see the doc comment of tests/bench/corpus.rs)"
            )),
        }
    }
    a
}

/// splitmix64: small, fast, and fully determined by the seed.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: usize) -> usize {
        ((self.next() as u128 * n as u128) >> 64) as usize
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// The source as a token stream with, per type, the positions it occurs at.
struct Source {
    words: Vec<String>,
    /// Token stream as type indices.
    stream: Vec<u32>,
    /// `ends[i]`: a sentence ends after token i.
    ends: Vec<bool>,
    /// Positions where a sentence starts.
    starts: Vec<u32>,
    /// Occurrences of each type (positions into `stream`).
    occ: Vec<Vec<u32>>,
    lookup: HashMap<String, u32>,
    /// Substitution classes: types of the same shape and similar frequency.
    classes: Vec<Vec<u32>>,
    /// The class of each type.
    class_of: Vec<u32>,
}

fn files_under(dir: &Path, out: &mut Vec<PathBuf>) {
    if dir.is_file() {
        out.push(dir.to_path_buf());
        return;
    }
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap_or_else(|e| die(&format!("read {}: {e}", dir.display())))
        .map(|e| e.expect("directory entry").path())
        .collect();
    entries.sort();
    for p in entries {
        files_under(&p, out);
    }
}

fn ends_sentence(tok: &str) -> bool {
    const TITLES: [&str; 6] = ["Mr.", "Mrs.", "Dr.", "St.", "Messrs.", "Col."];
    let t = tok.trim_end_matches(['"', '\'', ')', '\u{201d}', '\u{2019}']);
    t.ends_with(['.', '!', '?']) && !TITLES.contains(&t)
}

impl Source {
    fn load(path: &Path) -> Source {
        let mut files = Vec::new();
        files_under(path, &mut files);
        let mut s = Source {
            words: Vec::new(),
            stream: Vec::new(),
            ends: Vec::new(),
            starts: Vec::new(),
            occ: Vec::new(),
            lookup: HashMap::new(),
            classes: Vec::new(),
            class_of: Vec::new(),
        };
        for f in files {
            let text = std::fs::read(&f).unwrap_or_else(|e| die(&format!("{}: {e}", f.display())));
            let text = String::from_utf8_lossy(&text);
            let mut at_start = true;
            for line in text.lines() {
                if line.trim().is_empty() {
                    if let Some(last) = s.ends.last_mut() {
                        *last = true;
                    }
                    at_start = true;
                    continue;
                }
                for tok in line.split_whitespace() {
                    if at_start {
                        s.starts.push(s.stream.len() as u32);
                    }
                    let id = match s.lookup.get(tok) {
                        Some(&id) => id,
                        None => {
                            let id = s.words.len() as u32;
                            s.words.push(tok.to_string());
                            s.lookup.insert(tok.to_string(), id);
                            s.occ.push(Vec::new());
                            id
                        }
                    };
                    s.occ[id as usize].push(s.stream.len() as u32);
                    s.stream.push(id);
                    let end = ends_sentence(tok);
                    s.ends.push(end);
                    at_start = end;
                }
            }
            if let Some(last) = s.ends.last_mut() {
                *last = true;
            }
        }
        if s.stream.is_empty() {
            die(&format!("no text in {}", path.display()));
        }
        s.classify();
        s
    }

    /// Groups the types into substitution classes by `class_key`, in type
    /// order (so the classes do not depend on hash order). A type seen
    /// `COMMON` times or more is a class of its own.
    fn classify(&mut self) {
        let mut index: HashMap<ClassKey, u32> = HashMap::new();
        for (id, w) in self.words.iter().enumerate() {
            let count = self.occ[id].len();
            let new = self.classes.len() as u32;
            let c = if count >= COMMON {
                new
            } else {
                *index.entry(class_key(w, count)).or_insert(new)
            };
            if c == new {
                self.classes.push(Vec::new());
            }
            self.classes[c as usize].push(id as u32);
            self.class_of.push(c);
        }
    }
}

/// Frequency band, first-character kind, last-character kind, sentence end.
type ClassKey = (u32, char, char, bool);

/// A source type seen at most this often is rare: its slots may take an
/// invented type instead (`--reuse`).
const RARE: usize = 8;

/// A source type seen this often or more (function words) is never
/// substituted, nor substituted for.
const COMMON: usize = 1000;

/// Width of a frequency band: types whose source counts are within a factor
/// of this of each other share a band.
const BAND_RATIO: f64 = 1.5;

/// The substitution class of a word seen `count` times in the source: the
/// same frequency band (`BAND_RATIO`), the same case or leading punctuation,
/// the same trailing punctuation and the same sentence-end status, so that a
/// substitute fills the slot like the original (`said,` for `replied,`,
/// `Bath.` for `London.`) and the walk's sentence ends stay where they were.
fn class_key(word: &str, count: usize) -> ClassKey {
    let band = ((count as f64).ln() / BAND_RATIO.ln() + 1e-9) as u32;
    let kind = |c: char| {
        if c.is_uppercase() {
            'A'
        } else if c.is_lowercase() {
            'a'
        } else if c.is_numeric() {
            '0'
        } else {
            c
        }
    };
    let first = word.chars().next().map_or(' ', kind);
    let last = word.chars().next_back().map_or(' ', |c| match kind(c) {
        'A' => 'a',
        k => k,
    });
    (band, first, last, ends_sentence(word))
}

/// Two letters each, so a spelling splits into syllables one way only.
const SYLLABLES: [&str; 24] = [
    "ka", "ro", "mi", "to", "sa", "li", "du", "ne", "ve", "bo", "ta", "ri", "fe", "gu", "pa", "lo",
    "we", "ny", "ce", "ha", "zu", "mo", "ki", "da",
];

/// The spelling of invented type `i`: distinct for distinct `i` within each
/// kind, and the kinds are told apart by their first character.
fn invented(i: u64, out: &mut String) {
    use std::fmt::Write;
    out.clear();
    let kind = i % 8;
    let j = i / 8;
    match kind {
        // Names: capitalised syllables, a bijective base-24 spelling of
        // the name's own index.
        0..=3 => {
            let mut n = j * 4 + kind + 1;
            // 24^14 > 2^64: at most 14 syllables.
            let mut parts = [""; 14];
            let mut len = 0;
            while n > 0 {
                n -= 1;
                parts[len] = SYLLABLES[(n % 24) as usize];
                len += 1;
                n /= 24;
            }
            let mut first = true;
            for p in parts[..len].iter().rev() {
                if first {
                    let mut c = p.chars();
                    out.push(c.next().unwrap().to_ascii_uppercase());
                    out.push_str(c.as_str());
                    first = false;
                } else {
                    out.push_str(p);
                }
            }
        }
        // Numbers: integers, decimals, amounts, years with a suffix.
        4 => write!(out, "{}", j * 7 + 1000).unwrap(),
        5 => write!(out, "{}.{:02}", j / 100, j % 100).unwrap(),
        6 => write!(out, "{j},000").unwrap(),
        // Junk: an identifier-like token with digits.
        _ => write!(out, "x{j:x}_{}", j % 97).unwrap(),
    }
}

#[derive(serde::Serialize)]
struct Checkpoint {
    bytes: u64,
    sentences: u64,
    tokens: u64,
    source_types: u64,
    invented_types: u64,
    types: u64,
}

fn main() {
    let a = args();
    let src = Source::load(&a.source);
    let mut rng = Rng(a.seed ^ 0x5EED_0FC0_FFEE);
    let mut out: Box<dyn Write> = if a.out.as_os_str() == "-" {
        Box::new(std::io::stdout().lock())
    } else {
        Box::new(
            std::fs::File::create(&a.out)
                .unwrap_or_else(|e| die(&format!("create {}: {e}", a.out.display()))),
        )
    };
    let mut buf: Vec<u8> = Vec::with_capacity(1 << 20);
    let mut used = vec![false; src.words.len()];
    let (mut bytes, mut sentences, mut tokens) = (0u64, 0u64, 0u64);
    let (mut source_types, mut invented_types, mut invented_next) = (0u64, 0u64, 0u64);
    // The token count at which the Heaps curve K((n + n0)^β − n0^β) reaches
    // `v` invented types (its inverse, so no power per token).
    let due_at = |v: u64| {
        let n = (v as f64 / a.heaps_k + a.heaps_n0.powf(a.heaps_beta)).powf(1.0 / a.heaps_beta)
            - a.heaps_n0;
        n.max(0.0).ceil() as u64
    };
    let mut next_due = due_at(1);
    let mut checkpoints = Vec::new();
    let mut next_mark: u64 = 1 << 20;
    let mut word = String::new();
    while bytes < a.size {
        let mut p = src.starts[rng.below(src.starts.len())] as usize;
        let start = buf.len();
        for step in 0..200 {
            tokens += 1;
            if step > 0 {
                buf.push(b' ');
            }
            if tokens >= next_due {
                invented(invented_next, &mut word);
                invented_next += 1;
                next_due = due_at(invented_next + 1);
                if !src.lookup.contains_key(&word) {
                    invented_types += 1;
                }
                buf.extend_from_slice(word.as_bytes());
            } else if invented_next > 0
                && src.occ[src.stream[p] as usize].len() <= RARE
                && rng.unit() < a.reuse
            {
                // Log-uniform index: P(i) ∝ 1/(i+1).
                let i = ((invented_next as f64).powf(rng.unit()) as u64).saturating_sub(1);
                invented(i.min(invented_next - 1), &mut word);
                buf.extend_from_slice(word.as_bytes());
            } else {
                let mut id = src.stream[p] as usize;
                let class = &src.classes[src.class_of[id] as usize];
                if class.len() > 1 && rng.unit() < a.substitute {
                    id = class[rng.below(class.len())] as usize;
                }
                if !used[id] {
                    used[id] = true;
                    source_types += 1;
                }
                buf.extend_from_slice(src.words[id].as_bytes());
            }
            if src.ends[p] || p + 1 == src.stream.len() {
                break;
            }
            if rng.unit() < a.jump {
                let o = &src.occ[src.stream[p] as usize];
                p = o[rng.below(o.len())] as usize;
                if src.ends[p] || p + 1 == src.stream.len() {
                    break;
                }
            }
            p += 1;
        }
        buf.push(b'\n');
        sentences += 1;
        bytes += (buf.len() - start) as u64;
        if buf.len() >= 1 << 20 {
            out.write_all(&buf)
                .unwrap_or_else(|e| die(&format!("write: {e}")));
            buf.clear();
        }
        if bytes >= next_mark || bytes >= a.size {
            checkpoints.push(Checkpoint {
                bytes,
                sentences,
                tokens,
                source_types,
                invented_types,
                types: source_types + invented_types,
            });
            while next_mark <= bytes {
                next_mark *= 2;
            }
        }
    }
    out.write_all(&buf)
        .unwrap_or_else(|e| die(&format!("write: {e}")));
    out.flush().unwrap_or_else(|e| die(&format!("write: {e}")));
    if let Some(g) = &a.growth {
        let json = serde_json::json!({
            "seed": a.seed,
            "size": a.size,
            "source": a.source,
            "jump": a.jump,
            "substitute": a.substitute,
            "reuse": a.reuse,
            "heaps": {"k": a.heaps_k, "beta": a.heaps_beta, "n0": a.heaps_n0},
            "checkpoints": checkpoints,
        });
        std::fs::write(g, serde_json::to_vec_pretty(&json).unwrap())
            .unwrap_or_else(|e| die(&format!("write {}: {e}", g.display())));
    }
}
