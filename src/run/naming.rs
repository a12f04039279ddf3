//! The one naming rule for a run's files (`STEM.wav`, `STEM.json`, `STEM.csv`) and the
//! exclusive claim of a stem in a folder, used by `capture` and by the terminal app.

use crate::error::{Error, Result};
use std::path::Path;

/// Stem used when a label has nothing usable in it.
pub const FALLBACK_STEM: &str = "run";
/// Longest stem taken from a label, in characters.
pub const MAX_STEM_CHARS: usize = 100;
/// Highest numbered suffix tried (`label-2` ... `label-9999`).
const MAX_SUFFIX: u32 = 9_999;

/// A file stem from a label: surrounding blanks dropped; ASCII letters, digits, `-`, `_`
/// and `.` kept, everything else `_`; at most [`MAX_STEM_CHARS`]; no leading or trailing
/// dot; [`FALLBACK_STEM`] when nothing is left.
pub fn stem_for(label: &str) -> String {
    let clean: String = label
        .trim()
        .chars()
        .take(MAX_STEM_CHARS)
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.') {
                c
            } else {
                '_'
            }
        })
        .collect();
    let clean = clean.trim_matches('.');
    if clean.is_empty() {
        FALLBACK_STEM.to_string()
    } else {
        clean.to_string()
    }
}

/// Whether any of a run's files (`.wav`, `.json`, `.csv`, or the app's strip file
/// `.strip.json`; of any kind, even a dangling link) exists under `stem` in `dir`.
pub fn stem_taken(dir: &Path, stem: &str) -> bool {
    ["wav", "json", "csv", "strip.json"]
        .iter()
        .any(|ext| std::fs::symlink_metadata(dir.join(format!("{stem}.{ext}"))).is_ok())
}

/// Claim the first free stem from `label` in `dir` (`stem_for(label)`, then `-2`, `-3`,
/// ...): a stem is free when none of its three files exists, and it is claimed by creating
/// its WAV exclusively, so two writers started together never get the same name. Returns
/// the stem and the new, empty WAV file (open for reading and writing).
pub fn claim_stem(dir: &Path, label: &str) -> Result<(String, std::fs::File)> {
    let base = stem_for(label);
    for i in 1..=MAX_SUFFIX {
        let stem = if i == 1 {
            base.clone()
        } else {
            format!("{base}-{i}")
        };
        if stem_taken(dir, &stem) {
            continue;
        }
        let wav = dir.join(format!("{stem}.wav"));
        match std::fs::OpenOptions::new()
            .write(true)
            .read(true)
            .create_new(true)
            .open(&wav)
        {
            Ok(file) => return Ok((stem, file)),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => continue,
            Err(e) => {
                return Err(Error::from(e).context(format!("cannot create '{}'", wav.display())));
            }
        }
    }
    crate::fail!(
        "every run name from '{base}' to '{base}-{MAX_SUFFIX}' is taken in '{}'",
        dir.display()
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_rule_for_labels() {
        assert_eq!(stem_for("arm braced"), "arm_braced");
        assert_eq!(stem_for("  v1.2  "), "v1.2");
        assert_eq!(stem_for("..hidden."), "hidden");
        assert_eq!(stem_for("../up"), "_up");
        assert_eq!(stem_for(""), FALLBACK_STEM);
        assert_eq!(stem_for("..."), FALLBACK_STEM);
        assert_eq!(stem_for(&"x".repeat(300)).len(), MAX_STEM_CHARS);
    }

    #[test]
    fn claims_skip_every_kind_of_existing_file() {
        let dir = std::env::temp_dir().join(format!("tapmodes-naming-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(dir.join("a.csv"), "").unwrap();
        std::fs::write(dir.join("a-2.json"), "").unwrap();
        let (first, _) = claim_stem(&dir, "a").unwrap();
        assert_eq!(first, "a-3");
        let (second, _) = claim_stem(&dir, "a").unwrap();
        assert_eq!(second, "a-4", "the first claim's WAV takes its stem");
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
