//! Pictures and reports, looked at: every SVG is rendered with resvg 0.45 (a real SVG
//! renderer, through `plot::raster::rasterize`) and its pixels are checked where a known
//! curve must land; the HTML report is parsed as XML (roxmltree 0.20) and searched for
//! external references.

use crate::common::{tapmodes, temp_dir};
use resvg::tiny_skia::Pixmap;
use resvg::usvg::fontdb::Database;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use tapmodes::drive::Band;
use tapmodes::modes::softmount::{MountFit, MountModel};
use tapmodes::plot::{Figure, MountTrace, PALETTE, Panel, PlotOptions, Trace, raster};

fn repo(p: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(p)
}

/// Render without fonts: text is left out, so only lines, areas and markers are coloured.
fn render(svg: &str) -> Pixmap {
    raster::rasterize(svg, Arc::new(Database::new())).unwrap()
}

fn px(p: &Pixmap, x: i32, y: i32) -> (u8, u8, u8) {
    let c = p.pixel(x as u32, y as u32).unwrap();
    (c.red(), c.green(), c.blue())
}

fn near(a: (u8, u8, u8), b: (u8, u8, u8), tol: i32) -> bool {
    (a.0 as i32 - b.0 as i32).abs() <= tol
        && (a.1 as i32 - b.1 as i32).abs() <= tol
        && (a.2 as i32 - b.2 as i32).abs() <= tol
}

/// Is colour `c` within `r` pixels of (x, y)?
fn colour_near(p: &Pixmap, x: f64, y: f64, r: i32, c: (u8, u8, u8)) -> bool {
    let (x, y) = (x.round() as i32, y.round() as i32);
    (-r..=r).any(|dx| (-r..=r).any(|dy| near(px(p, x + dx, y + dy), c, 45)))
}

fn rgb(i: usize) -> (u8, u8, u8) {
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

fn texts_of(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(|t| t.trim().to_string()))
        .collect()
}

#[test]
fn plot_command_writes_svg_png_and_mode_table() {
    let d = temp_dir("plot-cli");
    let svg = d.join("arms.svg");
    let csv = d.join("modes.csv");
    let (a, b) = (
        repo("recordings/arm-solid.json"),
        repo("recordings/arm-braced.json"),
    );
    let drive = repo("recordings/tm9.drive");
    let (code, out, err) = tapmodes(&[
        "plot",
        a.to_str().unwrap(),
        b.to_str().unwrap(),
        "--out",
        svg.to_str().unwrap(),
        "--drive",
        drive.to_str().unwrap(),
        "--modes-csv",
        csv.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("2 traces") && out.contains("bands"), "{out}");
    let text = std::fs::read_to_string(&svg).unwrap();
    let t = texts_of(&text);
    assert!(t.iter().any(|s| s.starts_with("arm-solid (")));
    assert!(t.iter().any(|s| s.starts_with("arm-braced (")));
    assert!(t.iter().any(|s| s == "blade pass"));
    let pix = render(&text);
    let dark = pix.pixels().iter().filter(|p| p.red() < 200).count();
    assert!(dark > 5_000, "picture nearly empty ({dark} dark pixels)");
    // Mode table: units in the header, one row per mode.
    let table = std::fs::read_to_string(&csv).unwrap();
    let header = table.lines().next().unwrap();
    assert!(header.contains("frequency_hz") && header.contains("damping_pct"));
    let modes = tapmodes::run::RunFile::load(&a).unwrap().modes.len()
        + tapmodes::run::RunFile::load(&b).unwrap().modes.len();
    assert_eq!(table.lines().count(), 1 + modes);
    // PNG: drawn with a system font; without any, one clear sentence.
    let png = d.join("arms.png");
    let (code, _, err) = tapmodes(&["plot", a.to_str().unwrap(), "--out", png.to_str().unwrap()]);
    if raster::fonts().is_ok() {
        assert_eq!(code, 0, "{err}");
        let p = Pixmap::decode_png(&std::fs::read(&png).unwrap()).unwrap();
        assert_eq!(p.width(), 1000);
    } else {
        assert_eq!(code, 1);
        assert!(err.contains("needs a font"), "{err}");
    }
}

#[test]
fn report_is_one_self_contained_parsable_page() {
    let d = temp_dir("report-cli");
    let html = d.join("arms.html");
    let runs =
        ["arm-solid", "arm-holed", "arm-braced"].map(|r| repo(&format!("recordings/{r}.json")));
    let mut args = vec!["report".to_string()];
    args.extend(runs.iter().map(|p| p.display().to_string()));
    args.extend(["--out".into(), html.display().to_string()]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let (code, out, err) = tapmodes(&args);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("3 runs"), "{out}");
    let text = std::fs::read_to_string(&html).unwrap();
    let doc = roxmltree::Document::parse_with_options(
        &text,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..roxmltree::ParsingOptions::default()
        },
    )
    .unwrap();
    // No external references: no src, no href other than in-page anchors, no CSS fetches.
    for n in doc.descendants().filter(|n| n.is_element()) {
        for a in n.attributes() {
            let name = a.name();
            assert!(
                !(name == "src" || (name == "href" && !a.value().starts_with('#'))),
                "external reference {name}={}",
                a.value()
            );
        }
        assert!(!n.has_tag_name("script") && !n.has_tag_name("link") && !n.has_tag_name("img"));
    }
    assert!(!text.contains("url(") && !text.contains("@import"));
    // The plot inline, the comparison table (the compare library's CSV), every run, print CSS.
    assert_eq!(
        doc.descendants().filter(|n| n.has_tag_name("svg")).count(),
        1
    );
    let cmp = tapmodes::run::compare::compare_with(
        &runs
            .iter()
            .map(|p| {
                (
                    p.display().to_string(),
                    tapmodes::run::RunFile::load(p).unwrap(),
                )
            })
            .collect::<Vec<_>>(),
        &tapmodes::run::compare::CompareOptions::default(),
    )
    .unwrap();
    // The comparison as a readable table: units in the headers, damping in percent,
    // numbers rounded (not the CSV's raw headers and digits).
    let ths: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("th"))
        .filter_map(|n| n.text().map(str::to_string))
        .collect();
    for h in [
        "baseline Hz",
        "change %",
        "baseline damping %",
        "frequency verdict",
    ] {
        assert!(ths.iter().any(|t| t == h), "no '{h}' column: {ths:?}");
    }
    assert!(
        !text.contains("baseline_damping"),
        "raw CSV header in the page"
    );
    let m = &cmp.variants[0].matched[0];
    let damping = format!("{:.2}", 100.0 * m.baseline_damping.unwrap());
    let tds: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("td"))
        .filter_map(|n| n.text().map(str::to_string))
        .collect();
    assert!(
        tds.contains(&damping),
        "damping {damping} % not in the table"
    );
    assert!(tds.contains(&format!("{:.1}", m.baseline_hz)));
    for v in &cmp.variants {
        assert!(text.contains(&tapmodes::plot::html::esc(&v.summary)));
    }
    let h2: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("h2"))
        .filter_map(|n| n.text().map(str::to_string))
        .collect();
    for r in ["arm-solid", "arm-holed", "arm-braced"] {
        assert!(h2.iter().any(|h| h == &format!("Run: {r}")), "{h2:?}");
    }
    assert!(text.contains("@media print") && text.contains("@page"));
    assert!(text.contains("propellers"));
}

