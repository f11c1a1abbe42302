//! The JSON-lines document reader: arbitrary bytes as one input line, read
//! as a document under a text field named by the first byte. Any outcome
//! but a panic, a hang or a huge allocation is fine; a document found must
//! agree with serde_json's own reading of the line as a `Value` (the text
//! field of an object, a string), and a line serde_json reads as such an
//! object must not be called bad.
#![no_main]

use libfuzzer_sys::fuzz_target;

use quern::corpus::{read_document, sentences, Format};

fuzz_target!(|data: &[u8]| {
    let Some((&mode, line)) = data.split_first() else {
        return;
    };
    let field = ["text", "t", "", "id"][mode as usize % 4];
    let format = Format::json_lines(field);
    let got = read_document(&format, line);
    let reference = serde_json::from_slice::<serde_json::Value>(line)
        .ok()
        .and_then(|v| match v {
            serde_json::Value::Object(mut o) => Some(o.remove(field)),
            _ => None,
        });
    match (got, reference) {
        (Ok(doc), Some(Some(serde_json::Value::String(s)))) => {
            assert_eq!(&*doc.text, s.as_bytes(), "text differs from serde_json's");
            let pieces = sentences(&doc.text).count();
            assert_eq!(pieces, doc.text.iter().filter(|&&b| b == b'\n').count() + 1);
        }
        // Skipped fields are passed over without being built, so a value
        // serde_json refuses to build (a number out of range) may stand in
        // one: the reader may find a document where serde_json fails.
        (Ok(_), None) => {}
        (Ok(_), Some(other)) => panic!("a document where serde_json finds {other:?}"),
        (Err(_), Some(Some(serde_json::Value::String(_)))) => {
            panic!("a bad line where serde_json finds a string text field")
        }
        (Err(_), _) => {}
    }
});
