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

/// The text of a checked JSON file: pretty JSON followed by a line
/// `#xxh3=<hex>`, the checksum of the JSON text.
pub fn checked_json_text<T: serde::Serialize>(value: &T) -> String {
    let body = serde_json::to_string_pretty(value).expect("value serialises");
    format!(
        "{body}\n#xxh3={:016x}\n",
        xxhash_rust::xxh3::xxh3_64(body.as_bytes())
    )
}

/// Writes `value` as [`checked_json_text`], atomically.
pub fn write_checked_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<()> {
    write_atomic(path, checked_json_text(value).as_bytes())
}

/// The JSON body of a checked JSON file, verified against its checksum
/// line: `Ok(None)` if the file does not exist, [`crate::Error::Corrupt`]
/// if it is not UTF-8 or its checksum line is missing or wrong.
fn read_checked_body(path: &Path) -> Result<Option<String>> {
    let text = match std::fs::read(path) {
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        r => r.at(path, "read")?,
    };
    let mut text = String::from_utf8(text).map_err(|_| crate::Error::corrupt(path, "not UTF-8"))?;
    let (body, sum) = text
        .rsplit_once("\n#xxh3=")
        .ok_or_else(|| crate::Error::corrupt(path, "no checksum line (truncated?)"))?;
    let want = format!("{:016x}", xxhash_rust::xxh3::xxh3_64(body.as_bytes()));
    if sum.trim_end() != want {
        return Err(crate::Error::corrupt(path, "checksum mismatch"));
    }
    text.truncate(body.len());
    Ok(Some(text))
}

/// Reads a file written by [`write_checked_json`] (`Ok(None)` if it does
/// not exist; [`crate::Error::Corrupt`] if its checksum line is missing or
/// wrong or the JSON does not parse), a record with a top-level `format_version`,
/// which must be `expected` or an older version that `upgrade` converts
/// (see [`parse_upgraded`]).
pub fn read_checked_json_upgraded<T: serde::de::DeserializeOwned>(
    path: &Path,
    expected: u32,
    upgrade: Upgrade,
) -> Result<Option<T>> {
    match read_checked_body(path)? {
        None => Ok(None),
        Some(body) => parse_upgraded(path, body.as_bytes(), expected, upgrade).map(Some),
    }
}

/// Converts a record of an older format version to the current one:
/// `upgrade(found, &mut json)` rewrites `json`, written by version `found`,
/// in place and returns true, or returns false for a version it does not
/// know.
pub type Upgrade = fn(u32, &mut serde_json::Value) -> bool;

/// Parses JSON `bytes` (read from `path`) of a record with a top-level
/// `format_version`, checking the version first: the one version check of
/// quern's JSON records (manifest, cluster plan and outputs, store
/// metadata). A record of version `expected` is parsed as it is; one of
/// another version that `upgrade` converts gets `format_version`
/// `expected` and is parsed as the current version; any other version is
/// [`crate::Error::Version`], not damage.
pub fn parse_upgraded<T: serde::de::DeserializeOwned>(
    path: &Path,
    bytes: &[u8],
    expected: u32,
    upgrade: Upgrade,
) -> Result<T> {
    #[derive(serde::Deserialize)]
    struct Probe {
        format_version: u32,
    }
    let corrupt = |e: serde_json::Error| crate::Error::corrupt(path, e.to_string());
    let probe: Probe = serde_json::from_slice(bytes).map_err(corrupt)?;
    if probe.format_version == expected {
        return serde_json::from_slice(bytes).map_err(corrupt);
    }
    let mut json: serde_json::Value = serde_json::from_slice(bytes).map_err(corrupt)?;
    if !upgrade(probe.format_version, &mut json) {
        return Err(crate::Error::Version {
            path: path.to_path_buf(),
            found: probe.format_version,
            expected,
        });
    }
    json["format_version"] = expected.into();
    serde_json::from_value(json).map_err(corrupt)
}

/// The xxh3-64 of a file's bytes and its length, read in a stream.
pub fn file_xxh3(path: &Path) -> Result<(u64, u64)> {
    use std::io::Read;
    let mut f = File::open(path).at(path, "open")?;
    let mut h = xxhash_rust::xxh3::Xxh3::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut len = 0u64;
    loop {
        let n = f.read(&mut buf).at(path, "read")?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
        len += n as u64;
    }
    Ok((h.digest(), len))
}
