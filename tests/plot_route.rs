//! Plots of the bundled rail route: `clamber plan` writes them (valid PNG and SVG of the
//! documented sizes, with the data drawn), and the plotted series agree with the route and
//! with an outside check (finite differences of the positions against the velocities).

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

use clamber::plot::{JOINTS_WIDTH, JOINT_PANEL_HEIGHT, LINE_PLOT_SIZE};
use clamber::plot_data::route_plot_data;
use clamber::route::{plan_route, RouteSettings};
use clamber::scenario_file::load_scenario;
use clamber::timing::robot_limits;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// The rail scenario, copied into `dir` with an absolute robot path and outputs in `dir`.
fn scenario_in(dir: &Path) -> PathBuf {
    common::bundled_scenario_in(
        dir,
        "sevenfold_rail",
        "sevenfold.toml",
        "rail.scenario.toml",
        &[],
    )
}

fn png_size_and_ink(path: &Path) -> ((u32, u32), usize, usize) {
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(path).unwrap()));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    assert_eq!(info.color_type, png::ColorType::Rgb, "{}", path.display());
    let px = &buf[..info.buffer_size()];
    let ink = px.chunks(3).filter(|p| p != &[255, 255, 255]).count();
    // The data colour (dark teal 1b6f6a), allowing for anti-aliasing.
    let data = px
        .chunks(3)
        .filter(|p| {
            (p[0] as i32 - 0x1b).abs() < 24
                && (p[1] as i32 - 0x6f).abs() < 24
                && (p[2] as i32 - 0x6a).abs() < 24
        })
        .count();
    ((info.width, info.height), ink, data)
}

fn svg_size(path: &Path) -> (u32, u32) {
    let text = std::fs::read_to_string(path).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    let svg = doc.root_element();
    assert_eq!(svg.tag_name().name(), "svg");
    let n = |k| svg.attribute(k).unwrap().parse::<u32>().unwrap();
    (n("width"), n("height"))
}

#[test]
fn plan_writes_the_three_plots_as_png_and_svg() {
    let dir = tempfile::tempdir().unwrap();
    let file = scenario_in(dir.path());
    let out = Command::new(env!("CARGO_BIN_EXE_clamber"))
        .arg("plan")
        .arg(&file)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let plots = dir.path().join("run.plots");
    // sevenfold: 7 position and 7 velocity panels, one row each.
    let joints = (JOINTS_WIDTH, 40 + JOINT_PANEL_HEIGHT * 7);
    for (name, size) in [
        ("joints", joints),
        ("residual", LINE_PLOT_SIZE),
        ("clearance", LINE_PLOT_SIZE),
    ] {
        let (png_dims, ink, data) = png_size_and_ink(&plots.join(format!("{name}.png")));
        assert_eq!(png_dims, size, "{name}.png");
        let area = (size.0 * size.1) as usize;
        assert!(
            ink > area / 100,
            "{name}.png is nearly blank ({ink} non-white pixels)"
        );
        assert!(
            data > 200,
            "{name}.png: the data line is missing ({data} pixels)"
        );
        assert_eq!(
            svg_size(&plots.join(format!("{name}.svg"))),
            size,
            "{name}.svg"
        );
    }
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(stdout.contains("residual.png"), "{stdout}");
    // Nothing else in the plots directory (no temporary file left).
    let mut names: Vec<String> = std::fs::read_dir(&plots)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "clearance.png",
            "clearance.svg",
            "joints.png",
            "joints.svg",
            "residual.png",
            "residual.svg"
        ]
    );
}

