use super::*;
use crate::key::Key;

fn sample(dir: &std::path::Path) -> std::path::PathBuf {
    let path = dir.join("a.run");
    let mut w = RunWriter::create(&path, 3, 2).unwrap();
    w.push(0, &Key::new(&[1]), &[5, 1]).unwrap();
    w.push(0, &Key::new(&[1, 2]), &[3, 0]).unwrap();
    w.push(0, &Key::new(&[1, 2, 9]), &[u64::MAX, 7]).unwrap();
    w.push(2, &Key::new(&[u64::MAX - 1]), &[1, 1]).unwrap();
    let s = w.finish().unwrap();
    assert_eq!(s.records, 4);
    path
}

type Records = Vec<(Vec<u64>, [u64; 2])>;

fn read_all(f: &RunFile, p: u32) -> Result<Records, crate::Error> {
    let mut r = f.section(p)?;
    let mut out = Vec::new();
    while let Some((k, v)) = r.next_record()? {
        out.push((k.ids().to_vec(), [v[0], v[1]]));
    }
    Ok(out)
}

#[test]
fn round_trip() {
    let dir = tempfile::tempdir().unwrap();
    let path = sample(dir.path());
    let f = RunFile::open(&path).unwrap();
    assert_eq!(f.partitions(), 3);
    assert_eq!(
        read_all(&f, 0).unwrap(),
        vec![
            (vec![1], [5, 1]),
            (vec![1, 2], [3, 0]),
            (vec![1, 2, 9], [u64::MAX, 7])
        ]
    );
    assert!(read_all(&f, 1).unwrap().is_empty());
    assert_eq!(read_all(&f, 2).unwrap(), vec![(vec![u64::MAX - 1], [1, 1])]);
    assert!(!tmp_exists(dir.path()));
}

fn tmp_exists(dir: &std::path::Path) -> bool {
    std::fs::read_dir(dir)
        .unwrap()
        .any(|e| e.unwrap().file_name().to_string_lossy().ends_with(".tmp"))
}

#[test]
fn every_flipped_byte_and_truncation_is_detected() {
    let dir = tempfile::tempdir().unwrap();
    let path = sample(dir.path());
    let good = std::fs::read(&path).unwrap();
    let expect: Vec<_> = {
        let f = RunFile::open(&path).unwrap();
        (0..3).map(|p| read_all(&f, p).unwrap()).collect()
    };
    // Safe means: the damage is reported, or (a flip in a zstd header field
    // that does not change the output) the records read are exactly the
    // original ones. Damaged data is never read as other data.
    let check = |bytes: &[u8]| -> bool {
        let p = dir.path().join("bad.run");
        std::fs::write(&p, bytes).unwrap();
        match RunFile::open(&p) {
            Err(_) => true,
            Ok(f) => {
                let got: Result<Vec<_>, _> = (0..f.partitions()).map(|s| read_all(&f, s)).collect();
                match got {
                    Err(_) => true,
                    Ok(g) => g == expect,
                }
            }
        }
    };
    for i in 0..good.len() {
        let mut b = good.clone();
        b[i] ^= 0x10;
        assert!(check(&b), "flip at byte {i} not detected");
    }
    for n in 0..good.len() {
        assert!(check(&good[..n]), "truncation to {n} bytes not detected");
    }
}

#[test]
fn dictionary_round_trip_and_damage() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("d.dict");
    let entries: Vec<(u64, Box<str>)> = vec![(3, "drei".into()), (9, "neun".into())];
    DictWriter::write(&path, &entries).unwrap();
    let mut r = DictReader::open(&path).unwrap();
    assert_eq!(r.next_entry().unwrap(), Some((3, "drei".to_string())));
    assert_eq!(r.next_entry().unwrap(), Some((9, "neun".to_string())));
    assert_eq!(r.next_entry().unwrap(), None);
    let good = std::fs::read(&path).unwrap();
    for i in 0..good.len() {
        let mut b = good.clone();
        b[i] ^= 0x01;
        std::fs::write(&path, &b).unwrap();
        let read = DictReader::open(&path).and_then(|mut r| {
            let mut v = Vec::new();
            while let Some(e) = r.next_entry()? {
                v.push(e);
            }
            Ok(v)
        });
        // Reported, or (harmless zstd header flip) exactly the original words.
        if let Ok(v) = read {
            assert_eq!(
                v,
                vec![(3, "drei".to_string()), (9, "neun".to_string())],
                "flip at {i}"
            );
        }
    }
}
