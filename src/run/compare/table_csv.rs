//! The comparison as CSV for spreadsheets: one row per pair, unpaired mode, mount and
//! prediction, with the motor-band verdicts before and after when the comparison has a
//! drive. Units are in the headers (`_hz`, `_pct`, `_ratio`, `_pct_points`).

use super::Comparison;
use super::bands::{BandChange, UnpairedInBand};
use super::render::ser;
use crate::error::{Error, Result};

/// The band columns, last in every row (empty without a drive or for rows without a band
/// verdict): verdicts before and after, the nearest band after, the margins (percent of the
/// band edge) and their change (variant minus baseline, percentage points).
pub const BAND_HEADERS: [&str; 7] = [
    "baseline_band_verdict",
    "variant_band_verdict",
    "variant_band",
    "band_movement",
    "baseline_band_margin_pct",
    "variant_band_margin_pct",
    "band_margin_change_pct_points",
];

type BandCols = [String; 7];

fn band_change_cols(b: &BandChange) -> BandCols {
    [
        b.baseline.verdict.label().into(),
        b.variant.verdict.label().into(),
        b.variant.name.clone(),
        ser(&b.movement),
        format!("{:.4}", b.baseline.margin_pct),
        format!("{:.4}", b.variant.margin_pct),
        format!("{:.4}", b.margin_change_pct),
    ]
}

fn unpaired_cols(u: &UnpairedInBand) -> BandCols {
    [
        String::new(),
        u.verdict.verdict.label().into(),
        u.verdict.name.clone(),
        String::new(),
        String::new(),
        format!("{:.4}", u.verdict.margin_pct),
        String::new(),
    ]
}

fn enc(e: csv::Error) -> Error {
    Error::new(format!("cannot encode the comparison as CSV: {e}"))
}

fn put(w: &mut csv::Writer<Vec<u8>>, mut row: Vec<String>, band: BandCols) -> Result<()> {
    row.extend(band);
    w.write_record(&row).map_err(enc)
}

