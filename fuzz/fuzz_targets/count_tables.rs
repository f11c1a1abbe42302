//! The count-table reader (`ingest --counts`): arbitrary bytes read line by
//! line at orders 1 to 8. Any outcome but a panic is fine; a line that
//! reads must hold what the reader promises (1 to N non-empty words
//! without a space or tab, `<s>` only first and `</s>` only last, a
//! positive count equal to the decimal digits of its field), and a refusal
//! must say what was expected.
#![no_main]

use libfuzzer_sys::fuzz_target;
use quern::corpus::count_table::{is_header, read_line};

fuzz_target!(|data: &[u8]| {
    let Some((&first, rest)) = data.split_first() else {
        return;
    };
    let order = 1 + first as usize % 8;
    for line in rest.split(|&b| b == b'\n') {
        if is_header(line) {
            continue;
        }
        match read_line(line, order) {
            Ok(l) => {
                let words: Vec<&str> = l.words().collect();
                assert_eq!(words.len(), l.order);
                assert!((1..=order).contains(&l.order));
                for (i, w) in words.iter().enumerate() {
                    assert!(!w.is_empty() && !w.contains(' ') && !w.contains('\t'));
                    assert!(*w != "<s>" || i == 0);
                    assert!(*w != "</s>" || i + 1 == words.len());
                }
                assert!(l.count > 0);
                let text = std::str::from_utf8(line).expect("a line that reads is UTF-8");
                let field = text.split('\t').nth(1).expect("a count field");
                assert_eq!(field.parse::<u64>().ok(), Some(l.count));
                assert!(field.bytes().all(|b| b.is_ascii_digit()));
            }
            Err(e) => assert!(!e.expected.is_empty() && !e.found.is_empty()),
        }
    }
});
