//! Records written by older format versions, converted on reading.
//!
//! Store metadata of version 2, and ingest manifests and cluster stage
//! records of version 1, may name the left-type statistics by the names
//! they had before: the per-order count-of-counts, now `coc_left_type`,
//! and the context sum, now `left_type_sum`. Nothing else changed, so
//! converting one is renaming those fields wherever they occur. They are
//! found by their place, not by their earlier names ([`rename_fields`]);
//! a record that already has the new names (written between the rename
//! and the version bump) is left as it is. The readers pass these
//! functions to [`crate::fsutil::parse_upgraded`].

use serde_json::Value;

/// Gives the left-type statistics their current names in every object of
/// `v`. In the older records each sits beside a statistic that kept its
/// name: an order's left-type count-of-counts is the one field besides
/// `coc_raw` whose name starts with `coc_`, and a context's left-type sum
/// the one besides `count_sum` whose name ends with `_sum`.
fn rename_fields(v: &mut Value) {
    match v {
        Value::Object(m) => {
            if m.contains_key("coc_raw") {
                rename_the_other(m, "coc_raw", |k| k.starts_with("coc_"), "coc_left_type");
            }
            if m.contains_key("count_sum") {
                rename_the_other(m, "count_sum", |k| k.ends_with("_sum"), "left_type_sum");
            }
            m.values_mut().for_each(rename_fields);
        }
        Value::Array(a) => a.iter_mut().for_each(rename_fields),
        _ => {}
    }
}

/// Renames to `new` the one field of `m` other than `kept` that `like`
/// picks, unless `m` has `new` already; with none or several such fields
/// nothing is renamed (and the record then fails to read, naming `new`).
fn rename_the_other(
    m: &mut serde_json::Map<String, Value>,
    kept: &str,
    like: impl Fn(&str) -> bool,
    new: &str,
) {
    if m.contains_key(new) {
        return;
    }
    let mut others = m.keys().filter(|k| *k != kept && like(k));
    if let (Some(old), None) = (others.next(), others.next()) {
        let old = old.clone();
        let x = m.remove(&old).expect("a key just seen");
        m.insert(new.to_string(), x);
    }
}

/// Converts store metadata of version 2 to the current version
/// ([`super::STORE_VERSION`]); false for any other version.
pub fn upgrade_store_meta(found: u32, v: &mut Value) -> bool {
    if found != 2 {
        return false;
    }
    rename_fields(v);
    true
}