#[test]
fn bad_inputs_and_outputs_get_one_sentence() {
    let d = temp_dir("plot-bad");
    let a = repo("recordings/arm-solid.json");
    let one_line = |err: &str| err.lines().count() == 1 && err.starts_with("tapmodes: ");
    // Missing run file.
    let (code, _, err) = tapmodes(&[
        "plot",
        "no-such.json",
        "--out",
        d.join("x.svg").to_str().unwrap(),
    ]);
    assert_eq!(code, 1);
    assert!(one_line(&err), "{err}");
    // Corrupt run file.
    let bad = d.join("bad.json");
    std::fs::write(&bad, "{\"schema_version\": 1,").unwrap();
    let (code, _, err) = tapmodes(&[
        "plot",
        bad.to_str().unwrap(),
        "--out",
        d.join("x.svg").to_str().unwrap(),
    ]);
    assert_eq!(code, 1);
    assert!(
        one_line(&err) && err.contains("not a tapmodes run file"),
        "{err}"
    );
    // Unwritable output (no such folder).
    let (code, _, err) = tapmodes(&[
        "plot",
        a.to_str().unwrap(),
        "--out",
        d.join("none/x.svg").to_str().unwrap(),
    ]);
    assert_eq!(code, 1);
    assert!(one_line(&err), "{err}");
    // Wrong picture kind.
    let (code, _, err) = tapmodes(&[
        "plot",
        a.to_str().unwrap(),
        "--out",
        d.join("x.jpg").to_str().unwrap(),
    ]);
    assert_eq!(code, 1);
    assert!(err.contains(".svg or .png"), "{err}");
    // An existing file of another kind is not replaced.
    let other = d.join("notes.svg");
    std::fs::write(&other, "{\"a\": 1}").unwrap();
    let (code, _, err) = tapmodes(&[
        "plot",
        a.to_str().unwrap(),
        "--out",
        other.to_str().unwrap(),
    ]);
    assert_eq!(code, 1);
    assert!(one_line(&err), "{err}");
    assert_eq!(std::fs::read_to_string(&other).unwrap(), "{\"a\": 1}");
    // An output that would overwrite an input (a run whose curve table is named .svg).
    let text = std::fs::read_to_string(&a).unwrap();
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    v["frf_csv"] = "curve.svg".into();
    v["recording"] = serde_json::Value::Null;
    let run = d.join("run.json");
    std::fs::write(&run, serde_json::to_string(&v).unwrap()).unwrap();
    let curve = d.join("curve.svg");
    std::fs::copy(repo("recordings/arm-solid.csv"), &curve).unwrap();
    let before = std::fs::read(&curve).unwrap();
    let (code, _, err) = tapmodes(&[
        "plot",
        run.to_str().unwrap(),
        "--out",
        curve.to_str().unwrap(),
    ]);
    assert_eq!(code, 1);
    assert!(err.contains("over the input"), "{err}");
    assert_eq!(std::fs::read(&curve).unwrap(), before);
    // A run without a curve table is named, and alone it is an error.
    v["frf_csv"] = serde_json::Value::Null;
    v["variant"]["label"] = "no-curve".into();
    let bare = d.join("bare.json");
    std::fs::write(&bare, serde_json::to_string(&v).unwrap()).unwrap();
    let out = d.join("mixed.svg");
    let (code, _, err) = tapmodes(&[
        "plot",
        a.to_str().unwrap(),
        bare.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(
        err.contains("no-curve") && err.contains("no curve table"),
        "{err}"
    );
    let t = texts_of(&std::fs::read_to_string(&out).unwrap());
    assert!(
        t.iter()
            .any(|s| s.contains("no-curve") && s.contains("not drawn")),
        "{t:?}"
    );
    let (code, _, err) = tapmodes(&[
        "report",
        bare.to_str().unwrap(),
        "--out",
        d.join("r.html").to_str().unwrap(),
    ]);
    assert_eq!(code, 1);
    assert!(err.contains("nothing to plot"), "{err}");
}

#[test]
fn app_key_writes_the_current_view_beside_the_runs() {
    use tapmodes::tui::{App, Launch};
    let d = temp_dir("app-picture");
    let launch = Launch::simulated("tm9-arm-solid", 1, Some(6.0), true, false, d.clone()).unwrap();
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(6.0);
    app.press('w');
    let notice = app.model.notice.clone().unwrap_or_default();
    assert!(notice.starts_with("wrote "), "{notice}");
    let svg = d.join(format!(
        "{}-view.svg",
        if app.model.label.is_empty() {
            "live".to_string()
        } else {
            app.model.label.clone()
        }
    ));
    let text = std::fs::read_to_string(&svg).unwrap();
    let r = render(&text);
    // The live trace in the first colour somewhere in the picture; a second press never
    // replaces the first picture.
    assert!(
        r.pixels()
            .iter()
            .any(|p| near((p.red(), p.green(), p.blue()), rgb(0), 10))
    );
    app.press('w');
    assert!(
        d.join(svg.file_stem().unwrap().to_str().unwrap().to_string() + "-2.svg")
            .exists()
    );
}

fn page(text: &str) -> roxmltree::Document<'_> {
    roxmltree::Document::parse_with_options(
        text,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..roxmltree::ParsingOptions::default()
        },
    )
    .unwrap()
}

