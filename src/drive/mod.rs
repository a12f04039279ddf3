//! The drive (motors and propellers) as nameplate values, the excitation bands they imply,
//! and each mode's verdict against those bands.
//!
//! Everything here is an estimate from nameplate values, not a measurement: no motor is run.
//!
//! - Motor rotation: `f = KV x V x throttle / 60` Hz, with `KV` in rpm per volt, `V` the
//!   pack voltage (cells x volts per cell, or the pack voltage given directly) and the
//!   throttle as a fraction (common practice,
//!   no source). It treats rpm as proportional to throttle and ignores the load of the
//!   propeller, which holds a loaded motor below `KV x V`: the real band tends to sit lower
//!   than this estimate (common practice, no source).
//! - Volts per cell: [`NOMINAL_CELL_VOLTS`] = 3.7 V, the nominal voltage of a lithium-polymer
//!   cell (common practice, no source). Under load a pack sags; [`SAGGED_CELL_VOLTS`] = 3.5 V
//!   is a typical loaded value late in a flight (from memory). The default is the nominal
//!   value; `--cell-volts 3.5` gives the sagged bands (5.4 % lower), and the rotation band
//!   at the sagged voltage is shown beside the bands ([`Drive::sagged_rotation_hz`]).
//! - Harmonics of rotation at 2x and 3x (imbalance, motor and propeller asymmetry), and blade
//!   pass at `blades x rotation` (common practice, no source).
//! - A mode is `inside` a band when its frequency lies within the band's edges, `near` when
//!   it lies outside every band but within [`DEFAULT_NEAR_PCT`] = 10 % of the nearest edge,
//!   else `clear`. 10 % covers the sag from nominal to loaded voltage (5.4 %) plus a few
//!   percent of motor-constant tolerance (common practice, no source); change it with
//!   `--near-pct`.
//! - The margin is a percentage of a band edge. Outside a band it is the distance to the
//!   nearer edge over that edge. Inside it is the depth `min((f - lo) / lo, (hi - f) / hi)`:
//!   the edge is chosen by the same percentage that is reported, so the depth grows
//!   steadily from either edge and the two sides meet without a jump.
//!
//! The verdict is guidance for where to look, not a substitute for a careful first hover.

pub mod file;
pub mod isolation;
pub mod report;

use crate::error::Result;
use crate::modes::Mode;
use serde::{Deserialize, Serialize};

/// Nominal voltage of a lithium-polymer cell, V (common practice, no source).
pub const NOMINAL_CELL_VOLTS: f64 = 3.7;
/// A loaded cell late in a flight, V (from memory): documented for `--cell-volts`.
pub const SAGGED_CELL_VOLTS: f64 = 3.5;
/// Margin of a `near` verdict, percent of the nearest band edge.
pub const DEFAULT_NEAR_PCT: f64 = 10.0;
/// Highest volts per cell accepted: above any lithium chemistry's full charge (about
/// 4.35 V for high-voltage cells, from memory).
pub const MAX_CELL_VOLTS: f64 = 5.0;
/// Most cells accepted in series.
pub const MAX_CELLS: u32 = 24;
/// Most blades per propeller accepted.
pub const MAX_BLADES: u32 = 12;
/// Highest motor constant accepted, rpm per volt.
pub const MAX_KV: f64 = 100_000.0;
/// Highest rotation speed accepted, rpm: far above any propeller-driving motor (common
/// practice, no source).
pub const MAX_RPM: f64 = 100_000.0;
/// Highest pack voltage accepted, V: [`MAX_CELLS`] x [`MAX_CELL_VOLTS`].
pub const MAX_PACK_VOLTS: f64 = MAX_CELLS as f64 * MAX_CELL_VOLTS;

