//! The picture and report commands as a user runs them: files written, pages parsed as XML
//! (roxmltree 0.20) and searched for external references, bad inputs and outputs refused in
//! one sentence. The pictures' pixels are checked in `plot_pictures`.

use crate::common::{tapmodes, temp_dir};
use crate::plot_pictures::{near, render, repo, rgb, texts_of};
use resvg::tiny_skia::Pixmap;
use tapmodes::plot::raster;

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
