//! Pictures, looked at: every SVG is rendered with resvg 0.45 (a real SVG renderer, through
//! `plot::raster::rasterize`) and its pixels are checked where a known curve must land. The
//! commands that write pictures and reports are tested in `plot_commands`.

use resvg::tiny_skia::Pixmap;
use resvg::usvg::fontdb::Database;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use tapmodes::drive::Band;
use tapmodes::modes::softmount::{MountFit, MountModel};
use tapmodes::plot::{Figure, MountTrace, PALETTE, Panel, PlotOptions, Trace, raster};

pub(crate) fn repo(p: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(p)
}

/// Render without fonts: text is left out, so only lines, areas and markers are coloured.
pub(crate) fn render(svg: &str) -> Pixmap {
    raster::rasterize(svg, Arc::new(Database::new())).unwrap()
}

fn px(p: &Pixmap, x: i32, y: i32) -> (u8, u8, u8) {
    let c = p.pixel(x as u32, y as u32).unwrap();
    (c.red(), c.green(), c.blue())
}

pub(crate) fn near(a: (u8, u8, u8), b: (u8, u8, u8), tol: i32) -> bool {
    (a.0 as i32 - b.0 as i32).abs() <= tol
        && (a.1 as i32 - b.1 as i32).abs() <= tol
        && (a.2 as i32 - b.2 as i32).abs() <= tol
}

/// Is colour `c` within `r` pixels of (x, y)?
fn colour_near(p: &Pixmap, x: f64, y: f64, r: i32, c: (u8, u8, u8)) -> bool {
    let (x, y) = (x.round() as i32, y.round() as i32);
    (-r..=r).any(|dx| (-r..=r).any(|dy| near(px(p, x + dx, y + dy), c, 45)))
}

pub(crate) fn rgb(i: usize) -> (u8, u8, u8) {
    let c = PALETTE[i];
    (c.0, c.1, c.2)
}

/// |H| of a single-degree-of-freedom system normalised to 1 at low frequency, dB
/// (textbook magnification factor, common practice, no source).
fn sdof_db(f: f64, fn_hz: f64, z: f64) -> f64 {
    let r = f / fn_hz;
    -10.0 * ((1.0 - r * r).powi(2) + (2.0 * z * r).powi(2)).log10()
}

fn sdof_trace(label: &str, fn_hz: f64, z: f64, gain_db: f64) -> Trace {
    let freqs: Vec<f64> = (20..=1000).map(f64::from).collect();
    Trace {
        label: label.into(),
        kind: "FRF H1".into(),
        unit: "g/N".into(),
        magnitude_db: freqs
            .iter()
            .map(|&f| gain_db + sdof_db(f, fn_hz, z))
            .collect(),
        phase_deg: Some(
            freqs
                .iter()
                .map(|&f| if f < fn_hz { 0.0 } else { -180.0 })
                .collect(),
        ),
        coherence: Some(vec![1.0; freqs.len()]),
        spread_db: None,
        modes_hz: vec![fn_hz],
        freqs,
    }
}

fn two_peaks() -> Figure {
    Figure {
        traces: vec![
            sdof_trace("beam-a", 300.0, 0.02, -10.0),
            sdof_trace("beam-b", 600.0, 0.02, -20.0),
        ],
        bands: vec![Band {
            name: "rotation".into(),
            hz: (100.0, 150.0),
        }],
        ..Figure::default()
    }
}

fn panel<'a>(r: &'a tapmodes::plot::Rendered, name: &str) -> &'a Panel {
    r.panel(name).unwrap_or_else(|| panic!("no {name} panel"))
}

