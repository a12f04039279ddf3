//! Command-line options describing the drive (motors and propellers) for band verdicts.

use crate::drive::{DEFAULT_NEAR_PCT, Drive, file::parse_pair};
use crate::error::Result;
use clap::Args;
use std::path::PathBuf;

/// The motors' excitation bands are estimates from nameplate values; the verdicts are
/// guidance, not a substitute for a careful first hover. Nothing here runs a motor.
#[derive(Debug, Clone, Default, Args)]
#[command(next_help_heading = "Modes")]
pub struct DriveArgs {
    /// Drive file (`key = value` lines: motor_kv, cells, cell_volts or volts, throttle,
    /// blades, near_pct, or rpm instead of the first four; see the README).
    #[arg(long, value_name = "FILE", conflicts_with_all = ["motor_kv", "cells", "cell_volts", "volts", "throttle", "rpm", "blades"])]
    pub drive: Option<PathBuf>,
    /// Motor velocity constant, rpm per volt (with --cells or --volts, and --throttle).
    #[arg(
        long,
        value_name = "RPM_PER_V",
        requires = "throttle",
        conflicts_with = "rpm"
    )]
    pub motor_kv: Option<f64>,
    /// Lithium cells in series (with --motor-kv).
    #[arg(long, value_name = "N", requires = "motor_kv")]
    pub cells: Option<u32>,
    /// Volts per cell [default: 3.7 nominal; 3.5 for a sagged pack].
    #[arg(long, value_name = "V", requires = "motor_kv")]
    pub cell_volts: Option<f64>,
    /// Pack voltage, V, instead of --cells and --cell-volts (with --motor-kv).
    #[arg(long, value_name = "V", requires = "motor_kv", conflicts_with_all = ["cells", "cell_volts"])]
    pub volts: Option<f64>,
    /// Throttle range in percent, hover to full, e.g. 35:100 (with --motor-kv).
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair, requires = "motor_kv")]
    pub throttle: Option<(f64, f64)>,
    /// Rotation speed range in rpm, instead of --motor-kv, --cells and --throttle.
    #[arg(long, value_name = "LO:HI", value_parser = parse_pair)]
    pub rpm: Option<(f64, f64)>,
    /// Blades per propeller (blade pass = blades x rotation).
    #[arg(long, value_name = "N")]
    pub blades: Option<u32>,
    /// Margin of a "near" verdict, percent of the nearest band edge [default: 10].
    #[arg(long, value_name = "PCT")]
    pub near_pct: Option<f64>,
}

impl DriveArgs {
    /// The drive described, if any; bad values are one sentence.
    pub fn drive(&self) -> Result<Option<Drive>> {
        let mut d = if let Some(p) = &self.drive {
            crate::drive::file::load(p)?
        } else if self.motor_kv.is_some() || self.rpm.is_some() || self.blades.is_some() {
            let Some(blades) = self.blades else {
                crate::fail!("give --blades (blades per propeller) with the drive");
            };
            match (
                self.motor_kv,
                self.cells,
                self.volts,
                self.throttle,
                self.rpm,
            ) {
                (Some(kv), Some(c), None, Some(t), None) => {
                    Drive::nameplate(kv, c, self.cell_volts, t, blades)?
                }
                (Some(kv), None, Some(v), Some(t), None) => {
                    Drive::nameplate_volts(kv, v, t, blades)?
                }
                (None, _, _, _, Some(r)) => Drive::from_rpm(r, blades)?,
                _ => crate::fail!(
                    "give the drive as --motor-kv, --cells (or --volts) and --throttle, or as --rpm, with --blades"
                ),
            }
        } else if self.near_pct.is_some() {
            crate::fail!("--near-pct needs a drive (--drive, --motor-kv or --rpm)");
        } else {
            return Ok(None);
        };
        d.near_pct = self.near_pct.unwrap_or(if self.drive.is_some() {
            d.near_pct
        } else {
            DEFAULT_NEAR_PCT
        });
        d.check()?;
        Ok(Some(d))
    }
}
