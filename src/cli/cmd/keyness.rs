//! `quern keyness`: the n-grams key in a study store against a reference
//! store, with an optional figure.

use anyhow::bail;
use quern::linguistics::keyness::{keyness, KeyItem, KeySort, KeynessOptions};
use quern::linguistics::Markers;
use quern::store::Store;

use super::list::{fixed, write_list, Row};
use super::prob::open_store;
use crate::cli::args::KeynessArgs;

/// One key n-gram as JSON.
#[derive(serde::Serialize)]
struct KeyJson<'a> {
    key: &'static str,
    #[serde(flatten)]
    item: &'a KeyItem,
}

pub fn run(a: KeynessArgs) -> anyhow::Result<()> {
    let study = open_store(&a.store)?;
    let reference = Store::open(&a.reference)?;
    let sort = match a.sort.as_str() {
        "g2" => KeySort::G2,
        "log_ratio" => KeySort::LogRatio,
        s => bail!("--sort {s:?}: g2 or log_ratio"),
    };
    let opts = KeynessOptions {
        order: a.order,
        min_count: a.min_count,
        min_g2: a.min_g2,
        limit: a.limit,
        sort,
        markers: if a.markers {
            Markers::With
        } else {
            Markers::Without
        },
    };
    let lists = keyness(&study, &reference, &opts)?;
    if let Some(path) = &a.figure {
        let title = format!(
            "Key {}-grams of {} against {}",
            a.order,
            name(&a.store.store),
            name(&a.reference)
        );
        quern::linguistics::figure::write_file(path, &lists, a.limit, &title)?;
    }
    let header = [
        "key",
        "ngram",
        "study_count",
        "reference_count",
        "study_per_million",
        "reference_per_million",
        "g2",
        "log_ratio",
        "percent_diff",
    ];
    let tagged = lists
        .positive
        .iter()
        .map(|i| ("positive", i))
        .chain(lists.negative.iter().map(|i| ("negative", i)));
    let rows = tagged.map(|(key, i)| Row {
        cells: vec![
            key.to_string(),
            i.ngram.clone(),
            i.study_count.to_string(),
            i.reference_count.to_string(),
            format!("{:.2}", i.study_per_million),
            format!("{:.2}", i.reference_per_million),
            fixed(i.g2),
            fixed(i.log_ratio),
            i.percent_diff.map_or("-".into(), |p| format!("{p:.2}")),
        ],
        json: KeyJson { key, item: i },
    });
    write_list(&mut std::io::stdout().lock(), a.format, &header, rows)
}

/// The last component of a store's path, for the figure's title.
fn name(p: &std::path::Path) -> String {
    p.file_name()
        .map_or_else(|| p.display().to_string(), |n| n.to_string_lossy().into())
}
