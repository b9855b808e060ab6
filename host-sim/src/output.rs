//! Output files: folders, atomic writes (temporary file, then rename).

use crate::error::{Result, SimError};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Create the output folder.
pub fn folder(dir: &Path) -> Result<PathBuf> {
    std::fs::create_dir_all(dir).map_err(|e| SimError::io(dir, "create output folder", e))?;
    Ok(dir.to_path_buf())
}

/// Write `bytes` to `path` via a temporary file in the same folder.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let name = path.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_default();
    let tmp = path.with_file_name(format!(".tmp-{}-{}", std::process::id(), name));
    let mut f = std::fs::File::create(&tmp).map_err(|e| SimError::io(path, "write", e))?;
    f.write_all(bytes).map_err(|e| SimError::io(path, "write", e))?;
    f.sync_all().map_err(|e| SimError::io(path, "write", e))?;
    drop(f);
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        SimError::io(path, "write", e)
    })
}