/// A number for a message: plain when of a sensible size, else in exponent form (so an
/// absurd input does not print hundreds of digits).
pub fn fmt_num(v: f64) -> String {
    if v.is_finite() && (v == 0.0 || (1e-4..1e7).contains(&v.abs())) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

/// The plain statement stored with every drive section and printed with the bands.
pub const ESTIMATE_NOTE: &str = "bands are estimates from nameplate values (f = KV x V x throttle / 60, \
harmonics 2x and 3x, blade pass = blades x rotation; common practice, no source): a loaded \
motor turns slower than KV x V, so the true bands tend to sit lower; the verdict is guidance, \
not a substitute for a careful first hover";

/// What drives the craft, as given by the user: either the nameplate values (motor
/// constant, cells, volts per cell, throttle range) or an rpm range directly; and the blade
/// count. Stored in the run file's `drive.description`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Drive {
    /// Motor velocity constant, rpm per volt (no load).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub motor_kv: Option<f64>,
    /// Lithium cells in series.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cells: Option<u32>,
    /// Volts per cell used for the pack voltage (default [`NOMINAL_CELL_VOLTS`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cell_volts: Option<f64>,
    /// Pack voltage given directly, V, instead of cells and volts per cell.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pack_volts: Option<f64>,
    /// Throttle range in percent, hover to full: `[lo, hi]`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub throttle_pct: Option<(f64, f64)>,
    /// Rotation speed range in rpm, given directly instead of the nameplate values.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rpm: Option<(f64, f64)>,
    /// Blades per propeller.
    pub blades: u32,
    /// Margin of a `near` verdict, percent of the nearest band edge.
    pub near_pct: f64,
}

/// One excitation band, `[lo_hz, hi_hz]` with its name.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Band {
    pub name: String,
    pub hz: (f64, f64),
}

/// The bands of a drive and the margin of a `near` verdict.
#[derive(Debug, Clone, PartialEq)]
pub struct Bands {
    pub bands: Vec<Band>,
    pub near_pct: f64,
}

/// Where a mode sits against the bands.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Verdict {
    /// Farther than the near margin from every band.
    Clear,
    /// Outside every band but within the near margin of one.
    Near,
    /// Within a band's edges.
    Inside,
}

impl Verdict {
    pub fn label(self) -> &'static str {
        match self {
            Verdict::Clear => "clear",
            Verdict::Near => "near",
            Verdict::Inside => "inside",
        }
    }
}

/// A mode's verdict against the bands (the run file's `modes[].band`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BandVerdict {
    pub verdict: Verdict,
    /// The nearest band: the one the mode sits deepest in, else the one with the nearest edge.
    pub name: String,
    /// Signed distance to the nearest edge of that band, percent of the edge frequency:
    /// positive outside (room to spare), negative inside (how deep in). Inside, the depth is
    /// `min((f - lo) / lo, (hi - f) / hi)`: the edge is the nearer one in percent, not in Hz,
    /// so the depth does not jump as a mode crosses the band's middle.
    pub margin_pct: f64,
    /// Every band the mode lies in (bands may overlap: blade pass of a two-blade propeller
    /// is the 2x harmonic).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub inside: Vec<String>,
}

/// The run file's `drive` section.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DriveSection {
    pub description: Drive,
    /// Rotation speed range the bands come from, rpm.
    pub rpm: (f64, f64),
    pub near_pct: f64,
    pub bands: Vec<Band>,
    /// The rotation band at [`SAGGED_CELL_VOLTS`] per cell (a pack under load), Hz; absent
    /// when the speed is an rpm range or the pack voltage was given without cells, or when
    /// the volts per cell are already at or below the sagged value.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sagged_rotation_hz: Option<(f64, f64)>,
    /// What the numbers are: estimates from nameplate values.
    pub basis: String,
    /// Soft-mounted parts: transmissibility over the rotation band and at blade pass.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub isolation: Vec<isolation::BandIsolation>,
}

fn check_range(v: (f64, f64), lo_min: f64, hi_max: f64, what: &str, unit: &str) -> Result<()> {
    let ok = v.0.is_finite() && v.1.is_finite() && v.0 > lo_min && v.0 <= v.1 && v.1 <= hi_max;
    if !ok {
        crate::fail!(
            "{what} {}:{} is not a range above {lo_min} and up to {hi_max} {unit} with LO at most HI",
            fmt_num(v.0),
            fmt_num(v.1)
        );
    }
    Ok(())
}