#[test]
fn plotted_series_agree_with_the_route_and_with_finite_differences() {
    let f = load_scenario(&root().join("scenarios/sevenfold_rail.scenario.toml")).unwrap();
    let s = &f.scenario;
    let settings = RouteSettings::default();
    let route = plan_route(s, &settings).unwrap();
    let dt = 0.002;
    let d = route_plot_data(s, &route, &settings, dt).unwrap();

    // Residual: the plotted maximum is the route's reported maximum (the verifier's), and
    // every point is within the path tolerance.
    let reported = route
        .legs
        .iter()
        .map(|l| l.max_residual)
        .fold(0.0, f64::max);
    assert_eq!(d.residual.max(), reported);
    assert!(d.residual.y.iter().all(|r| *r <= route.path_tolerance));
    assert_eq!(d.tolerance, route.path_tolerance);
    // Clearance: the rail scene has a crate, so there is a series, and it never touches.
    let c = d.clearance.as_ref().expect("clearance series");
    assert_eq!(c.t.len(), d.residual.t.len());
    assert!(c.min() > 0.0, "min clearance {}", c.min());
    // Times run from 0 to the route's duration without going back.
    assert!(d.residual.t.windows(2).all(|w| w[1] >= w[0]));
    assert!((d.residual.t.last().unwrap() - route.duration).abs() < 1e-9);
    assert!((d.joints.t.last().unwrap() - route.duration).abs() < 1e-9);
    assert_eq!(d.switch_times.len(), route.switches.len());

    // Velocities against central differences of the positions: the difference quotient is
    // the mean velocity over [t - dt, t + dt], so it is within a_max * dt of the velocity
    // at t (mean value theorem, |dv/dt| <= a_max).
    let (vmax, amax) = robot_limits(&s.robot);
    let t = &d.joints.t;
    let mut compared = 0;
    for k in 1..t.len() - 1 {
        let (h0, h1) = (t[k] - t[k - 1], t[k + 1] - t[k]);
        if (h0 - dt).abs() > 1e-9 || (h1 - dt).abs() > 1e-9 {
            continue; // a leg boundary or a leg's shortened last step
        }
        for c in 0..d.joints.velocities.len() {
            let p = &d.joints.positions[c].values;
            let fd = (p[k + 1] - p[k - 1]) / (2.0 * dt);
            let v = d.joints.velocities[c].values[k];
            assert!(
                (fd - v).abs() <= amax[c] * dt + 1e-9,
                "joint {c} at t = {}: velocity {v}, finite difference {fd}",
                t[k]
            );
            assert!(
                v.abs() <= vmax[c] * (1.0 + 1e-6),
                "joint {c} over its speed limit"
            );
            compared += 1;
        }
    }
    assert!(compared > 1000, "only {compared} comparisons");
}

/// A single-stance motion (the lever demo, a passive pivot joint in `q`): its plot data are
/// its timed samples, and the residual along them is what the motion's verifier saw.
#[test]
fn motion_plot_data_follow_the_timed_samples() {
    let s = clamber::demo::lever::scenario().unwrap();
    let m = clamber::motion::plan_motion(&s, &clamber::motion::MotionSettings::default()).unwrap();
    let d = clamber::plot_data::motion_plot_data(&s, &m).unwrap();
    assert_eq!(d.joints.t.len(), m.samples.len());
    assert_eq!(d.joints.positions.len(), s.robot.nq()); // no floating joint
    assert_eq!(d.joints.velocities.len(), s.robot.nv());
    for (k, x) in m.samples.iter().enumerate() {
        assert_eq!(d.joints.t[k], x.t);
        for (c, track) in d.joints.positions.iter().enumerate() {
            assert_eq!(track.values[k], x.q[c]);
        }
        for (c, track) in d.joints.velocities.iter().enumerate() {
            assert_eq!(track.values[k], x.qdot[c]);
        }
    }
    assert_eq!(d.residual.max(), m.stats.max_residual_samples_verified);
    assert!(d.residual.max() <= m.tolerances.tolerance);
    assert!(d.switch_times.is_empty());
    // Every plot renders.
    let all = clamber::plot::plot_bytes(&d).unwrap();
    assert_eq!(all.len(), 6);
}
