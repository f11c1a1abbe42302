//! Paging through the stored n-grams that begin with given words.

use crate::error::{Error, Result};
use crate::key::Key;
use crate::store::Store;
use crate::words::WordId;

/// One page of n-grams.
#[derive(Clone, Debug, PartialEq)]
pub struct Page {
    /// `(n-gram, count, continuation)` in key order; continuation is `None`
    /// at the top order.
    pub items: Vec<(Key, u64, Option<u64>)>,
    /// The last n-gram of this page if more follow: pass it as `after` for
    /// the next page ([`cursor`] writes it for a user).
    pub next: Option<Key>,
}

/// The cursor of a page's last n-gram, as `quern ngrams` and the
/// service's `/ngrams` hand it out: the ids of its words, 16 hex digits
/// each.
pub fn cursor(ids: &[WordId]) -> String {
    ids.iter().map(|i| format!("{i:016x}")).collect()
}

/// The ids of a cursor made by [`cursor`], or `None` if `s` is not one.
pub fn parse_cursor(s: &str) -> Option<Vec<WordId>> {
    if s.is_empty() || !s.len().is_multiple_of(16) || !s.is_ascii() {
        return None;
    }
    (0..s.len() / 16)
        .map(|i| u64::from_str_radix(&s[i * 16..i * 16 + 16], 16).ok())
        .collect()
}

/// Up to `limit` stored n-grams of order `order` that begin with `prefix`,
/// after the n-gram `after` if given, in key order (the order of the
/// words' ids, not alphabetical).
pub fn prefix_page(
    store: &Store,
    prefix: &[WordId],
    order: usize,
    limit: usize,
    after: Option<&[WordId]>,
) -> Result<Page> {
    if order == 0 || order > store.order() || order < prefix.len() {
        return Err(Error::Config(format!(
            "order {order}: n-grams beginning with {} words exist at orders {} to {}",
            prefix.len(),
            prefix.len().max(1),
            store.order()
        )));
    }
    if let Some(a) = after {
        if a.len() != order || !a.starts_with(prefix) {
            return Err(Error::Config(
                "the cursor does not belong to this prefix and order".into(),
            ));
        }
    }
    let mut items = Vec::with_capacity(limit.min(1 << 16));
    let mut more = false;
    for item in store.scan_prefix(order, prefix, after)? {
        let item = item?;
        if items.len() == limit {
            more = true;
            break;
        }
        items.push(item);
    }
    let next = if more {
        items.last().map(|x| x.0)
    } else {
        None
    };
    Ok(Page { items, next })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A cursor reads back as the ids it was made of; anything else is
    /// refused.
    #[test]
    fn cursor_round_trips_and_refuses_other_text() {
        let ids = [0u64, 1, u64::MAX, 0x0123_4567_89ab_cdef];
        assert_eq!(parse_cursor(&cursor(&ids)).as_deref(), Some(&ids[..]));
        for bad in ["", "abc", "0123456789abcdeg", "é123456789abcde"] {
            assert_eq!(parse_cursor(bad), None, "{bad:?}");
        }
    }
}