impl Drive {
    /// A drive from nameplate values.
    pub fn nameplate(
        motor_kv: f64,
        cells: u32,
        cell_volts: Option<f64>,
        throttle_pct: (f64, f64),
        blades: u32,
    ) -> Result<Drive> {
        let d = Drive {
            motor_kv: Some(motor_kv),
            cells: Some(cells),
            cell_volts,
            pack_volts: None,
            throttle_pct: Some(throttle_pct),
            rpm: None,
            blades,
            near_pct: DEFAULT_NEAR_PCT,
        };
        d.check()?;
        Ok(d)
    }

    /// A drive from nameplate values with the pack voltage given directly, V.
    pub fn nameplate_volts(
        motor_kv: f64,
        pack_volts: f64,
        throttle_pct: (f64, f64),
        blades: u32,
    ) -> Result<Drive> {
        let d = Drive {
            motor_kv: Some(motor_kv),
            cells: None,
            cell_volts: None,
            pack_volts: Some(pack_volts),
            throttle_pct: Some(throttle_pct),
            rpm: None,
            blades,
            near_pct: DEFAULT_NEAR_PCT,
        };
        d.check()?;
        Ok(d)
    }

    /// A drive from an rpm range.
    pub fn from_rpm(rpm: (f64, f64), blades: u32) -> Result<Drive> {
        let d = Drive {
            motor_kv: None,
            cells: None,
            cell_volts: None,
            pack_volts: None,
            throttle_pct: None,
            rpm: Some(rpm),
            blades,
            near_pct: DEFAULT_NEAR_PCT,
        };
        d.check()?;
        Ok(d)
    }

    /// Every value in range and exactly one way of giving the speed. Errors are one
    /// sentence naming the value.
    pub fn check(&self) -> Result<()> {
        if self.blades == 0 || self.blades > MAX_BLADES {
            crate::fail!(
                "blades must be from 1 to {MAX_BLADES} per propeller, not {}",
                self.blades
            );
        }
        if !(self.near_pct.is_finite() && self.near_pct >= 0.0 && self.near_pct <= 100.0) {
            crate::fail!(
                "the near margin must be from 0 to 100 %, not {}",
                fmt_num(self.near_pct)
            );
        }
        let nameplate = self.motor_kv.is_some()
            || self.cells.is_some()
            || self.cell_volts.is_some()
            || self.pack_volts.is_some()
            || self.throttle_pct.is_some();
        match (self.rpm, nameplate) {
            (Some(_), true) => crate::fail!(
                "give the speed either as an rpm range or as motor KV, cells and throttle, not both"
            ),
            (Some(r), false) => check_range(r, 0.0, MAX_RPM, "the rpm range", "rpm"),
            (None, false) => {
                crate::fail!(
                    "the drive needs either an rpm range or motor KV, cells (or pack volts) and throttle"
                )
            }
            (None, true) => {
                let Some(kv) = self.motor_kv else {
                    crate::fail!(
                        "the drive needs the motor KV (rpm per volt) with cells and throttle"
                    );
                };
                if !(kv.is_finite() && kv > 0.0 && kv <= MAX_KV) {
                    crate::fail!(
                        "the motor KV must be above 0 and at most {MAX_KV} rpm per volt, not {}",
                        fmt_num(kv)
                    );
                }
                match (self.cells, self.pack_volts) {
                    (Some(_), Some(_)) => crate::fail!(
                        "give the pack voltage either as cells (with volts per cell) or as pack volts, not both"
                    ),
                    (None, Some(v)) => {
                        if self.cell_volts.is_some() {
                            crate::fail!(
                                "volts per cell go with cells, not with the pack voltage; give one or the other"
                            );
                        }
                        if !(v.is_finite() && v > 0.0 && v <= MAX_PACK_VOLTS) {
                            crate::fail!(
                                "the pack voltage must be above 0 and at most {MAX_PACK_VOLTS} V, not {}",
                                fmt_num(v)
                            );
                        }
                    }
                    (None, None) => crate::fail!(
                        "the drive needs the number of cells or the pack voltage with the motor KV"
                    ),
                    (Some(cells), None) => {
                        if cells == 0 || cells > MAX_CELLS {
                            crate::fail!("cells must be from 1 to {MAX_CELLS}, not {cells}");
                        }
                        let v = self.volts_per_cell();
                        if !(v.is_finite() && v > 0.0 && v <= MAX_CELL_VOLTS) {
                            crate::fail!(
                                "volts per cell must be above 0 and at most {MAX_CELL_VOLTS} V, not {}",
                                fmt_num(v)
                            );
                        }
                    }
                }
                let Some(t) = self.throttle_pct else {
                    crate::fail!(
                        "the drive needs the throttle range (hover to full, percent) with the motor KV"
                    );
                };
                let ok =
                    t.0.is_finite() && t.1.is_finite() && t.0 > 0.0 && t.0 <= t.1 && t.1 <= 100.0;
                if !ok {
                    crate::fail!(
                        "the throttle range {}:{} must lie within 0-100 % (LO above 0, LO at most HI)",
                        fmt_num(t.0),
                        fmt_num(t.1)
                    );
                }
                if t.1 <= 1.0 {
                    crate::fail!(
                        "the throttle {}:{} is at most 1 %: throttle is in percent; did you mean {}:{}?",
                        fmt_num(t.0),
                        fmt_num(t.1),
                        fmt_num(t.0 * 100.0),
                        fmt_num(t.1 * 100.0)
                    );
                }
                Ok(())
            }
        }
    }

