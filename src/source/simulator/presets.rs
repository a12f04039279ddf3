//! The demo scenario: parts of the "TM9", an invented 9-inch frame, plus a textbook test bar.
//!
//! Frequencies and damping are plausible for carbon arms and grommet-mounted stacks but are
//! invented for this project (no measured data): common practice, no source.

use super::model::{Mount, RigidBody, SimMode};
use super::{BenchPlan, HammerPlan, HumPlan, SensorPlan, Tip};
use crate::signal::Role;

/// Names of all presets with a one-line description, for `--help` and listings.
pub const PRESETS: &[(&str, &str)] = &[
    (
        "tm9-arm-solid",
        "TM9 arm, solid 5 mm carbon, accelerometer at the motor mount",
    ),
    (
        "tm9-arm-holed",
        "TM9 arm with lightening holes (softer and lighter)",
    ),
    ("tm9-arm-braced", "TM9 arm with a bolted underside brace"),
    (
        "tm9-stack-soft",
        "TM9 electronics stack on soft grommets: base and stack accelerometers",
    ),
    (
        "tm9-stack-firm",
        "TM9 electronics stack on firm grommets: base and stack accelerometers",
    ),
    (
        "bar-cantilever",
        "aluminium test bar 150x20x3 mm clamped at one end, tapped and measured at the tip",
    ),
];

/// Look up a preset by name.
pub fn preset(name: &str, seed: u64) -> Option<BenchPlan> {
    let arm = |label: &str, note: &str, modes: &[(f64, f64, f64)]| {
        plan(label, note, 8000.0, modes_of(modes, 1), one_accel(), seed)
    };
    let p = match name {
        "tm9-arm-solid" => arm(
            name,
            "solid arm",
            &[
                (148.0, 0.012, 6.0),
                (231.0, 0.015, 4.0),
                (612.0, 0.020, 3.0),
                (1185.0, 0.025, 2.0),
            ],
        ),
        "tm9-arm-holed" => arm(
            name,
            "arm with lightening holes",
            &[
                (139.0, 0.014, 6.5),
                (214.0, 0.017, 4.4),
                (575.0, 0.022, 3.2),
                (1092.0, 0.028, 2.2),
            ],
        ),
        "tm9-arm-braced" => arm(
            name,
            "arm with underside brace",
            &[
                (171.0, 0.011, 5.0),
                (262.0, 0.014, 3.6),
                (655.0, 0.019, 2.8),
                (1262.0, 0.024, 1.9),
            ],
        ),
        "tm9-stack-soft" => stack(name, "stack on soft grommets", 88.0, 0.09, seed),
        "tm9-stack-firm" => stack(name, "stack on firm grommets", 152.0, 0.07, seed),
        "bar-cantilever" => {
            let mut p = plan(
                name,
                "clamped-free bar, tip drive and tip response",
                8000.0,
                cantilever_modes(0.020),
                one_accel(),
                seed,
            );
            // A plastic tip: its pulse (4 samples at 8 kHz) has little energy above Nyquist.
            // The simulator has no anti-alias filter, so a steel tip's 0.15 ms pulse (about one
            // sample) would alias and lower the coherence.
            p.hammer.tip = Tip::Medium;
            p.hammer.peak_n = 0.5;
            p.sensors[1].full_scale = 50.0;
            p
        }
        _ => return None,
    };
    Some(p)
}

/// Euler-Bernoulli clamped-free eigenvalues `lambda_i L` (Blevins, *Formulas for Natural
/// Frequency and Mode Shape*, 1979, table 8-1, case "clamped-free").
pub const CANTILEVER_LAMBDA: [f64; 3] = [1.875_104_07, 4.694_091_13, 7.854_757_44];

/// The test bar: aluminium (E = 69 GPa, rho = 2700 kg/m^3, from memory), 150 x 20 x 3 mm.
pub struct BarGeometry {
    pub length_m: f64,
    pub width_m: f64,
    pub thickness_m: f64,
    pub youngs_pa: f64,
    pub density: f64,
}

pub const TEST_BAR: BarGeometry = BarGeometry {
    length_m: 0.150,
    width_m: 0.020,
    thickness_m: 0.003,
    youngs_pa: 69e9,
    density: 2700.0,
};

