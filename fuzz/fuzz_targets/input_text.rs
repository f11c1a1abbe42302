//! Input decoding and tokenizing: arbitrary bytes as a plain, gzip or
//! Zstandard input file, read line by line with a small line limit and
//! tokenized. Any outcome but a panic, a hang or a huge allocation is fine;
//! on success the lines must tile the stream and the ids must be padded.
#![no_main]

use std::io::Write;

use libfuzzer_sys::fuzz_target;

#[path = "scratch.rs"]
mod scratch;
use quern::corpus::{open_at, Compression, InputFile, Line, LineReader};
use quern::tokenize::Tokenizer;
use quern::words::{bos_id, eos_id, Dictionary};

fuzz_target!(|data: &[u8]| {
    let Some((&mode, body)) = data.split_first() else {
        return;
    };
    let compression = match mode % 3 {
        0 => Compression::None,
        1 => Compression::Gzip,
        _ => Compression::Zstd,
    };
    let lowercase = mode & 4 != 0;
    // Half the time, wrap the bytes in a valid container so the text path
    // behind the decoder is reached too; otherwise feed them raw.
    let wrap = mode & 8 != 0;
    let bytes: Vec<u8> = match (compression, wrap) {
        (Compression::Gzip, true) => {
            let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
            e.write_all(body).unwrap();
            e.finish().unwrap()
        }
        (Compression::Zstd, true) => zstd::encode_all(body, 1).unwrap(),
        _ => body.to_vec(),
    };
    let path = scratch::dir().join("input");
    std::fs::write(&path, &bytes).unwrap();
    let f = InputFile {
        path: path.clone(),
        compression,
        size: bytes.len() as u64,
        mtime_ns: 0,
    };
    let Ok(inner) = open_at(&f, 0) else {
        return;
    };
    let max_line = 1 + (mode as usize >> 4) * 4;
    let mut lines = LineReader::new(inner, path, 0, u64::MAX, max_line);
    let tok = Tokenizer::new(quern::tokenize::Preparation {
        lowercase,
        ..Default::default()
    });
    let mut dict = Dictionary::default();
    let mut line = Vec::new();
    let mut ids = Vec::new();
    let mut last = 0;
    loop {
        match lines.next_line(&mut line) {
            Ok(Line::End) => break,
            Ok(Line::TooLong) => {}
            Ok(Line::Text) => {
                assert!(line.len() <= max_line, "line longer than the limit");
                assert!(!line.contains(&b'\n'), "a line holds a newline");
                if tok.sentence(&line, &mut dict, &mut ids).is_ok() && !ids.is_empty() {
                    assert!(ids.len() >= 3, "a sentence has <s>, a word and </s>");
                    assert_eq!(ids[0], bos_id());
                    assert_eq!(*ids.last().unwrap(), eos_id());
                }
            }
            Err(_) => return,
        }
        assert!(lines.position() >= last, "position went backwards");
        last = lines.position();
    }
    if compression == Compression::None {
        assert_eq!(last, bytes.len() as u64, "plain input not read to its end");
    }
});
