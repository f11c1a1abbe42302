//! The files an ingest reads back from its work folder: arbitrary bytes as
//! a run file or a dictionary file. They must yield records or an error,
//! never a panic, a hang or an allocation the size of a claimed length; a
//! section that reads to its end must hold keys in strictly rising order.
#![no_main]

use std::path::PathBuf;
use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;
use quern::shard::{DictReader, RunFile};

fn scratch() -> &'static PathBuf {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let base = if std::path::Path::new("/dev/shm").is_dir() {
            PathBuf::from("/dev/shm")
        } else {
            std::env::temp_dir()
        };
        let d = base.join(format!("quern-fuzz-work-{}", std::process::id()));
        std::fs::create_dir_all(&d).unwrap();
        d
    })
}

fuzz_target!(|data: &[u8]| {
    let Some((&mode, body)) = data.split_first() else {
        return;
    };
    let path = scratch().join("file");
    std::fs::write(&path, body).unwrap();
    if mode & 1 == 0 {
        let Ok(run) = RunFile::open(&path) else {
            return;
        };
        // A corrupt header may claim many partitions; the entry table was
        // read from the file, so the count is bounded by the file's size.
        for p in 0..run.partitions() {
            let Ok(mut s) = run.section(p) else {
                continue;
            };
            let mut prev = None;
            loop {
                match s.next_record() {
                    Ok(Some((k, _))) => {
                        if let Some(q) = prev {
                            assert!(k > q, "keys out of order were returned");
                        }
                        prev = Some(k);
                    }
                    Ok(None) | Err(_) => break,
                }
            }
        }
    } else {
        let Ok(mut d) = DictReader::open(&path) else {
            return;
        };
        let mut prev = None;
        while let Ok(Some((id, _))) = d.next_entry() {
            if let Some(q) = prev {
                assert!(id > q, "dictionary ids out of order were returned");
            }
            prev = Some(id);
        }
    }
});