    /// Volts per cell used (the given value, else nominal).
    pub fn volts_per_cell(&self) -> f64 {
        self.cell_volts.unwrap_or(NOMINAL_CELL_VOLTS)
    }

    /// Pack voltage, V (nameplate drives only): given directly, or cells x volts per cell.
    pub fn pack_volts(&self) -> Option<f64> {
        self.pack_volts
            .or_else(|| self.cells.map(|c| f64::from(c) * self.volts_per_cell()))
    }

    /// The rotation band at [`SAGGED_CELL_VOLTS`] per cell, Hz: `KV x cells x 3.5 x
    /// throttle / 60`. `None` for an rpm range, a pack voltage given without cells, or volts
    /// per cell already at or below the sagged value.
    pub fn sagged_rotation_hz(&self) -> Option<(f64, f64)> {
        let (kv, cells, t) = (self.motor_kv?, self.cells?, self.throttle_pct?);
        if self.rpm.is_some() || self.volts_per_cell() <= SAGGED_CELL_VOLTS {
            return None;
        }
        let n = kv * f64::from(cells) * SAGGED_CELL_VOLTS / 60.0;
        Some((n * t.0 / 100.0, n * t.1 / 100.0))
    }

    /// Rotation speed range in rpm: given, or `KV x V x throttle`.
    pub fn rpm_range(&self) -> (f64, f64) {
        if let Some(r) = self.rpm {
            return r;
        }
        let kv = self.motor_kv.unwrap_or(0.0);
        let v = self.pack_volts().unwrap_or(0.0);
        let (lo, hi) = self.throttle_pct.unwrap_or((0.0, 0.0));
        (kv * v * lo / 100.0, kv * v * hi / 100.0)
    }

    /// The excitation bands: rotation, its 2x and 3x harmonics, blade pass.
    pub fn bands(&self) -> Bands {
        let (lo, hi) = self.rpm_range();
        let rot = (lo / 60.0, hi / 60.0);
        let times = |k: f64| (k * rot.0, k * rot.1);
        let b = f64::from(self.blades);
        Bands {
            bands: vec![
                Band {
                    name: "rotation".into(),
                    hz: rot,
                },
                Band {
                    name: "2x rotation".into(),
                    hz: times(2.0),
                },
                Band {
                    name: "3x rotation".into(),
                    hz: times(3.0),
                },
                Band {
                    name: "blade pass".into(),
                    hz: times(b),
                },
            ],
            near_pct: self.near_pct,
        }
    }

    /// One line describing the drive, e.g. "KV 1300, 6 x 3.7 V = 22.2 V, throttle 35-100 %
    /// -> 10101-28860 rpm, 3 blades".
    pub fn describe(&self) -> String {
        let (lo, hi) = self.rpm_range();
        if let (Some(kv), None, Some(v), Some(t)) = (
            self.motor_kv,
            self.cells,
            self.pack_volts,
            self.throttle_pct,
        ) {
            return format!(
                "KV {kv}, pack {v} V, throttle {}-{} % -> {lo:.0}-{hi:.0} rpm, {} blades",
                t.0, t.1, self.blades
            );
        }
        match (self.motor_kv, self.pack_volts(), self.throttle_pct) {
            (Some(kv), Some(v), Some(t)) => format!(
                "KV {kv}, {} x {} V = {v:.1} V, throttle {}-{} % -> {lo:.0}-{hi:.0} rpm, {} blades",
                self.cells.unwrap_or(0),
                self.volts_per_cell(),
                t.0,
                t.1,
                self.blades
            ),
            _ => format!("{lo:.0}-{hi:.0} rpm, {} blades", self.blades),
        }
    }

