//! Bad input among good input: each case does what README's "Bad input"
//! table says, and the good input around it is counted exactly (source: the
//! reference counter in reference.rs, written from the counting contract,
//! over the same files).

use std::path::{Path, PathBuf};
use std::process::Command;

use quern::fault::{Point, KILL_VAR};

use crate::common::{
    assert_views_eq, gutenberg_dir, ingest_args, ingest_ok, run, run_env, stats_json, store_view,
};
use crate::reference::{Reference, Settings};

const FLAGS: &[&str] = &["--order", "3", "--memory", "16MiB", "--quiet"];

fn write(path: &Path, data: &[u8]) -> PathBuf {
    if let Some(d) = path.parent() {
        std::fs::create_dir_all(d).unwrap();
    }
    std::fs::write(path, data).unwrap();
    path.to_path_buf()
}

/// Deterministic bytes of every value (splitmix64 stream), as a binary file.
fn binary_bytes(n: usize) -> Vec<u8> {
    let mut x: u64 = 42;
    (0..n)
        .map(|_| {
            x = x.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut z = x;
            z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            (z ^ (z >> 31)) as u8
        })
        .collect()
}

/// A folder of odd files beside a novel; everything is counted by the
/// contract (invalid UTF-8 lossily, NUL inside tokens, a lone CR as
/// whitespace, CRLF's CR dropped, markers as <unk>), empty and blank files
/// add nothing. Also: the summary's line counts.
#[test]
fn odd_files_among_good_ones_are_counted_by_the_contract() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("in");
    std::fs::copy(
        gutenberg_dir().join("persuasion.txt"),
        write(&dir.join("a-novel.txt"), b""),
    )
    .unwrap();
    write(&dir.join("b-binary.bin"), &binary_bytes(200_000));
    write(&dir.join("c-empty.txt"), b"");
    write(&dir.join("d-blank.txt"), b"  \t\n\n \r\n\x0b\x0c\n");
    write(&dir.join("e-nul.txt"), b"a\0b c\n\0\nend\0\n");
    write(&dir.join("f-cr.txt"), b"one\rtwo\r\nthree\r\rfour\n");
    write(
        &dir.join("g-utf8.txt"),
        b"caf\xc3\xa9 \xff\xfe ok\n\xe2\x82 cut\n",
    );
    write(&dir.join("h-markers.txt"), b"<s> a </s> <unk> b\n");
    let store = tmp.path().join("store");
    ingest_ok(&store, FLAGS, std::slice::from_ref(&dir));
    let expected = Reference::from_paths(Settings::order(3), &[dir]).view();
    assert_views_eq("odd files beside a novel", &expected, &store_view(&store));
    let t = &stats_json(&store)["totals"];
    assert!(t["invalid_utf8_lines"].as_u64().unwrap() >= 2, "{t}");
    assert_eq!(t["marker_tokens"].as_u64(), Some(3), "{t}");
}

/// A single line of 200 MiB without a newline between two novels: skipped
/// (never held whole in memory) and reported; the novels are counted
/// exactly.
#[test]
fn a_200_mib_line_is_skipped_and_the_rest_counted() {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("in");
    let g = gutenberg_dir();
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::copy(g.join("persuasion.txt"), dir.join("a.txt")).unwrap();
    std::fs::copy(g.join("northangerabbey.txt"), dir.join("c.txt")).unwrap();
    {
        use std::io::Write;
        let mut f = std::io::BufWriter::new(std::fs::File::create(dir.join("b.txt")).unwrap());
        let piece = b"spam eggs ".repeat(100_000);
        for _ in 0..(200 << 20) / piece.len() {
            f.write_all(&piece).unwrap();
        }
    }
    let expected = Reference::from_paths(Settings::order(3), std::slice::from_ref(&dir)).view();
    let store = tmp.path().join("store");
    let r = ingest_ok(&store, &["--order", "3", "--memory", "64MiB"], &[dir]);
    assert!(
        r.stdout.contains("lines skipped (over --max-line-bytes) 1"),
        "the summary does not report the skipped line\n{}",
        r.describe()
    );
    assert_views_eq(
        "two novels around a 200 MiB line",
        &expected,
        &store_view(&store),
    );
    assert_eq!(
        stats_json(&store)["totals"]["skipped_lines"].as_u64(),
        Some(1)
    );
}

fn gzip(data: &[u8]) -> Vec<u8> {
    use std::io::Write;
    let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    e.write_all(data).unwrap();
    e.finish().unwrap()
}

/// A truncated `.gz` or `.zst` between good files stops the ingest with the
/// file's name and the position in its decompressed stream; what was
/// counted is durable. Replacing the file with a complete copy and running
/// the same command finishes the job without counting the other files
/// again, and the store equals the reference over the complete files.
#[test]
fn truncated_compressed_file_then_fixed_resumes() {
    let novel = std::fs::read(gutenberg_dir().join("persuasion.txt")).unwrap();
    let cases: [(&str, Vec<u8>); 2] = [
        ("b.gz", gzip(&novel)),
        ("b.zst", zstd::encode_all(&novel[..], 3).unwrap()),
    ];
    for (name, full) in cases {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("in");
        let g = gutenberg_dir();
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::copy(g.join("emma.txt"), dir.join("a.txt")).unwrap();
        std::fs::copy(g.join("northangerabbey.txt"), dir.join("c.txt")).unwrap();
        let bad = write(&dir.join(name), &full[..full.len() * 2 / 3]);
        let store = tmp.path().join("store");
        let mut flags = FLAGS.to_vec();
        flags.push("--json");
        let args = ingest_args(&store, &flags, std::slice::from_ref(&dir));
        let r = run(&args);
        r.assert_failure();
        assert!(
            r.stderr.contains(&bad.display().to_string())
                && r.stderr.contains("of the decompressed stream"),
            "{name}: the error does not name the file and the position\n{}",
            r.describe()
        );
        let status = run(&["status", "--store", &store.display().to_string()]);
        assert!(
            status.stdout.contains("durable spills") && status.stdout.contains("interrupted"),
            "{name}: status after the stop\n{}",
            status.describe()
        );
        write(&bad, &full);
        let r = run(&args);
        r.assert_success();
        let summary: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
        let notes = summary["repaired"].to_string();
        assert!(
            notes.contains(name) && notes.contains("counting goes on"),
            "{name}: the resume does not say it went on from the counted part: {notes}"
        );
        let expected = Reference::from_paths(Settings::order(3), &[dir]).view();
        assert_views_eq(
            &format!("{name} truncated, then replaced"),
            &expected,
            &store_view(&store),
        );
    }
}

