//! The motor bands in the app: shaded named columns over the curve at 80x24 and 160x48,
//! the logarithmic axis, the band column of the mode table and the soft mount's isolation.

use crate::common::temp_dir;
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use ratatui::buffer::Buffer;
use tapmodes::drive::Drive;
use tapmodes::signal::RoleChoice;
use tapmodes::tui::drive_view::BAND_COLORS;
use tapmodes::tui::{App, Launch};

/// The worked example's drive: 1300 rpm/V, 6 cells at 3.7 V, 35-100 %, 3 blades.
fn drive() -> Drive {
    Drive::nameplate(1300.0, 6, None, (35.0, 100.0), 3).unwrap()
}

fn app(preset: &str, seconds: f64, dir: &std::path::Path, base: bool) -> App {
    let mut launch =
        Launch::simulated(preset, 1, Some(seconds), true, false, dir.to_path_buf()).unwrap();
    if base {
        let choice = RoleChoice {
            force: Some(0),
            response: Some(2),
            base: Some(1),
            no_force: false,
        };
        launch.roles = choice.resolve(launch.source.info()).unwrap();
    }
    launch.drive = Some(drive());
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(seconds);
    app
}

fn screen(app: &App, w: u16, h: u16) -> Buffer {
    let mut t = Terminal::new(TestBackend::new(w, h)).unwrap();
    t.draw(|f| tapmodes::tui::view::view(&app.model, f))
        .unwrap();
    t.backend().buffer().clone()
}

fn text(b: &Buffer) -> String {
    let mut s = String::new();
    for y in 0..b.area.height {
        for x in 0..b.area.width {
            s.push_str(b[(x, y)].symbol());
        }
        s.push('\n');
    }
    s
}

/// Leftmost column of each band colour on the row below the names.
fn first_columns(b: &Buffer) -> Vec<Option<u16>> {
    BAND_COLORS
        .iter()
        .map(|c| (0..b.area.height).find_map(|y| (0..b.area.width).find(|&x| b[(x, y)].bg == *c)))
        .collect()
}

#[test]
fn bands_are_shaded_named_columns_at_both_sizes() {
    let dir = temp_dir("drive-view-sizes");
    let app = app("tm9-arm-solid", 9.0, &dir, false);
    for (w, h) in [(80, 24), (160, 48)] {
        let b = screen(&app, w, h);
        let t = text(&b);
        if std::env::var_os("TAPMODES_SHOW_SCREENS").is_some() {
            println!("{w}x{h}\n{t}");
        }
        let shaded = (0..h)
            .flat_map(|y| (0..w).map(move |x| (x, y)))
            .filter(|&(x, y)| BAND_COLORS.contains(&b[(x, y)].bg))
            .count();
        assert!(shaded > 0, "{w}x{h}: no band shading\n{t}");
        assert!(
            t.contains("rot"),
            "{w}x{h}: the rotation band is not named\n{t}"
        );
        assert!(
            t.contains("band"),
            "{w}x{h}: the mode table has no band column\n{t}"
        );
        // The first mode of the solid arm (about 148 Hz) lies 12 % below the rotation band.
        assert!(
            t.contains("clear"),
            "{w}x{h}: no verdict in the mode table\n{t}"
        );
    }
}

#[test]
fn log_axis_spreads_the_low_bands() {
    let dir = temp_dir("drive-view-log");
    let mut app = app("tm9-arm-solid", 9.0, &dir, false);
    // Column spans rotation->2x and 2x->3x start: on a linear axis equal (168.35 Hz each),
    // on a log axis in the ratio log(2) / log(1.5) = 1.71.
    let spans = |b: &Buffer| {
        let c = first_columns(b);
        let (r, x2, x3) = (c[0].unwrap(), c[1].unwrap(), c[3].unwrap());
        f64::from(x2 - r) / f64::from(x3 - x2)
    };
    let lin = spans(&screen(&app, 160, 48));
    app.press('g');
    assert!(app.model.log_freq);
    let b = screen(&app, 160, 48);
    let log = spans(&b);
    assert!((lin - 1.0).abs() < 0.35, "linear ratio {lin}");
    assert!(
        (log - 2f64.ln() / 1.5f64.ln()).abs() < 0.35,
        "log ratio {log}"
    );
    assert!(text(&b).contains("Hz log"));
}

#[test]
fn soft_mount_isolation_is_shown() {
    let dir = temp_dir("drive-view-mount");
    let app = app("tm9-stack-soft", 9.0, &dir, true);
    let t = text(&screen(&app, 160, 48));
    if std::env::var_os("TAPMODES_SHOW_SCREENS").is_some() {
        println!("{t}");
    }
    assert!(t.contains("mount"), "{t}");
    assert!(t.contains("isolates above"), "{t}");
    assert!(t.contains("rot 168-481 Hz"), "{t}");
    // The coherence shown is the band's lowest: the label says so.
    assert!(t.contains("coh min "), "{t}");
}