    /// The run file's drive section (without mount isolation, see `isolation`).
    pub fn section(&self) -> DriveSection {
        DriveSection {
            description: self.clone(),
            rpm: self.rpm_range(),
            near_pct: self.near_pct,
            bands: self.bands().bands,
            sagged_rotation_hz: self.sagged_rotation_hz(),
            basis: ESTIMATE_NOTE.into(),
            isolation: Vec::new(),
        }
    }
}

/// The verdict of one frequency against the bands.
pub fn judge(bands: &Bands, f_hz: f64) -> Option<BandVerdict> {
    let mut best: Option<(f64, &Band)> = None;
    let mut inside = Vec::new();
    for b in &bands.bands {
        let (lo, hi) = b.hz;
        if !(lo > 0.0 && hi >= lo) {
            continue;
        }
        let margin = if f_hz < lo {
            100.0 * (lo - f_hz) / lo
        } else if f_hz > hi {
            100.0 * (f_hz - hi) / hi
        } else {
            inside.push(b.name.clone());
            // Depth into the band: the smaller of the two distances, each in percent of its
            // own edge (the edge is chosen by the measure reported, so no jump at the middle).
            -100.0 * ((f_hz - lo) / lo).min((hi - f_hz) / hi)
        };
        if best.is_none_or(|(m, _)| margin < m) {
            best = Some((margin, b));
        }
    }
    let (margin, band) = best?;
    let verdict = if !inside.is_empty() {
        Verdict::Inside
    } else if margin < bands.near_pct {
        Verdict::Near
    } else {
        Verdict::Clear
    };
    Some(BandVerdict {
        verdict,
        name: band.name.clone(),
        margin_pct: margin,
        inside,
    })
}

/// Each mode's verdict against the bands, in the order of `modes`. Pure: the pipeline can
/// call it wherever it assembles its result.
pub fn verdicts(bands: &Bands, modes: &[Mode]) -> Vec<BandVerdict> {
    modes
        .iter()
        .filter_map(|m| judge(bands, m.frequency_hz))
        .collect()
}

/// Judge an analysis against the drive: each mode's verdict goes in its `band`; the drive's
/// section (its bands, and the mount's isolation over them when there is a base channel and
/// an accepted hit) comes back. Called once per result by the pipeline.
pub fn assess(
    drive: &Drive,
    modes: &mut [Mode],
    spectra: &crate::spectra::Spectra,
    mount: Option<&crate::modes::softmount::MountFit>,
    has_base: bool,
) -> DriveSection {
    let bands = drive.bands();
    for m in modes.iter_mut() {
        m.band = judge(&bands, m.frequency_hz);
    }
    let mut section = drive.section();
    if has_base && spectra.hits > 0 {
        section.isolation = isolation::over_bands(&bands, spectra, mount);
    }
    section
}

/// Judge a stored run against another drive when its spectra are not at hand (pictures,
/// reports): each mode's verdict and the drive section are replaced. A stored isolation is
/// kept only when it was worked out over the same bands; otherwise it is dropped and the
/// returned sentence says so.
pub fn rejudge(run: &mut crate::run::RunFile, drive: &Drive) -> Option<String> {
    let bands = drive.bands();
    let v = verdicts(&bands, &run.modes);
    for (m, b) in run.modes.iter_mut().zip(v) {
        m.band = Some(b);
    }
    let mut section = drive.section();
    let mut dropped = None;
    if let Some(old) = run.drive.take() {
        if old.bands == section.bands {
            section.isolation = old.isolation;
        } else if !old.isolation.is_empty() {
            dropped = Some(format!(
                "{}: the mount's stored isolation was over other bands and is not shown against this drive",
                run.variant.label
            ));
        }
    }
    run.drive = Some(section);
    dropped
}

#[cfg(test)]
mod tests;
