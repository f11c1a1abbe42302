//! Disk full while spilling, joining or building: the ingest stops with an
//! error that says where, how much is free and roughly how much more it
//! needs; once space is freed, the same command resumes and ends with the
//! store an uninterrupted run builds.
//!
//! The real case runs on a small tmpfs the test mounts (it needs root and a
//! kernel that lets it mount); where it cannot mount, the test says so and
//! runs the injected case instead (`QUERN_FULL_AT`, an out-of-space error at
//! a named point), which also always runs on its own.

use std::path::{Path, PathBuf};
use std::process::Command;

use quern::fault::{Full, FULL_VAR};

use crate::common::{
    assert_views_eq, ingest_args, ingest_ok, notice, run, run_env, store_view, Run, StoreView,
};

use crate::common::TINY_BUDGET as FLAGS;

use crate::common::fault_input as input;

/// Source: quern's uninterrupted run (checked against the reference counter
/// in gutenberg.rs).
fn baseline() -> StoreView {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    ingest_ok(&store, FLAGS, &input());
    store_view(&store)
}

/// The error of a full disk must name the store, the free space and an
/// estimate, and say that running again resumes.
fn assert_disk_full_message(what: &str, store: &Path, r: &Run) {
    r.assert_failure();
    let e = &r.stderr;
    for want in [
        "no space left",
        &store.display().to_string(),
        "free there",
        "needs roughly",
        "run the same command again to resume",
    ] {
        assert!(
            e.contains(want),
            "{what}: the error does not say {want:?}\n{}",
            r.describe()
        );
    }
}

/// A tmpfs mounted for the test, unmounted on drop.
struct Tmpfs(PathBuf);

impl Tmpfs {
    fn mount(dir: &Path, size: &str) -> Option<Tmpfs> {
        std::fs::create_dir_all(dir).unwrap();
        let ok = Command::new("mount")
            .args(["-t", "tmpfs", "-o", &format!("size={size}"), "tmpfs"])
            .arg(dir)
            .status()
            .map(|s| s.success())
            .unwrap_or(false);
        ok.then(|| Tmpfs(dir.to_path_buf()))
    }

    fn resize(&self, size: &str) {
        let s = Command::new("mount")
            .args(["-o", &format!("remount,size={size}")])
            .arg(&self.0)
            .status()
            .unwrap();
        assert!(s.success(), "remount of {} failed", self.0.display());
    }
}

impl Drop for Tmpfs {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
    }
}

fn injected(expected: &StoreView, spec: &str) {
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let args = ingest_args(&store, FLAGS, &input());
    let r = run_env(&args, &[(FULL_VAR, spec)]);
    assert_disk_full_message(&format!("QUERN_FULL_AT={spec}"), &store, &r);
    run(&args).assert_success();
    assert_views_eq(
        &format!("resume after QUERN_FULL_AT={spec}"),
        expected,
        &store_view(&store),
    );
}

/// Injected out-of-space errors at a spill (counting), at a store file
/// (joining) and at the database build.
#[test]
fn injected_disk_full_then_resume() {
    let expected = baseline();
    for spec in [Full::Run.at(4), Full::Sst.at(20), Full::Build.at(1)] {
        injected(&expected, &spec);
    }
}

/// A real full file system: 1.5 MiB fills while spilling, 6 MiB while
/// joining (this input needs about 12 MB at its peak).
#[test]
fn small_tmpfs_disk_full_then_resume() {
    let expected = baseline();
    for size in ["1536k", "6m"] {
        let tmp = tempfile::tempdir().unwrap();
        let Some(fs) = Tmpfs::mount(&tmp.path().join("fs"), size) else {
            notice(&format!(
                "disk_full::small_tmpfs_disk_full_then_resume: cannot mount a tmpfs of {size} here (not root, or not allowed): ran the injected out-of-space case (QUERN_FULL_AT=run:4) instead of a real full file system"
            ));
            injected(&expected, &Full::Run.at(4));
            return;
        };
        let store = fs.0.join("store");
        let args = ingest_args(&store, FLAGS, &input());
        let r = run(&args);
        assert_disk_full_message(&format!("tmpfs of {size}"), &store, &r);
        // The same command on a still-full disk fails the same way and
        // loses nothing.
        assert_disk_full_message(&format!("tmpfs of {size}, again"), &store, &run(&args));
        fs.resize("64m");
        run(&args).assert_success();
        assert_views_eq(
            &format!("tmpfs of {size}, resumed after it was enlarged"),
            &expected,
            &store_view(&store),
        );
    }
}