/// An input whose already counted part changed while its size and
/// modification time were kept (the checksum of the counted ranges catches
/// it): a clear error naming the file, not a mixed count.
#[test]
fn counted_part_changed_behind_the_same_size_and_time_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let input = tmp.path().join("novel.txt");
    std::fs::copy(gutenberg_dir().join("persuasion.txt"), &input).unwrap();
    let store = tmp.path().join("store");
    let flags = [
        "--order",
        "5",
        "--memory",
        "16MiB",
        "--threads",
        "1",
        "--quiet",
    ];
    let args = ingest_args(&store, &flags, std::slice::from_ref(&input));
    let r = run_env(&args, &[(KILL_VAR, Point::Committed.at(2).as_str())]);
    assert!(
        !r.status.success(),
        "kill point not reached\n{}",
        r.describe()
    );
    let mtime = std::fs::metadata(&input).unwrap().modified().unwrap();
    let mut text = std::fs::read(&input).unwrap();
    // Early in the file, inside what the first spills counted.
    let i = text.iter().position(|&b| b == b'e').unwrap();
    text[i] = b'E';
    std::fs::write(&input, &text).unwrap();
    std::fs::File::options()
        .write(true)
        .open(&input)
        .unwrap()
        .set_modified(mtime)
        .unwrap();
    let r = run(&args);
    r.assert_failure();
    assert!(
        r.stderr.contains(&input.display().to_string())
            && r.stderr.contains("changed")
            && r.stderr.contains("--restart"),
        "the error does not name the changed file\n{}",
        r.describe()
    );
    // And a visible change of size is refused the same way.
    text.extend_from_slice(b"one more line\n");
    std::fs::write(&input, &text).unwrap();
    let r = run(&args);
    r.assert_failure();
    assert!(
        r.stderr.contains(&input.display().to_string()) && r.stderr.contains("changed"),
        "{}",
        r.describe()
    );
}

/// A file that cannot be read, and a folder that contains itself through a
/// symbolic link: the ingest stops before counting, naming the path, and
/// creates no store. (Root reads every file, so the unreadable case runs
/// the ingest as user `nobody` through setpriv when the test runs as root.)
#[test]
fn unreadable_file_and_link_loop_stop_before_counting() {
    let tmp = tempfile::tempdir().unwrap();
    // A link loop: in/sub/up -> in
    let dir = tmp.path().join("loop");
    write(&dir.join("a.txt"), b"one two\n");
    std::fs::create_dir_all(dir.join("sub")).unwrap();
    std::os::unix::fs::symlink(&dir, dir.join("sub").join("up")).unwrap();
    let store = tmp.path().join("store1");
    let r = run(&ingest_args(&store, FLAGS, std::slice::from_ref(&dir)));
    r.assert_failure();
    assert!(
        r.stderr
            .contains(&dir.join("sub").join("up").display().to_string())
            || r.stderr.contains("loop"),
        "the link loop is not named\n{}",
        r.describe()
    );
    assert!(!store.join("db").exists());

    // An unreadable file.
    use std::os::unix::fs::PermissionsExt;
    let open = tmp.path().join("open");
    std::fs::create_dir_all(&open).unwrap();
    std::fs::set_permissions(tmp.path(), std::fs::Permissions::from_mode(0o777)).unwrap();
    std::fs::set_permissions(&open, std::fs::Permissions::from_mode(0o777)).unwrap();
    let good = write(&open.join("good.txt"), b"one two\n");
    std::fs::set_permissions(&good, std::fs::Permissions::from_mode(0o644)).unwrap();
    let secret = write(&open.join("secret.txt"), b"three four\n");
    std::fs::set_permissions(&secret, std::fs::Permissions::from_mode(0o000)).unwrap();
    let store = open.join("store2");
    let args = ingest_args(&store, FLAGS, std::slice::from_ref(&open));
    let is_root = unsafe_free_geteuid() == 0;
    let out = if is_root {
        Command::new("setpriv")
            .args(["--reuid=65534", "--regid=65534", "--clear-groups"])
            .arg(crate::common::bin())
            .args(&args)
            .output()
            .expect("setpriv (util-linux) is needed to run this test as root")
    } else {
        Command::new(crate::common::bin())
            .args(&args)
            .output()
            .unwrap()
    };
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        !out.status.success() && out.status.code().is_some(),
        "an unreadable input did not stop the ingest: {stderr}"
    );
    assert!(
        stderr.contains(&secret.display().to_string()),
        "the unreadable file is not named: {stderr}"
    );
    assert!(!store.join("db").exists());
}

/// The effective user id, from `id -u` (GNU coreutils), without unsafe code.
fn unsafe_free_geteuid() -> u32 {
    let out = Command::new("id").arg("-u").output().unwrap();
    String::from_utf8_lossy(&out.stdout).trim().parse().unwrap()
}