impl BarGeometry {
    /// `f_i = (lambda_i L)^2 / (2 pi L^2) sqrt(E I / (rho A))` (Blevins 1979, table 8-1).
    pub fn cantilever_frequency_hz(&self, i: usize) -> f64 {
        let area = self.width_m * self.thickness_m;
        let inertia = self.width_m * self.thickness_m.powi(3) / 12.0;
        let lam = CANTILEVER_LAMBDA[i];
        lam * lam / (2.0 * std::f64::consts::PI * self.length_m.powi(2))
            * (self.youngs_pa * inertia / (self.density * area)).sqrt()
    }

    pub fn mass_kg(&self) -> f64 {
        self.density * self.length_m * self.width_m * self.thickness_m
    }
}

fn cantilever_modes(damping: f64) -> Vec<SimMode> {
    // Mass-normalised clamped-free shapes are +-2/sqrt(m) at the free tip, so the tip
    // point accelerance has modal constant 4/m for every mode (Blevins 1979, table 8-1).
    let a = 4.0 / TEST_BAR.mass_kg();
    (0..3)
        .map(|i| SimMode {
            frequency_hz: TEST_BAR.cantilever_frequency_hz(i),
            damping_ratio: damping,
            modal_constants: vec![if i % 2 == 0 { a } else { -a }],
        })
        .collect()
}

fn stack(label: &str, note: &str, mount_hz: f64, mount_zeta: f64, seed: u64) -> BenchPlan {
    // Channel order: force, base (frame at the standoff), stack (flight controller board).
    // The stack rides on the base through its grommets (a base-excited mount).
    let modes = vec![
        SimMode {
            frequency_hz: 318.0,
            damping_ratio: 0.02,
            modal_constants: vec![4.0, 0.0],
        },
        SimMode {
            frequency_hz: 742.0,
            damping_ratio: 0.025,
            modal_constants: vec![3.0, 0.0],
        },
        SimMode {
            frequency_hz: 1460.0,
            damping_ratio: 0.03,
            modal_constants: vec![2.0, 0.0],
        },
    ];
    let mut sensors = one_accel();
    sensors[1].name = "base_z".into();
    sensors[1].role = Role::Base;
    let mut top = sensors[1].clone();
    top.name = "stack_z".into();
    top.role = Role::Response;
    sensors.push(top);
    let mut p = plan(label, note, 8000.0, modes, sensors, seed);
    p.hum = Some(HumPlan {
        frequency_hz: 50.0,
        amplitude: 0.004,
    });
    p.mount = Some(Mount {
        base_point: 0,
        mounted_point: 1,
        frequency_hz: mount_hz,
        damping_ratio: mount_zeta,
    });
    // The frame rests free on foam for this test: 0.6 kg (invented).
    p.rigid = Some(RigidBody { mass_kg: 0.6 });
    p
}

fn modes_of(list: &[(f64, f64, f64)], points: usize) -> Vec<SimMode> {
    list.iter()
        .map(|&(f, z, a)| SimMode {
            frequency_hz: f,
            damping_ratio: z,
            modal_constants: vec![a; points],
        })
        .collect()
}

fn one_accel() -> Vec<SensorPlan> {
    vec![
        SensorPlan {
            name: "hammer".into(),
            role: Role::Force,
            unit: "N".into(),
            noise_rms: 0.004,
            bits: 16,
            full_scale: 50.0,
            dc_offset: 0.03,
        },
        SensorPlan {
            name: "accel_z".into(),
            role: Role::Response,
            unit: "g".into(),
            noise_rms: 0.006,
            bits: 16,
            full_scale: 16.0,
            dc_offset: -0.02,
        },
    ]
}

fn plan(
    label: &str,
    note: &str,
    sample_rate: f64,
    modes: Vec<SimMode>,
    sensors: Vec<SensorPlan>,
    seed: u64,
) -> BenchPlan {
    BenchPlan {
        label: label.into(),
        note: note.into(),
        sample_rate,
        modes,
        hammer: HammerPlan {
            tip: Tip::Medium,
            peak_n: 4.0,
            force_spread: 0.3,
            gap_s: 2.5,
            gap_spread: 0.2,
            first_s: 0.8,
            double_hit_chance: 0.0,
        },
        sensors,
        hum: None,
        mount: None,
        rigid: None,
        seed,
    }
}
