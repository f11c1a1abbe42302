//! `quern top`: a frequency list of one order.

use quern::linguistics::freq::{top, FreqOptions};
use quern::linguistics::{Markers, Vocabulary};

use super::list::{freq_rows, write_list};
use super::prob::open_store;
use crate::cli::args::TopArgs;

pub fn run(a: TopArgs) -> anyhow::Result<()> {
    let store = open_store(&a.store)?;
    let vocab = Vocabulary::of(&store)?;
    let opts = FreqOptions {
        order: a.order,
        min_count: a.min_count,
        min_documents: a.min_documents,
        limit: a.limit,
        markers: if a.markers {
            Markers::With
        } else {
            Markers::Without
        },
    };
    let items = top(&store, &vocab, &opts)?;
    let (header, rows) = freq_rows(items, store.has_documents());
    write_list(&mut std::io::stdout().lock(), a.format, &header, rows)
}
