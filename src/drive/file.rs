//! The drive file: a small per-craft text file of `key = value` lines.
//!
//! ```text
//! # TM9 on 6 cells
//! motor_kv   = 1300      # rpm per volt
//! cells      = 6
//! cell_volts = 3.7       # optional; nominal 3.7 by default, 3.5 for a sagged pack
//! throttle   = 35:100    # percent, hover to full
//! blades     = 3
//! near_pct   = 10        # optional; margin of a "near" verdict, percent
//! ```
//!
//! `volts = 22.2` (the pack voltage) may stand instead of `cells` and `cell_volts`; or,
//! instead of `motor_kv`, `cells`, `cell_volts` and `throttle`: `rpm = 10000:28000`.
//! One key per line, `#` starts a comment, blank lines are ignored, keys are lower case.
//! An unknown or repeated key, a missing value or a number out of range is an error naming
//! the file and line. Files above [`MAX_DRIVE_FILE_BYTES`] are refused.

use super::{DEFAULT_NEAR_PCT, Drive};
use crate::error::{Error, Result};
use std::path::Path;

/// Largest drive file read, bytes.
pub const MAX_DRIVE_FILE_BYTES: u64 = 64 * 1024;

/// The keys a drive file may hold.
pub const KEYS: [&str; 8] = [
    "motor_kv",
    "cells",
    "cell_volts",
    "volts",
    "throttle",
    "rpm",
    "blades",
    "near_pct",
];

/// `LO:HI` as two numbers (no check of their range).
pub fn parse_pair(s: &str) -> std::result::Result<(f64, f64), String> {
    let (a, b) = s
        .split_once(':')
        .ok_or_else(|| format!("'{s}' is not a range; write LO:HI, e.g. 35:100"))?;
    let num = |t: &str| {
        t.trim()
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite())
            .ok_or_else(|| format!("'{}' in '{s}' is not a number", t.trim()))
    };
    Ok((num(a)?, num(b)?))
}

/// Read and check a drive file.
pub fn load(path: &Path) -> Result<Drive> {
    let shown = path.display();
    let meta = std::fs::metadata(path)
        .map_err(|e| Error::new(format!("cannot read the drive file '{shown}': {e}")))?;
    if !meta.is_file() {
        crate::fail!("the drive file '{shown}' is not a regular file");
    }
    if meta.len() > MAX_DRIVE_FILE_BYTES {
        crate::fail!(
            "the drive file '{shown}' is {} bytes; a drive file holds a few lines (at most {MAX_DRIVE_FILE_BYTES} bytes)",
            meta.len()
        );
    }
    let bytes = std::fs::read(path)
        .map_err(|e| Error::new(format!("cannot read the drive file '{shown}': {e}")))?;
    let text = String::from_utf8(bytes)
        .map_err(|_| Error::new(format!("the drive file '{shown}' is not UTF-8 text")))?;
    parse(&text, &shown.to_string())
}