#[test]
fn known_peaks_land_on_their_rows_in_their_colours() {
    let fig = two_peaks();
    let r = tapmodes::plot::render_svg(&fig, &PlotOptions::default()).unwrap();
    let pix = render(&r.svg);
    assert_eq!((pix.width(), pix.height()), (r.width, r.height));
    let mag = panel(&r, "magnitude");
    // Peak of an SDOF: 1/(2 z) at fn (within a line), i.e. 27.96 dB above the gain.
    let peak_a = -10.0 + sdof_db(300.0, 300.0, 0.02);
    let peak_b = -20.0 + sdof_db(600.0, 600.0, 0.02);
    assert!((peak_a - (-10.0 + 27.96)).abs() < 0.01);
    let (xa, ya) = (mag.x_of(300.0), mag.y_of(peak_a));
    let (xb, yb) = (mag.x_of(600.0), mag.y_of(peak_b));
    assert!(
        colour_near(&pix, xa, ya, 4, rgb(0)),
        "trace 1 not at its peak"
    );
    assert!(
        colour_near(&pix, xb, yb, 4, rgb(1)),
        "trace 2 not at its peak"
    );
    // Nothing of either trace well above its peak (the curve is where it should be, not
    // smeared over the column).
    for dy in [25.0, 40.0] {
        assert!(!colour_near(&pix, xa, ya - dy, 1, rgb(0)));
        assert!(!colour_near(&pix, xb, yb - dy, 1, rgb(1)));
    }
    // Each trace is in its own colour only: trace 2's colour is absent at trace 1's peak.
    assert!(!colour_near(&pix, xa, ya, 1, rgb(1)));
    // Far from the peaks both curves sit near their gains (0 dB magnification at 20 Hz).
    assert!(colour_near(
        &pix,
        mag.x_of(40.0),
        mag.y_of(-10.0),
        3,
        rgb(0)
    ));
    // The band is shaded (grey) in the coherence panel's empty lower half, and only there.
    let coh = panel(&r, "coherence");
    let grey = |c: (u8, u8, u8)| c.0 == c.1 && c.1 == c.2 && c.0 < 246;
    let y = coh.y_of(0.3) as i32;
    let inside = px(&pix, coh.x_of(125.0) as i32, y);
    let outside = px(&pix, coh.x_of(250.0) as i32, y);
    assert!(grey(inside), "band not shaded: {inside:?}");
    assert!(
        !grey(outside) && outside.0 > 246,
        "shading outside the band: {outside:?}"
    );
    // The coherence traces are drawn at 1.
    assert!(colour_near(&pix, coh.x_of(700.0), coh.y_of(1.0), 3, rgb(1)));
    // Phase panel: trace 1 at 0 deg below its mode, at -180 above.
    let ph = panel(&r, "phase");
    assert!(colour_near(&pix, ph.x_of(200.0), ph.y_of(0.0), 3, rgb(0)));
    assert!(colour_near(
        &pix,
        ph.x_of(450.0),
        ph.y_of(-180.0),
        3,
        rgb(0)
    ));
}

#[test]
fn legend_labels_and_mode_frequencies_are_in_the_svg() {
    let r = tapmodes::plot::render_svg(&two_peaks(), &PlotOptions::default()).unwrap();
    let doc = roxmltree::Document::parse(&r.svg).unwrap();
    let texts: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(|t| t.trim().to_string()))
        .collect();
    for want in [
        "beam-a (1 mode)",
        "beam-b (1 mode)",
        "300",
        "600",
        "rotation",
    ] {
        assert!(
            texts.iter().any(|t| t == want),
            "no text '{want}' in {texts:?}"
        );
    }
    // Line styles differ (grey printing): the second trace is dashed, the first is not.
    let dashed = r.svg.matches("<line").count() + r.svg.matches("<polyline").count();
    assert!(dashed > 50, "the dashed trace is missing");
}

#[test]
fn log_axis_places_decades_evenly_and_linear_magnitude_scales() {
    let fig = two_peaks();
    let o = PlotOptions {
        log_frequency: true,
        db: false,
        ..PlotOptions::default()
    };
    let r = tapmodes::plot::render_svg(&fig, &o).unwrap();
    let mag = panel(&r, "magnitude");
    // On a log axis 30 -> 300 and 60 -> 600 span the same width.
    let w1 = mag.x_of(300.0) - mag.x_of(30.0);
    let w2 = mag.x_of(600.0) - mag.x_of(60.0);
    assert!((w1 - w2).abs() < 1e-9);
    let pix = render(&r.svg);
    // Linear magnitude: the peak of trace 1 is 10^((−10 + 27.96)/20) = 7.9 g/N.
    let peak = 10f64.powf((-10.0 + sdof_db(300.0, 300.0, 0.02)) / 20.0);
    assert!(colour_near(
        &pix,
        mag.x_of(300.0),
        mag.y_of(peak),
        4,
        rgb(0)
    ));
}

