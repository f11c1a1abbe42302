//! `quern collocations`: the collocates of a node word, by association
//! measure, from the store alone.

use anyhow::{bail, Context};
use quern::linguistics::collocations::{collocations, CollocationOptions, Measure};
use quern::linguistics::{Markers, Vocabulary};
use quern::tokenize::query_ids;

use super::list::{fixed, write_list, Row};
use super::prob::open_store;
use crate::cli::args::CollocationsArgs;

/// `L,R` → (L, R).
fn parse_window(s: &str) -> anyhow::Result<(usize, usize)> {
    let (l, r) = s
        .split_once(',')
        .with_context(|| format!("--window {s:?}: write L,R, e.g. 2,2 or 0,1"))?;
    let n = |x: &str| {
        x.trim()
            .parse::<usize>()
            .with_context(|| format!("--window {s:?}: {x:?} is not a number of words"))
    };
    Ok((n(l)?, n(r)?))
}

pub fn run(a: CollocationsArgs) -> anyhow::Result<()> {
    let store = open_store(&a.store)?;
    let node = query_ids(&a.node, &store.meta().settings.preparation);
    if node.is_empty() {
        bail!("--node {:?}: no words", a.node);
    }
    let room = store.order().saturating_sub(node.len());
    let (left, right) = match &a.window {
        Some(w) => parse_window(w)?,
        None => (room, room),
    };
    let Some(sort) = Measure::from_name(&a.sort) else {
        let names: Vec<&str> = Measure::ALL.iter().map(|(_, n)| *n).collect();
        bail!("--sort {:?}: one of {}", a.sort, names.join(", "));
    };
    let opts = CollocationOptions {
        left,
        right,
        min_count: a.min_count,
        limit: a.limit,
        sort,
        markers: if a.markers {
            Markers::With
        } else {
            Markers::Without
        },
    };
    let list = collocations(&store, &Vocabulary::of(&store)?, &node, &opts)?;
    let header = [
        "collocate",
        "observed",
        "expected",
        "pmi",
        "t_score",
        "g2",
        "log_dice",
        "dice",
    ];
    let rows = list.into_iter().map(|c| Row {
        cells: vec![
            c.collocate.clone(),
            c.observed.to_string(),
            fixed(c.expected),
            fixed(c.pmi),
            fixed(c.t_score),
            fixed(c.g2),
            fixed(c.log_dice),
            fixed(c.dice),
        ],
        json: c,
    });
    write_list(&mut std::io::stdout().lock(), a.format, &header, rows)
}
