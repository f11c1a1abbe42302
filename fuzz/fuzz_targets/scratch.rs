//! A scratch folder for the file a target writes per input (in /dev/shm
//! where there is one, so that it costs no disk I/O).

use std::path::PathBuf;
use std::sync::OnceLock;

/// `<shm or tmp>/quern-fuzz-<pid>`, created once per process.
pub fn dir() -> &'static PathBuf {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let base = if std::path::Path::new("/dev/shm").is_dir() {
            PathBuf::from("/dev/shm")
        } else {
            std::env::temp_dir()
        };
        let d = base.join(format!("quern-fuzz-{}", std::process::id()));
        std::fs::create_dir_all(&d).unwrap();
        d
    })
}
