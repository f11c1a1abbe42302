//! The ARPA reader: arbitrary bytes read as ARPA text. Any outcome but a
//! panic, a hang or a huge allocation is fine; on success the model must
//! hold what the reader promises (the header's orders, every context an
//! entry of the order below, every word a unigram, q in [0, 1], β finite
//! and ≥ 0), and an error must name a line of the input.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use quern::arpa::read_arpa;
use quern::Error;

fuzz_target!(|data: &[u8]| {
    match read_arpa(data, Path::new("fuzz.arpa")) {
        Ok(m) => {
            let n = m.order();
            assert!(n >= 1);
            let words = m.words.len();
            assert_eq!(m.orders[0].len(), words);
            for (i, o) in m.orders.iter().enumerate() {
                assert_eq!(o.q.len(), o.len());
                assert_eq!(o.context.len(), o.len());
                assert_eq!(o.beta.len(), if i + 1 < n { o.len() } else { 0 });
                for e in 0..o.len() {
                    assert!((o.word[e] as usize) < words);
                    if i > 0 {
                        assert!((o.context[e] as usize) < m.orders[i - 1].len());
                    }
                    assert!((0.0..=1.0).contains(&o.q[e]));
                }
                assert!(o.beta.iter().all(|b| b.is_finite() && *b >= 0.0));
            }
        }
        Err(Error::BadLine { line, .. }) => {
            let lines = data.iter().filter(|&&b| b == b'\n').count() as u64 + 1;
            assert!(line >= 1 && line <= lines + 1, "line {line} of {lines}");
        }
        Err(e) => panic!("an error that names no line: {e}"),
    }
});
