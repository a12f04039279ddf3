//! The strip file (E and G beside the modes) and the comparison of strips (0/90 against
//! +-45, say) as an 80-column table with a legend, like `compare`'s.

use super::StripResult;
use crate::error::{Context, Result};
use crate::modes::Mode;
use crate::run::{atomic, safe_path};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Tag of a strip file, so it is never mistaken for a run file.
pub const KIND: &str = "tapmodes-strip";

/// Version of the strip file: 2 added `poisson_ratio_reason` and Poisson's ratio only for a
/// strip declared isotropic (version 1 files still load).
pub const SCHEMA_VERSION: u32 = 2;

/// One sentence when `path` is missing or cannot be opened, before its kind is checked (so a
/// typo does not read as "not a strip file").
pub(crate) fn check_readable(path: &Path) -> Result<()> {
    // Metadata, not open: opening a named pipe would wait for a writer.
    match std::fs::metadata(path) {
        Ok(_) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            crate::fail!("'{}': no such file", path.display())
        }
        Err(e) => crate::fail!("cannot read '{}': {e}", path.display()),
    }
}

/// One strip test as written by `tapmodes strip --out`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StripFile {
    pub kind: String,
    pub schema_version: u32,
    pub tool_version: String,
    pub created_utc: String,
    pub label: String,
    /// The recordings analysed, as given on the command line.
    pub recording: String,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub other_corner: Option<String>,
    pub length_mm: f64,
    pub width_mm: f64,
    pub thickness_mm: f64,
    pub mass_g: f64,
    pub density_kg_m3: f64,
    /// Dynamic Young's modulus, Pa, and its expanded uncertainty (k = 2, about 95 %).
    pub youngs_modulus_pa: f64,
    pub youngs_modulus_uncertainty_pa: f64,
    /// Dynamic shear modulus, Pa, and its expanded uncertainty (k = 2, about 95 %).
    pub shear_modulus_pa: f64,
    pub shear_modulus_uncertainty_pa: f64,
    /// Only for a strip declared isotropic (`--isotropic`) whose E/(2G) - 1 lies within
    /// 0..0.5; else null and `poisson_ratio_reason` says why.
    pub poisson_ratio: Option<f64>,
    #[serde(default)]
    pub poisson_ratio_reason: Option<String>,
    /// Full detail: frequencies used, correction factors, tolerances, uncertainty budgets.
    pub result: StripResult,
    /// What each mode was taken for.
    pub mode_roles: Vec<String>,
    /// Which mode was taken for which and why; everything doubtful.
    pub notes: Vec<String>,
    pub modes: Vec<Mode>,
}

impl StripFile {
    pub fn save(&self, path: &Path) -> Result<()> {
        let text = serde_json::to_string_pretty(self)
            .map_err(|e| crate::error::Error::new(e.to_string()))?;
        atomic::write_atomic(path, text.as_bytes())
            .map_err(|e| e.context(format!("cannot write '{}'", path.display())))
    }

    pub fn load(path: &Path) -> Result<Self> {
        check_readable(path)?;
        safe_path::check_input(path)?;
        if safe_path::kind_of(path) != Some(safe_path::FileKind::Json) {
            crate::fail!(
                "'{}' is not a strip file (written by `tapmodes strip --out`)",
                path.display()
            );
        }
        let text = std::fs::read_to_string(path)
            .with_context(|| format!("cannot read '{}'", path.display()))?;
        let value: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
            crate::error::Error::new(format!("'{}' is not JSON: {e}", path.display()))
        })?;
        if value.get("kind").and_then(|k| k.as_str()) != Some(KIND) {
            crate::fail!(
                "'{}' is not a strip file (written by `tapmodes strip --out`)",
                path.display()
            );
        }
        serde_json::from_value(value).map_err(|e| {
            crate::error::Error::new(format!("'{}' is a damaged strip file: {e}", path.display()))
        })
    }
}

/// Whether two values differ by more than their combined expanded uncertainty.
pub fn differs(a: f64, ua: f64, b: f64, ub: f64) -> bool {
    (a - b).abs() > ua.hypot(ub)
}

const HEAD: &str = "  strip          E GPa   +-U  E/E0   G GPa   +-U   G/G0   E/G f_fl Hz f_to Hz";

fn row(s: &StripFile, base: &StripFile, first: bool) -> String {
    let mark = |a: f64, ua: f64, b: f64, ub: f64| {
        if first {
            " "
        } else if differs(a, ua, b, ub) {
            "*"
        } else {
            "="
        }
    };
    let label: String = s.label.chars().take(14).collect();
    format!(
        "  {:<14}{:>6.2} {:>5.2} {:>5.2}{}{:>7.3} {:>5.3} {:>5.2}{} {:>5.2} {:>7.1} {:>7.1}",
        label,
        s.youngs_modulus_pa / 1e9,
        s.youngs_modulus_uncertainty_pa / 1e9,
        s.youngs_modulus_pa / base.youngs_modulus_pa,
        mark(
            s.youngs_modulus_pa,
            s.youngs_modulus_uncertainty_pa,
            base.youngs_modulus_pa,
            base.youngs_modulus_uncertainty_pa
        ),
        s.shear_modulus_pa / 1e9,
        s.shear_modulus_uncertainty_pa / 1e9,
        s.shear_modulus_pa / base.shear_modulus_pa,
        mark(
            s.shear_modulus_pa,
            s.shear_modulus_uncertainty_pa,
            base.shear_modulus_pa,
            base.shear_modulus_uncertainty_pa
        ),
        s.youngs_modulus_pa / s.shear_modulus_pa,
        s.result.flexural.hz,
        s.result.torsional.hz,
    )
}

/// The table: the first strip is the baseline; every other strip's E and G as ratios to it.
pub fn render(strips: &[StripFile]) -> String {
    let mut out = String::from("Strips compared (baseline: the first)\n");
    out += HEAD;
    out.push('\n');
    for (i, s) in strips.iter().enumerate() {
        out += &row(s, &strips[0], i == 0);
        out.push('\n');
    }
    for s in strips {
        out += &format!(
            "  {}: {:.1} x {:.2} x {:.3} mm, {:.3} g, {:.0} kg/m^3{}\n",
            s.label,
            s.length_mm,
            s.width_mm,
            s.thickness_mm,
            s.mass_g,
            s.density_kg_m3,
            match (s.poisson_ratio, s.result.isotropic_declared) {
                (Some(m), _) => format!(", nu {m:.3}"),
                (None, true) => ", nu out".to_string(),
                (None, false) => ", nu n/a".to_string(),
            }
        );
    }
    out += "Legend: E Young's modulus (flexural), G shear modulus (torsional), both\n";
    out += "  dynamic; +-U expanded uncertainty (k = 2, about 95 %) from the dimensions'\n";
    out += "  tolerances and the frequency spread; E/E0, G/G0 ratio to the baseline strip:\n";
    out += "  * differs by more than the combined uncertainty, = within it; f_fl, f_to first\n";
    out += "  flexural and first torsional frequency; nu Poisson's ratio E/(2G) - 1, given\n";
    out += "  only for a strip declared isotropic (strip --isotropic): n/a not declared,\n";
    out += "  out declared but outside 0..0.5 (the strip does not behave isotropically).\n";
    out
}
