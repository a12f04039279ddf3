//! Atomic file writes: a temporary file in the same folder, synced, then renamed over.

use crate::error::{Context, Result};
use std::io::Write;
use std::path::Path;

/// Write `bytes` to `path` so that readers see either the old file or the new one, never
/// a partial write.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    let shown = path.display();
    if let Ok(m) = std::fs::symlink_metadata(path)
        && !m.is_file()
    {
        crate::fail!(
            "'{shown}' exists and is not a regular file (a folder, device, pipe or link); will not replace it"
        );
    }
    let result = (|| -> std::io::Result<()> {
        // A file left at the temporary name (or planted there) is removed, never followed.
        let _ = std::fs::remove_file(&tmp);
        let mut f = std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result.with_context(|| format!("cannot write '{shown}'"))
}
