//! Durable file operations: temporary names, fsync, atomic rename.

use std::fs::File;
use std::path::{Path, PathBuf};

use crate::error::{IoContext, Result};

/// The temporary name a file is written under before its rename.
pub fn tmp_name(path: &Path) -> PathBuf {
    let mut name = path.file_name().unwrap_or_default().to_os_string();
    name.push(".tmp");
    path.with_file_name(name)
}

/// Fsyncs a directory so that renames inside it are durable.
pub fn sync_dir(dir: &Path) -> Result<()> {
    File::open(dir).at(dir, "open")?.sync_all().at(dir, "fsync")
}

/// Renames `from` to `to` and fsyncs the parent directory.
pub fn rename_durable(from: &Path, to: &Path) -> Result<()> {
    std::fs::rename(from, to).at(to, "rename")?;
    sync_dir(to.parent().unwrap_or(Path::new(".")))
}

/// Writes `bytes` to a new file at `path` and fsyncs it.
pub fn write_synced(path: &Path, bytes: &[u8]) -> Result<()> {
    use std::io::Write;
    let mut f = File::create(path).at(path, "create")?;
    f.write_all(bytes).at(path, "write")?;
    f.sync_all().at(path, "fsync")
}

/// Writes `bytes` to `path` atomically: temporary file, fsync, rename.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let tmp = tmp_name(path);
    write_synced(&tmp, bytes)?;
    rename_durable(&tmp, path)
}

/// Creates a directory and its parents.
pub fn create_dir(dir: &Path) -> Result<()> {
    std::fs::create_dir_all(dir).at(dir, "create directory")
}

/// Removes a directory tree if it exists.
pub fn remove_dir(dir: &Path) -> Result<()> {
    match std::fs::remove_dir_all(dir) {
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(()),
        r => r.at(dir, "remove directory"),
    }
}

/// Bytes available to unprivileged users on the file system holding
/// `path` (statvfs), or `None` if it cannot be asked.
pub fn free_space(path: &Path) -> Option<u64> {
    use std::os::unix::ffi::OsStrExt;
    let c = std::ffi::CString::new(path.as_os_str().as_bytes()).ok()?;
    statvfs_avail(&c)
}

#[allow(unsafe_code)]
fn statvfs_avail(path: &std::ffi::CStr) -> Option<u64> {
    // SAFETY: `path` is a valid NUL-terminated string and `st` a zeroed
    // out-parameter that statvfs fills; nothing is kept past the call.
    unsafe {
        let mut st: libc::statvfs = std::mem::zeroed();
        if libc::statvfs(path.as_ptr(), &mut st) != 0 {
            return None;
        }
        Some(st.f_bavail as u64 * st.f_frsize as u64)
    }
}
