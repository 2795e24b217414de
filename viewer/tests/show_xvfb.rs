//! The window mode under a virtual X server: `clamber-view show ... --screenshot PNG --after
//! 2` must open the window, replay, and save a non-trivial frame. Skipped (loudly) only when
//! `xvfb-run` is not installed; .ci/run installs it.

mod common;

use std::process::Command;

use clamber_view::overlay::Timeline;
use clamber_view::palette;

fn have(cmd: &str) -> bool {
    Command::new("sh")
        .args(["-c", &format!("command -v {cmd}")])
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

#[test]
fn show_opens_a_window_and_takes_a_screenshot() {
    if !have("xvfb-run") {
        eprintln!(
            "\n!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!\n\
             SKIPPED show_opens_a_window_and_takes_a_screenshot: xvfb-run is not\n\
             installed (apt-get install xvfb). The window mode was NOT checked.\n\
             !!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!\n"
        );
        return;
    }
    screenshot_through(env!("CARGO_BIN_EXE_clamber-view").as_ref());
}

/// The same through the core binary: `clamber show` finds `clamber-view` beside itself (both
/// are built into the same target directory by `cargo test --workspace`) and forwards.
#[test]
fn clamber_show_forwards_to_the_viewer() {
    let viewer = std::path::Path::new(env!("CARGO_BIN_EXE_clamber-view"));
    let core = viewer.with_file_name(format!("clamber{}", std::env::consts::EXE_SUFFIX));
    if !have("xvfb-run") || !core.is_file() {
        eprintln!(
            "\n!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!\n\
             SKIPPED clamber_show_forwards_to_the_viewer: xvfb-run missing or the core\n\
             binary not built beside the viewer ({}); run `cargo test --workspace`.\n\
             !!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!!\n",
            core.display()
        );
        return;
    }
    screenshot_through(&core);
}

/// Run `PROGRAM show DEMO ROUTE --screenshot ...` under Xvfb and check the screenshot.
fn screenshot_through(program: &std::path::Path) {
    let (_, json) = common::demo_route();
    let dir = tempfile::tempdir().unwrap();
    let route = dir.path().join("demo.route.json");
    std::fs::write(&route, json).unwrap();
    let shot = dir.path().join("shot.png");
    let (w, h) = (640u32, 480u32);
    let out = Command::new("xvfb-run")
        .args(["-a", "-s", "-screen 0 1024x768x24"])
        .arg(program)
        .arg("show")
        .arg(common::demo_path())
        .arg(&route)
        .arg("--screenshot")
        .arg(&shot)
        .args([
            "--after",
            "2",
            "--width",
            &w.to_string(),
            "--height",
            &h.to_string(),
        ])
        .output()
        .expect("xvfb-run runs");
    assert!(
        out.status.success(),
        "show under Xvfb failed: {}\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
    let img = image::open(&shot).expect("a PNG screenshot").to_rgb8();
    assert_eq!((img.width(), img.height()), (w, h));
    // Non-trivial: not one flat colour, mostly not background, many distinct colours.
    let bg = palette::srgb8(palette::BACKGROUND);
    let total = (w * h) as usize;
    let background = img
        .pixels()
        .filter(|p| {
            p.0.iter()
                .zip(bg)
                .all(|(a, b)| (*a as i32 - b as i32).abs() <= 3)
        })
        .count();
    assert!(
        background < total * 95 / 100,
        "{background} of {total} pixels are background"
    );
    let mut colours: Vec<[u8; 3]> = img.pixels().map(|p| p.0).collect();
    colours.sort_unstable();
    colours.dedup();
    assert!(
        colours.len() > 100,
        "only {} distinct colours",
        colours.len()
    );
    // The timeline is drawn: on its row, pixels of a stance span's colour.
    let tl = Timeline::new(w as f32, h as f32);
    let spans = [
        palette::srgb8(palette::SPAN_A),
        palette::srgb8(palette::SPAN_B),
    ];
    let row = tl.y.round() as u32;
    let close = |p: [u8; 3], c: [u8; 3]| {
        p.iter()
            .zip(c)
            .all(|(a, b)| (*a as i32 - b as i32).abs() <= 12)
    };
    let on_row = (0..w)
        .filter(|&x| spans.iter().any(|&c| close(img.get_pixel(x, row).0, c)))
        .count();
    assert!(
        on_row as f32 > 0.5 * (tl.x1 - tl.x0),
        "timeline span colours on only {on_row} pixels of row {row} (middle pixel {:?}, spans {spans:?})",
        img.get_pixel(w / 2, row).0
    );
}