/// `report --drive` and `plot --drive --modes-csv` judge every run against the given drive,
/// also runs that store none; a run analysed from a WAV shows the roles the analysis used.
#[test]
fn a_given_drive_reaches_every_run_and_roles_come_from_the_setup() {
    let d = temp_dir("report-drive");
    std::fs::copy(repo("recordings/arm-solid.wav"), d.join("arm-solid.wav")).unwrap();
    let solid = d.join("solid.json");
    let (code, _, err) = tapmodes(&[
        "analyze",
        d.join("arm-solid.wav").to_str().unwrap(),
        "--out",
        solid.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let braced = repo("recordings/arm-braced.json");
    let drive_file = repo("recordings/tm9.drive");
    let html = d.join("r.html");
    let (code, _, err) = tapmodes(&[
        "report",
        solid.to_str().unwrap(),
        braced.to_str().unwrap(),
        "--drive",
        drive_file.to_str().unwrap(),
        "--out",
        html.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(&html).unwrap();
    let doc = page(&text);
    let h3 = doc
        .descendants()
        .filter(|n| n.has_tag_name("h3") && n.text() == Some("Excitation bands"))
        .count();
    assert_eq!(h3, 2, "every run section has the bands");
    // 1300 x 6 x 3.5 / 60 = 455.0 Hz at full throttle, x 0.35 = 159.25 Hz.
    assert_eq!(
        text.matches("at 3.5 V/cell under load: rotation 159.2-455.0 Hz")
            .count(),
        2
    );
    // Each mode's verdict, through the library's own function.
    let drive = tapmodes::drive::file::load(&drive_file).unwrap();
    let tds: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("td"))
        .filter_map(|n| n.text().map(str::to_string))
        .collect();
    for p in [&solid, &braced] {
        let run = tapmodes::run::RunFile::load(p).unwrap();
        assert!(run.drive.is_none(), "the run stores no drive");
        for v in tapmodes::drive::verdicts(&drive.bands(), &run.modes) {
            let want = format!("{} {} ({:+.1} %)", v.verdict.label(), v.name, v.margin_pct);
            assert!(tds.contains(&want), "{want} missing");
        }
        // Roles as the analysis used them, lower case.
        let st = &run.setup;
        let f = st.roles.force.unwrap();
        let c = &st.channels[f];
        let want = format!("{f}: {} ({}, force)", c.name, c.unit);
        assert!(tds.iter().any(|t| t.contains(&want)), "{want} missing");
        let r = st.roles.response;
        let want = format!(
            "{r}: {} ({}, response)",
            st.channels[r].name, st.channels[r].unit
        );
        assert!(tds.iter().any(|t| t.contains(&want)), "{want} missing");
    }
    assert!(!text.contains("Unused"), "role names are lower case words");
    // The compare table has the band column.
    assert!(text.contains("motor bands before -&gt; after"));

    // plot --modes-csv with --drive: band columns filled for runs without a stored drive.
    let csv = d.join("m.csv");
    let (code, _, err) = tapmodes(&[
        "plot",
        solid.to_str().unwrap(),
        braced.to_str().unwrap(),
        "--drive",
        drive_file.to_str().unwrap(),
        "--out",
        d.join("p.svg").to_str().unwrap(),
        "--modes-csv",
        csv.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let table = std::fs::read_to_string(&csv).unwrap();
    let mut r = csv::Reader::from_reader(table.as_bytes());
    let head = r.headers().unwrap().clone();
    let vi = head.iter().position(|h| h == "band_verdict").unwrap();
    let mi = head.iter().position(|h| h == "band_margin_pct").unwrap();
    let fi = head.iter().position(|h| h == "frequency_hz").unwrap();
    let bands = drive.bands();
    let mut rows = 0;
    for rec in r.records() {
        let rec = rec.unwrap();
        let f: f64 = rec[fi].parse().unwrap();
        let v = tapmodes::drive::judge(&bands, f).unwrap();
        assert_eq!(&rec[vi], format!("{} {}", v.verdict.label(), v.name));
        let m: f64 = rec[mi].parse().unwrap();
        // Frequency and margin are rounded in the table (3 and 2 decimals).
        assert!((m - v.margin_pct).abs() < 0.02, "{m} vs {}", v.margin_pct);
        rows += 1;
    }
    assert!(rows >= 4, "{table}");
}

/// A frequency range that misses every curve, or a mode table that cannot be written, is
/// one sentence and writes nothing.
#[test]
fn nothing_is_written_when_an_output_cannot_be_made() {
    let d = temp_dir("plot-nothing");
    let a = repo("recordings/arm-solid.json");
    let svg = d.join("x.svg");
    let (code, out, err) = tapmodes(&[
        "plot",
        a.to_str().unwrap(),
        "--freq-range",
        "5000:6000",
        "--out",
        svg.to_str().unwrap(),
    ]);
    assert_eq!(code, 1, "{out}");
    assert!(
        err.lines().count() == 1 && err.contains("no curve has a line in 5000.0-6000.0 Hz"),
        "{err}"
    );
    assert!(!svg.exists());
    let (code, _, err) = tapmodes(&[
        "plot",
        a.to_str().unwrap(),
        "--out",
        svg.to_str().unwrap(),
        "--modes-csv",
        d.join("nodir/m.csv").to_str().unwrap(),
    ]);
    assert_eq!(code, 1);
    assert!(
        err.lines().count() == 1 && err.contains("does not exist"),
        "{err}"
    );
    assert!(
        !svg.exists(),
        "the picture was written although the table could not be"
    );
    // --freq-range is the one band parser's closed form: both sides, LO below HI.
    for bad in ["20:", "600:500", "0:100", "800"] {
        let (code, _, err) = tapmodes(&[
            "plot",
            a.to_str().unwrap(),
            "--freq-range",
            bad,
            "--out",
            svg.to_str().unwrap(),
        ]);
        assert_eq!(code, 2, "{bad}: {err}");
        assert!(!svg.exists());
    }
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