/// The comparison as CSV: one row per pair, unpaired mode, mount and prediction.
pub fn render_csv(c: &Comparison) -> Result<String> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let mut head: Vec<&str> = vec![
        "variant",
        "row",
        "baseline_mode",
        "variant_mode",
        "baseline_hz",
        "variant_hz",
        "frequency_change_pct",
        "stiffness_ratio",
        "stiffness_ratio_mass_corrected",
        "baseline_damping_ratio",
        "variant_damping_ratio",
        "damping_change_pct",
        "frequency_verdict",
        "damping_verdict",
        "pairing",
        "confidence",
        "residue_sign_agrees",
        "note",
    ];
    head.extend(BAND_HEADERS);
    w.write_record(&head).map_err(enc)?;
    let f = |x: Option<f64>| x.map_or(String::new(), |v| format!("{v:.6}"));
    for v in &c.variants {
        let bands = c.bands.as_ref().and_then(|b| b.of_variant(&v.label));
        for m in &v.matched {
            let change = bands.and_then(|b| b.change_of(m));
            put(
                &mut w,
                vec![
                    v.label.clone(),
                    "mode".into(),
                    m.baseline_mode.to_string(),
                    m.variant_mode.to_string(),
                    format!("{:.4}", m.baseline_hz),
                    format!("{:.4}", m.variant_hz),
                    format!("{:.4}", m.frequency_change_pct),
                    format!("{:.6}", m.stiffness_ratio),
                    f(m.stiffness_ratio_mass_corrected),
                    f(m.baseline_damping),
                    f(m.variant_damping),
                    f(m.damping_change_pct),
                    ser(&m.frequency_verdict),
                    m.damping_verdict.as_ref().map_or(String::new(), ser),
                    ser(&m.pairing),
                    format!("{:.4}", m.confidence),
                    m.residue_sign_agrees
                        .map_or(String::new(), |b| b.to_string()),
                    String::new(),
                ],
                change.map(band_change_cols).unwrap_or_default(),
            )?;
        }
        for (row, list, base_side) in [
            ("only_in_baseline", &v.unpaired_baseline, true),
            ("only_in_variant", &v.unpaired_variant, false),
        ] {
            for u in list {
                let (bm, vm, bh, vh, bz, vz) = if base_side {
                    (
                        u.mode.to_string(),
                        String::new(),
                        format!("{:.4}", u.frequency_hz),
                        String::new(),
                        f(u.damping_ratio),
                        String::new(),
                    )
                } else {
                    (
                        String::new(),
                        u.mode.to_string(),
                        String::new(),
                        format!("{:.4}", u.frequency_hz),
                        String::new(),
                        f(u.damping_ratio),
                    )
                };
                let mut r = vec![v.label.clone(), row.into(), bm, vm, bh, vh];
                r.extend(std::iter::repeat_n(String::new(), 3));
                r.extend([bz, vz]);
                r.extend(std::iter::repeat_n(String::new(), 6));
                r.push(u.reason.clone());
                let in_band = bands
                    .filter(|_| !base_side)
                    .and_then(|b| b.unpaired_in_band.iter().find(|x| x.variant_mode == u.mode));
                put(&mut w, r, in_band.map(unpaired_cols).unwrap_or_default())?;
            }
        }
        for r in &v.forbids {
            let mut row = vec![
                v.label.clone(),
                "forbidden".into(),
                r.baseline_mode.to_string(),
                r.variant_mode.to_string(),
            ];
            row.extend(std::iter::repeat_n(String::new(), 13));
            row.push(format!(
                "never paired: {} set by the user",
                super::rule_text("forbid", r)
            ));
            put(&mut w, row, Default::default())?;
        }
        if let Some(mc) = &v.mount
            && let (Some(a), Some(b)) = (&mc.baseline, &mc.variant)
        {
            put(
                &mut w,
                vec![
                    v.label.clone(),
                    "mount".into(),
                    String::new(),
                    String::new(),
                    format!("{:.4}", a.natural_frequency_hz),
                    format!("{:.4}", b.natural_frequency_hz),
                    f(mc.frequency_change_pct),
                    f(mc.stiffness_ratio),
                    String::new(),
                    format!("{:.6}", a.damping_ratio),
                    format!("{:.6}", b.damping_ratio),
                    f((a.damping_ratio > 0.0)
                        .then(|| 100.0 * (b.damping_ratio - a.damping_ratio) / a.damping_ratio)),
                    mc.frequency_verdict.as_ref().map_or(String::new(), ser),
                    mc.damping_verdict.as_ref().map_or(String::new(), ser),
                    String::new(),
                    String::new(),
                    String::new(),
                    mc.isolation
                        .as_ref()
                        .map(|i| {
                            format!(
                                "transmissibility {:.0}-{:.0} Hz: {:+.2} -> {:+.2} dB (model)",
                                i.band_hz.0, i.band_hz.1, i.baseline_model_db, i.variant_model_db
                            )
                        })
                        .into_iter()
                        .chain(mc.doubt.clone())
                        .collect::<Vec<_>>()
                        .join("; "),
                ],
                Default::default(),
            )?;
        }
    }
    if let Some(p) = &c.predicted {
        for r in &p.runs {
            for q in &r.pairs {
                put(
                    &mut w,
                    vec![
                        r.run.clone(),
                        "predicted".into(),
                        q.predicted_mode.to_string(),
                        q.measured_mode.to_string(),
                        format!("{:.4}", q.predicted_hz),
                        format!("{:.4}", q.measured_hz),
                        format!("{:.4}", q.difference_pct),
                        String::new(),
                        String::new(),
                        f(q.predicted_damping),
                        f(q.measured_damping),
                        String::new(),
                        q.agreement.label().into(),
                        String::new(),
                        String::new(),
                        format!("{:.4}", q.confidence),
                        String::new(),
                        q.label.clone().unwrap_or_default(),
                    ],
                    Default::default(),
                )?;
            }
            for n in &r.not_seen {
                let mut row = vec![
                    r.run.clone(),
                    "predicted_not_seen".into(),
                    n.predicted_mode.to_string(),
                    String::new(),
                    format!("{:.4}", n.frequency_hz),
                ];
                row.extend(std::iter::repeat_n(String::new(), 12));
                row.push(n.label.clone().unwrap_or_default());
                put(&mut w, row, Default::default())?;
            }
        }
    }
    let bytes = w
        .into_inner()
        .map_err(|e| Error::new(format!("cannot encode the comparison as CSV: {e}")))?;
    String::from_utf8(bytes).map_err(|e| Error::new(format!("cannot encode the comparison: {e}")))
}
