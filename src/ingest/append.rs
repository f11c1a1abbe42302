//! `--append`: a finished store's counts exported as a base run, its words
//! as a dictionary and its growth curve, so that the new inputs are merged
//! on top of them like one more spill.

use std::path::Path;

use super::manifest::{self, Base};
use crate::error::{Error, Result};
use crate::growth;
use crate::key::Key;
use crate::merge::{KWayMerge, RecordSource};
use crate::records::{ReadTotals, Settings};
use crate::shard::{DictWriter, RunWriter, Values};
use crate::store::{NgramRecord, Store};
use crate::words::WordId;

/// Writes a finished store's raw counts as one run file, and its words as a
/// dictionary, for `--append`.
pub(super) fn export_base(
    store_dir: &Path,
    runs: &Path,
    settings: &Settings,
    parts: u32,
) -> Result<Base> {
    let s = Store::open(store_dir)?;
    let have = s.meta().settings;
    if have.word_list != settings.word_list {
        let say = |w: &Option<crate::records::WordListInfo>| match w {
            Some(w) => format!("a word list of {} words (xxh3 {:016x})", w.words, w.xxh3),
            None => "no word list".to_string(),
        };
        return Err(Error::state(
            store_dir,
            format!(
                "the store was built with {}, this command gives {}: --append must use the same --word-list (the store's is {})",
                say(&have.word_list),
                say(&settings.word_list),
                crate::layout::word_list(store_dir).display()
            ),
        ));
    }
    if have.from_counts != settings.from_counts {
        let say = |c: bool| if c { "count tables (--counts)" } else { "text" };
        return Err(Error::state(
            store_dir,
            format!(
                "the store was built from {}, this command reads {}: --append adds inputs of the same kind only",
                say(have.from_counts),
                say(settings.from_counts)
            ),
        ));
    }
    if have.unique != settings.unique {
        return Err(Error::state(
            store_dir,
            format!(
                "the store was built with {}, this command gives {}: --append must use the same setting",
                crate::records::Unique::describe(have.unique),
                crate::records::Unique::describe(settings.unique)
            ),
        ));
    }
    if have.document_counts != settings.document_counts {
        return Err(Error::state(
            store_dir,
            format!(
                "the store was built with {}, this command gives {}: --append must use the same setting",
                crate::records::Settings::describe_document_counts(have.document_counts),
                crate::records::Settings::describe_document_counts(settings.document_counts)
            ),
        ));
    }
    if have.order != settings.order || have.preparation != settings.preparation {
        return Err(Error::state(
            store_dir,
            format!(
                "the store was built with order {} and {}; this command asks for order {} and {}: --append must use the same settings",
                have.order,
                have.preparation.describe(),
                settings.order,
                settings.preparation.describe()
            ),
        ));
    }
    // The counts, and with `--document-counts` the documents: the sums
    // the counting workers' runs hold.
    let docs = settings.document_counts;
    type Rows<'a> = Box<dyn Iterator<Item = Result<(Key, NgramRecord)>> + 'a>;
    struct OrderIter<'a>(Rows<'a>);
    impl RecordSource for OrderIter<'_> {
        fn next_record(&mut self) -> Result<Option<(Key, Values)>> {
            Ok(self
                .0
                .next()
                .transpose()?
                .map(|(k, r)| (k, [r.count, r.documents.unwrap_or(0), 0, 0])))
        }
    }
    let sources = (1..=settings.order)
        .map(|k| Ok(OrderIter(Box::new(s.scan_records(k, &[], None)?))))
        .collect::<Result<Vec<_>>>()?;
    let mut merge = KWayMerge::new(sources)?;
    let run = "base.run".to_string();
    let mut w = RunWriter::create(&runs.join(&run), parts, 1 + usize::from(docs))?;
    let mut counts_sum = 0u64;
    while let Some((k, v)) = merge.next_record()? {
        counts_sum = counts_sum.saturating_add(v[0]);
        w.push(crate::key::partition_of(k.ids()[0], parts), &k, &v)?;
    }
    w.finish()?;
    let mut words: Vec<(WordId, Box<str>)> = s
        .vocabulary()?
        .into_iter()
        .filter(|(id, _)| {
            ![
                crate::words::bos_id(),
                crate::words::eos_id(),
                crate::words::unk_id(),
            ]
            .contains(id)
        })
        .map(|(id, w)| (id, w.into_boxed_str()))
        .collect();
    words.sort_unstable_by_key(|e| e.0);
    let dict = "base.dict".to_string();
    DictWriter::write(&runs.join(&dict), &words)?;
    let t = s.meta().totals;
    // The store's corpus comes before the new inputs: all its types are
    // seen at position 0.
    let growth = match &s.meta().growth {
        Some(curve) => {
            // The types are the stored unigrams but `<s>` (the vocabulary
            // may also name `<unk>` unseen).
            let mut all: Vec<(WordId, u32, u64)> = Vec::new();
            for row in s.ngrams(1)? {
                let (key, count, _) = row?;
                let id = key.ids()[0];
                if id != crate::words::bos_id() && count > 0 {
                    all.push((id, 0, 0));
                }
            }
            all.sort_unstable_by_key(|e| e.0);
            let firsts = "base.first".to_string();
            growth::file::write(&runs.join(&firsts), &[t.tokens.max(1)], &all)?;
            Some(manifest::BaseGrowth {
                firsts,
                tokens: t.tokens,
                curve: curve.clone(),
            })
        }
        None => None,
    };
    Ok(Base {
        run,
        dict,
        growth,
        totals: ReadTotals {
            sentences: t.sentences,
            skipped_lines: t.skipped_lines,
            invalid_utf8_lines: t.invalid_utf8_lines,
            marker_tokens: t.marker_tokens,
            mapped_tokens: t.mapped_tokens,
            bytes: t.input_bytes,
            bad_lines: t.bad_lines,
            counts_sum,
            duplicate_units: t.duplicate_units,
            duplicate_tokens: t.duplicate_tokens,
            documents: t.documents,
        },
    })
}