/// Parse and check the text of a drive file called `name`.
pub fn parse(text: &str, name: &str) -> Result<Drive> {
    let clean = |s: &str| crate::run::validate::clean_text(s, false);
    let name = clean(name);
    let mut seen: Vec<&str> = Vec::new();
    let mut d = Drive {
        motor_kv: None,
        cells: None,
        cell_volts: None,
        pack_volts: None,
        throttle_pct: None,
        rpm: None,
        blades: 0,
        near_pct: DEFAULT_NEAR_PCT,
    };
    let mut blades = None;
    for (i, raw) in text.lines().enumerate() {
        let at = format!("the drive file '{name}', line {}", i + 1);
        let line = raw.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let Some((k, v)) = line.split_once('=') else {
            crate::fail!("{at}: '{}' is not a 'key = value' line", clean(line));
        };
        let (k, v) = (k.trim(), v.trim());
        let Some(key) = KEYS.iter().copied().find(|x| *x == k) else {
            crate::fail!(
                "{at}: unknown key '{}' (the keys are {})",
                clean(k),
                KEYS.join(", ")
            );
        };
        if seen.contains(&key) {
            crate::fail!("{at}: '{key}' is given twice");
        }
        seen.push(key);
        if v.is_empty() {
            crate::fail!("{at}: '{key}' has no value");
        }
        let number = || {
            v.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| Error::new(format!("{at}: '{}' is not a number", clean(v))))
        };
        let count = || {
            v.parse::<u32>().map_err(|_| {
                Error::new(format!(
                    "{at}: '{}' is not a whole number for '{key}'",
                    clean(v)
                ))
            })
        };
        let pair = || parse_pair(v).map_err(|e| Error::new(format!("{at}: {}", clean(&e))));
        match key {
            "motor_kv" => d.motor_kv = Some(number()?),
            "cells" => d.cells = Some(count()?),
            "cell_volts" => d.cell_volts = Some(number()?),
            "volts" => d.pack_volts = Some(number()?),
            "throttle" => d.throttle_pct = Some(pair()?),
            "rpm" => d.rpm = Some(pair()?),
            "blades" => blades = Some(count()?),
            _ => d.near_pct = number()?,
        }
    }
    let Some(b) = blades else {
        crate::fail!("the drive file '{name}' does not give 'blades'");
    };
    d.blades = b;
    d.check()
        .map_err(|e| e.context(format!("the drive file '{name}'")))?;
    Ok(d)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_the_documented_example() {
        let d = parse(
            "# TM9\nmotor_kv = 1300 # rpm/V\ncells=6\ncell_volts = 3.7\nthrottle = 35:100\nblades = 3\n",
            "t.drive",
        )
        .unwrap();
        assert_eq!(d.motor_kv, Some(1300.0));
        assert_eq!(d.cells, Some(6));
        assert_eq!(d.throttle_pct, Some((35.0, 100.0)));
        assert_eq!(d.blades, 3);
        assert_eq!(d.near_pct, DEFAULT_NEAR_PCT);
    }

    #[test]
    fn reads_a_pack_voltage() {
        let d = parse(
            "motor_kv = 1300\nvolts = 22.2\nthrottle = 35:100\nblades = 3\n",
            "t.drive",
        )
        .unwrap();
        assert_eq!((d.cells, d.pack_volts), (None, Some(22.2)));
        // 1300 x 22.2 x 1.00 = 28 860 rpm.
        assert!((d.rpm_range().1 - 28_860.0).abs() < 1e-9);
    }

    #[test]
    fn bad_files_are_one_sentence_each() {
        let cases = [
            (
                "motor_kv = 1300\ncells = 0\nthrottle = 35:100\nblades = 3",
                "cells must be",
            ),
            (
                "motor_kv = 1300\ncells = 6\nthrottle = 35:120\nblades = 3",
                "0-100 %",
            ),
            (
                "rpm = 9000:30000\nblades = 3\nspeed = 4",
                "unknown key 'speed'",
            ),
            ("rpm = 9000:30000\nblades = 3\nblades = 2", "given twice"),
            ("rpm = 9000\nblades = 3", "not a range"),
            ("rpm = 9000:30000", "does not give 'blades'"),
            ("rpm = 9000:30000\nmotor_kv = 1300\nblades = 2", "not both"),
            ("motor_kv = fast\nblades = 2", "not a number"),
            ("just words", "not a 'key = value' line"),
            (
                "motor_kv = 1300\ncells = 6\nvolts = 22.2\nthrottle = 35:100\nblades = 3",
                "not both",
            ),
            (
                "motor_kv = 1300\nvolts = 22.2\ncell_volts = 3.7\nthrottle = 35:100\nblades = 3",
                "volts per cell go with cells",
            ),
            (
                "motor_kv = 1300\nvolts = 500\nthrottle = 35:100\nblades = 3",
                "pack voltage must be",
            ),
            (
                "motor_kv = 1300\ncells = 6\nthrottle = 0.35:1\nblades = 3",
                "did you mean 35:100?",
            ),
        ];
        for (text, want) in cases {
            let e = parse(text, "x.drive").unwrap_err().to_string();
            assert!(e.contains(want), "{text:?}: {e}");
            assert!(e.contains("x.drive"), "{e}");
        }
    }
}