#[test]
fn response_spectrum_spread_and_mount_panel_are_drawn() {
    let freqs: Vec<f64> = (20..=1000).map(f64::from).collect();
    let spectrum = Trace {
        label: "arm-only".into(),
        kind: "response spectrum".into(),
        unit: "g/Hz".into(),
        magnitude_db: freqs
            .iter()
            .map(|&f| -40.0 + sdof_db(f, 400.0, 0.03))
            .collect(),
        phase_deg: None,
        coherence: None,
        spread_db: Some(vec![6.0; freqs.len()]),
        modes_hz: vec![400.0],
        freqs: freqs.clone(),
    };
    let fit = MountFit {
        natural_frequency_hz: 80.0,
        damping_ratio: 0.1,
        gain: 1.0,
        band_hz: (20.0, 300.0),
        lines: 281,
        error: 0.05,
        magnitude_only: false,
        model: MountModel::default(),
        loss_factor: None,
        other_model_error: None,
        second: None,
    };
    let fig = Figure {
        traces: vec![spectrum],
        mounts: vec![MountTrace {
            label: "stack".into(),
            measured: None,
            fit: fit.clone(),
        }],
        ..Figure::default()
    };
    let r = tapmodes::plot::render_svg(&fig, &PlotOptions::default()).unwrap();
    assert!(r.panel("phase").is_none() && r.panel("coherence").is_none());
    let pix = render(&r.svg);
    let mag = panel(&r, "magnitude");
    // Between the mean and mean + spread: the trace's colour, lightened (the spread band).
    let c = px(
        &pix,
        mag.x_of(700.0) as i32,
        mag.y_of(-40.0 + sdof_db(700.0, 400.0, 0.03) + 4.0) as i32,
    );
    assert!(
        c.2 as i32 - c.0 as i32 > 20 && c.0 > 120,
        "no spread band: {c:?}"
    );
    // Outside mean +- spread: white.
    let c = px(
        &pix,
        mag.x_of(700.0) as i32,
        mag.y_of(-40.0 + sdof_db(700.0, 400.0, 0.03) + 12.0) as i32,
    );
    assert!(c.0 > 230 && c.2 > 230, "spread band too wide: {c:?}");
    // The mount model (black) at its resonance.
    let tr = panel(&r, "transmissibility");
    // The mount frequency marked in the run's colour on the model curve, the model (a thin
    // dark line) along the panel.
    assert!(colour_near(
        &pix,
        tr.x_of(80.0),
        tr.y_of(fit.model_db(80.0)),
        3,
        rgb(0)
    ));
    let dark_near = |f: f64| {
        let (x, y) = (
            tr.x_of(f).round() as i32,
            tr.y_of(fit.model_db(f)).round() as i32,
        );
        (-4..=4).any(|dx| {
            (-3..=3).any(|dy| {
                let c = px(&pix, x + dx, y + dy);
                c.0 < 150 && c.1 < 150 && c.2 < 150
            })
        })
    };
    for f in [150.0, 300.0, 600.0] {
        assert!(dark_near(f), "no model curve at {f} Hz");
    }
    // And 0 dB at 20 Hz (well below the mount frequency), within a pixel of the reference.
    assert!((tr.y_of(fit.model_db(20.0)) - tr.y_of(0.0)).abs() < 3.0);
}

#[test]
fn demo_runs_through_the_library_put_the_first_mode_on_its_peak() {
    let run = repo("recordings/arm-solid.json");
    let loaded = tapmodes::cli::plot::load(std::slice::from_ref(&run), true, None).unwrap();
    assert!(loaded.figure.notes.is_empty());
    let r = tapmodes::plot::render_svg(&loaded.figure, &PlotOptions::default()).unwrap();
    let pix = render(&r.svg);
    let mag = panel(&r, "magnitude");
    let rf = tapmodes::run::RunFile::load(&run).unwrap();
    let curve =
        tapmodes::run::curve_read::read_curve_csv(&repo("recordings/arm-solid.csv")).unwrap();
    let f0 = rf.modes[0].frequency_hz;
    let k = curve
        .freqs
        .iter()
        .enumerate()
        .min_by(|a, b| (a.1 - f0).abs().total_cmp(&(b.1 - f0).abs()))
        .unwrap()
        .0;
    assert!(colour_near(
        &pix,
        mag.x_of(curve.freqs[k]),
        mag.y_of(curve.magnitude_db[k]),
        4,
        rgb(0)
    ));
}

pub(crate) fn texts_of(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(|t| t.trim().to_string()))
        .collect()
}

/// Frequency tick labels use one format per axis (never "800, 1k, 1200").
#[test]
fn tick_labels_share_one_format_per_axis() {
    let r = tapmodes::plot::render_svg(
        &two_peaks(),
        &PlotOptions {
            range_hz: Some((600.0, 1500.0)),
            ..PlotOptions::default()
        },
    )
    .unwrap();
    let t = texts_of(&r.svg);
    assert!(t.iter().any(|s| s == "1000"), "{t:?}");
    assert!(!t.iter().any(|s| s == "1k"), "{t:?}");
}