/// Converts an ingest manifest or a cluster stage record (plan or output)
/// of version 1, whose partition statistics may carry the old names;
/// false for any other version.
pub fn upgrade_partition_records(found: u32, v: &mut Value) -> bool {
    if found != 1 {
        return false;
    }
    rename_fields(v);
    true
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::records::{ContextStats, OrderStats, PartitionStats, StoreMeta, STORE_VERSION};
    use std::path::Path;

    /// Store metadata in version 2's shape (the fields and their order of
    /// `StoreMeta` at that version, before the word list and the rename),
    /// the left-type statistics under the earlier names [`OLD_COC`] and
    /// [`OLD_SUM`]: the conversion finds them by their place, so any names
    /// there stand for the ones version 2 wrote.
    /// The numbers are those of the text `a b a` at order 2, counted by
    /// hand: unigrams a 2, b 1, `</s>` 1 (T = 4, three types, V = 4 with
    /// `<unk>`); bigrams `<s> a`, `a b`, `b a`, `a </s>` once each; left
    /// types: a after `<s>` and b (2), b after a (1), `</s>` after a (1).
    const OLD_COC: &str = "coc_earlier";
    const OLD_SUM: &str = "earlier_sum";
    const V2: &str = r#"{"format_version":2,
        "settings":{"order":2,"lowercase":false,"max_line_bytes":1048576},
        "totals":{"sentences":1,"tokens":4,"types":3,"vocabulary":4,"unk_seen":false,
                  "skipped_lines":0,"invalid_utf8_lines":0,"marker_tokens":0,"input_bytes":6},
        "orders":[{"order":1,"ngrams":4,"coc_raw":[[1,2],[2,1]],"coc_earlier":[[1,2],[2,1]]},
                  {"order":2,"ngrams":4,"coc_raw":[[1,4]],"coc_earlier":[[1,4]]}],
        "root":{"count_sum":4,"types":3,"earlier_sum":4,"n1":2,"n2":1,"n3plus":0},
        "growth":null}"#;

    #[test]
    fn store_metadata_of_version_2_reads_into_the_current_record() {
        let p = Path::new("meta");
        let m: StoreMeta =
            crate::fsutil::parse_upgraded(p, V2.as_bytes(), STORE_VERSION, upgrade_store_meta)
                .unwrap();
        assert_eq!(m.format_version, STORE_VERSION);
        assert_eq!(m.settings.order, 2);
        assert_eq!(m.totals.tokens, 4);
        assert_eq!(m.totals.vocabulary, 4);
        assert_eq!(
            m.orders[0],
            OrderStats {
                order: 1,
                ngrams: 4,
                coc_raw: vec![(1, 2), (2, 1)],
                coc_left_type: vec![(1, 2), (2, 1)],
            }
        );
        assert_eq!(m.orders[1].coc_left_type, vec![(1, 4)]);
        assert_eq!(
            m.root,
            ContextStats {
                count_sum: 4,
                types: 3,
                left_type_sum: 4,
                n1: 2,
                n2: 1,
                n3plus: 0,
            }
        );
        assert_eq!(m.growth, None);
        // A record of version 2 with the new names (written between the
        // rename and the version bump) reads the same.
        let renamed = V2
            .replace(OLD_COC, "coc_left_type")
            .replace(OLD_SUM, "left_type_sum");
        let m2: StoreMeta =
            crate::fsutil::parse_upgraded(p, renamed.as_bytes(), STORE_VERSION, upgrade_store_meta)
                .unwrap();
        assert_eq!(m2, m);
        // The current version has no old names: they are not read.
        let current = V2.replace(
            "\"format_version\":2",
            &format!("\"format_version\":{STORE_VERSION}"),
        );
        let e = crate::fsutil::parse_upgraded::<StoreMeta>(
            p,
            current.as_bytes(),
            STORE_VERSION,
            upgrade_store_meta,
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("coc_left_type"), "{e}");
        // Two fields where one left-type statistic belongs: which is meant
        // is not known, so neither is taken.
        let two = V2.replace(
            "\"coc_raw\":[[1,4]],",
            "\"coc_raw\":[[1,4]],\"coc_other\":[[1,4]],",
        );
        let e = crate::fsutil::parse_upgraded::<StoreMeta>(
            p,
            two.as_bytes(),
            STORE_VERSION,
            upgrade_store_meta,
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("coc_left_type"), "{e}");
        // Version 1 is not converted.
        let v1 = V2.replace("\"format_version\":2", "\"format_version\":1");
        let e = crate::fsutil::parse_upgraded::<StoreMeta>(
            p,
            v1.as_bytes(),
            STORE_VERSION,
            upgrade_store_meta,
        )
        .unwrap_err();
        assert!(
            matches!(e, crate::Error::Version { found: 1, expected, .. } if expected == STORE_VERSION),
            "{e}"
        );
    }

    #[test]
    fn partition_statistics_of_version_1_read_into_the_current_record() {
        #[derive(serde::Deserialize)]
        struct Wrapped {
            #[allow(dead_code)]
            format_version: u32,
            stats: PartitionStats,
        }
        let v1 = r#"{"format_version":1,"stats":{"ngrams":[4,4],
            "coc_raw":[{"1":2,"2":1},{"1":4}],"coc_earlier":[{"1":2,"2":1},{"1":4}],
            "root":{"count_sum":4,"types":3,"earlier_sum":4,"n1":2,"n2":1,"n3plus":0},
            "unk_seen":false}}"#;
        let w: Wrapped = crate::fsutil::parse_upgraded(
            Path::new("m"),
            v1.as_bytes(),
            2,
            upgrade_partition_records,
        )
        .unwrap();
        assert_eq!(w.stats.coc_left_type[0].get(&2), Some(&1));
        assert_eq!(w.stats.coc_left_type[1].get(&1), Some(&4));
        assert_eq!(w.stats.root.left_type_sum, 4);
    }
}
