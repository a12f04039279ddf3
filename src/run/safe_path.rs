//! Paths from run files and outputs chosen on the command line, kept to what they should be:
//! a run file's references stay inside the run's folder and name regular files; an output
//! never replaces an input, a file of another kind, or anything but a regular file.

use crate::error::{Error, Result};
use std::io::Read;
use std::path::{Component, Path, PathBuf};

/// What a file holds, judged by its first bytes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FileKind {
    /// RIFF, RF64 or BW64 container.
    Wav,
    /// A JSON object (first non-blank byte `{`).
    Json,
    /// Text that is neither: taken for a CSV table.
    Csv,
    /// Bytes that are none of these.
    Other,
}

impl FileKind {
    pub fn label(self) -> &'static str {
        match self {
            FileKind::Wav => "a WAV recording",
            FileKind::Json => "a JSON file",
            FileKind::Csv => "a CSV table",
            FileKind::Other => "a file of another kind",
        }
    }

    /// Judge by the first bytes of a file (an empty file is of any kind).
    pub fn sniff(head: &[u8]) -> Option<FileKind> {
        if head.is_empty() {
            return None;
        }
        if head.starts_with(b"RIFF") || head.starts_with(b"RF64") || head.starts_with(b"BW64") {
            return Some(FileKind::Wav);
        }
        let first = head.iter().find(|b| !b.is_ascii_whitespace());
        match first {
            Some(b'{') => Some(FileKind::Json),
            _ if std::str::from_utf8(head).is_ok()
                || head.iter().all(|&b| b >= 0x09 && b != 0x7f) =>
            {
                Some(FileKind::Csv)
            }
            _ => Some(FileKind::Other),
        }
    }
}

/// Resolve a path a run file names (`rel`, relative to the folder of `json`): it must be
/// relative, must not climb out of the folder (`..`), must not lead out through a symbolic
/// link, and must be a regular file (not a FIFO, device or folder). `what` names the field.
pub fn resolve_ref(json: &Path, rel: &str, what: &str) -> Result<PathBuf> {
    let shown = json.display();
    let refuse = |why: &str| {
        Err(Error::new(format!(
            "'{shown}' names its {what} as '{}', which {why}; run files may only name files in their own folder",
            crate::run::validate::clean_text(rel, false)
        )))
    };
    if rel.is_empty() || rel.contains('\0') {
        return refuse("is not a file name");
    }
    let p = Path::new(rel);
    for c in p.components() {
        match c {
            Component::Normal(_) | Component::CurDir => {}
            Component::ParentDir => return refuse("climbs out of the run's folder"),
            Component::RootDir | Component::Prefix(_) => return refuse("is an absolute path"),
        }
    }
    let dir = match json.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let full = dir.join(p);
    let meta = match std::fs::symlink_metadata(&full) {
        Ok(m) => m,
        Err(e) => {
            return Err(Error::new(format!(
                "cannot open the {what} '{}' named by '{shown}': {}",
                full.display(),
                crate::error::describe_io(&e)
            )));
        }
    };
    if meta.file_type().is_symlink() {
        let (Ok(target), Ok(root)) = (full.canonicalize(), dir.canonicalize()) else {
            return refuse("is a symbolic link that leads nowhere");
        };
        if !target.starts_with(&root) {
            return refuse("is a symbolic link out of the run's folder");
        }
    }
    let meta = std::fs::metadata(&full).map_err(|e| {
        Error::new(format!(
            "cannot open the {what} '{}' named by '{shown}': {}",
            full.display(),
            crate::error::describe_io(&e)
        ))
    })?;
    if !meta.is_file() {
        return refuse("is not a regular file");
    }
    Ok(full)
}

/// Refuse to open anything but a regular file for reading (a FIFO would hang, a device
/// would stream forever). Missing files pass: opening them reports the error.
pub fn check_input(path: &Path) -> Result<()> {
    if let Ok(m) = std::fs::metadata(path)
        && !m.is_file()
    {
        crate::fail!(
            "'{}' is not a regular file (a folder, device or pipe); give a file",
            path.display()
        );
    }
    Ok(())
}

fn same_file(a: &Path, b: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let (Ok(x), Ok(y)) = (std::fs::metadata(a), std::fs::metadata(b)) {
            return x.dev() == y.dev() && x.ino() == y.ino();
        }
    }
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// The kind of an existing file, or `None` when it is missing or empty.
pub fn kind_of(path: &Path) -> Option<FileKind> {
    let mut head = [0u8; 512];
    let mut f = std::fs::File::open(path).ok()?;
    let n = f.read(&mut head).ok()?;
    FileKind::sniff(&head[..n])
}

/// May `out` be written as a file of `kind`? Refused: a path that is one of `inputs`, an
/// existing thing that is not a regular file (folder, device, FIFO, symbolic link), and a
/// regular file that holds another kind of content.
pub fn check_output(out: &Path, kind: FileKind, inputs: &[&Path]) -> Result<()> {
    let shown = out.display();
    for i in inputs {
        if same_file(out, i) {
            crate::fail!(
                "will not write {} over the input '{}'; choose another output",
                kind.label(),
                i.display()
            );
        }
    }
    let Ok(meta) = std::fs::symlink_metadata(out) else {
        return Ok(()); // a new file
    };
    if meta.file_type().is_symlink() {
        crate::fail!("will not write through the symbolic link '{shown}'; give a plain file name");
    }
    if !meta.is_file() {
        crate::fail!("'{shown}' exists and is not a regular file; will not replace it");
    }
    if let Some(found) = kind_of(out).filter(|&k| k != kind) {
        crate::fail!(
            "'{shown}' holds {}; will not replace it with {}",
            found.label(),
            kind.label()
        );
    }
    Ok(())
}

/// `base.json`, else `base-2.json`, `base-3.json`, ...: the first name not yet taken.
pub fn free_name(dir: &Path, base: &str, ext: &str) -> PathBuf {
    let first = dir.join(format!("{base}.{ext}"));
    if std::fs::symlink_metadata(&first).is_err() {
        return first;
    }
    (2u32..)
        .map(|i| dir.join(format!("{base}-{i}.{ext}")))
        .find(|p| std::fs::symlink_metadata(p).is_err())
        .unwrap_or(first)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sniffing() {
        assert_eq!(FileKind::sniff(b"RIFF....WAVE"), Some(FileKind::Wav));
        assert_eq!(FileKind::sniff(b"  {\"a\":1}"), Some(FileKind::Json));
        assert_eq!(FileKind::sniff(b"frequency_hz,m\n"), Some(FileKind::Csv));
        assert_eq!(FileKind::sniff(&[0, 1, 2, 0xff]), Some(FileKind::Other));
        assert_eq!(FileKind::sniff(b""), None);
    }
}
