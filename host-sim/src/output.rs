//! Output files: folders, atomic writes (a temporary file beside the target,
//! persisted into place with `tempfile`, so a failed run never leaves a half
//! file over a good one).

use crate::error::{Result, SimError};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Create the output folder (before any computing, so a bad path fails at once).
pub fn folder(dir: &Path) -> Result<PathBuf> {
    std::fs::create_dir_all(dir).map_err(|e| SimError::io(dir, "create output folder", e))?;
    Ok(dir.to_path_buf())
}

/// A temporary file beside `path` (same folder, same extension), to be persisted over it.
pub fn temp_beside(path: &Path) -> Result<tempfile::NamedTempFile> {
    let dir = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let ext = path.extension().map(|e| format!(".{}", e.to_string_lossy())).unwrap_or_default();
    tempfile::Builder::new().prefix(".tmp-").suffix(&ext).tempfile_in(dir).map_err(|e| SimError::io(path, "write", e))
}

/// Put a finished temporary file in place of `path`.
pub fn persist(tmp: tempfile::NamedTempFile, path: &Path) -> Result<()> {
    tmp.persist(path).map(|_| ()).map_err(|e| SimError::io(path, "write", e.error))
}

/// Write `bytes` to `path` atomically.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let mut f = temp_beside(path)?;
    f.write_all(bytes).and_then(|_| f.as_file().sync_all()).map_err(|e| SimError::io(path, "write", e))?;
    persist(f, path)
}
