//! Same seed, same route: byte-identical route JSON (a) across two runs in one process,
//! (b) planned on several threads at once against a single-threaded run, and (c) across two
//! `clamber plan` processes.
//!
//! Wall-clock limits could make a loaded run differ (a leg that hits `leg_time_limit` on a
//! slow run fails there and succeeds on a fast one). The scenarios here finish far inside
//! their limits; `docs/robustness.md` lists which limits could matter.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

use clamber::demo::climb::corridor;
use clamber::demo::{bar_slide, lever};
use clamber::motion::{plan_motion, MotionSettings};
use clamber::route::{plan_route, RouteSettings};
use clamber::scenario::Scenario;
use clamber::scenario_file::load_scenario;

fn rail() -> Scenario {
    load_scenario(Path::new("scenarios/sevenfold_rail.scenario.toml"))
        .unwrap()
        .scenario
}

fn route_json(s: &Scenario) -> String {
    plan_route(s, &RouteSettings::default())
        .unwrap()
        .to_json()
        .unwrap()
}

fn motion_json(s: &Scenario) -> String {
    plan_motion(s, &MotionSettings::default())
        .unwrap()
        .to_json()
        .unwrap()
}

/// The first byte where `a` and `b` differ, with some context, for the failure message.
fn first_difference(a: &str, b: &str) -> String {
    let i = a
        .bytes()
        .zip(b.bytes())
        .position(|(x, y)| x != y)
        .unwrap_or(a.len().min(b.len()));
    let lo = i.saturating_sub(80);
    format!(
        "lengths {} / {}, first difference at byte {i}:\n{}\n---\n{}",
        a.len(),
        b.len(),
        &a[lo..(i + 80).min(a.len())],
        &b[lo..(i + 80).min(b.len())]
    )
}

#[test]
fn two_runs_in_one_process_give_identical_route_json() {
    let s = rail();
    let a = route_json(&s);
    let b = route_json(&s);
    assert!(a.contains("\"switches\""));
    assert!(a.len() > 1000, "{} bytes", a.len());
    assert!(a == b, "{}", first_difference(&a, &b));
    // A different seed is a different question: the seed is written.
    assert!(a.contains(&format!("\"seed\": {}", s.limits.seed)));
}

#[test]
fn threads_give_the_single_threaded_bytes() {
    // Routes: the rail (one arm) and the four-bar climbing corridor (the two-armed climber,
    // several switches); motions: the lever and the bar slide.
    let routes = [rail(), corridor(4).unwrap()];
    let motions = [lever::scenario().unwrap(), bar_slide::scenario().unwrap()];
    let alone_routes: Vec<String> = routes.iter().map(route_json).collect();
    let alone_motions: Vec<String> = motions.iter().map(motion_json).collect();
    // Six planners at once on two cores: each route twice and both motions, all sharing the
    // scenarios (and their robots) by reference.
    let (r, m) = std::thread::scope(|sc| {
        let hr: Vec<_> = routes
            .iter()
            .chain(routes.iter())
            .map(|s| sc.spawn(move || route_json(s)))
            .collect();
        let hm: Vec<_> = motions
            .iter()
            .map(|s| sc.spawn(move || motion_json(s)))
            .collect();
        (
            hr.into_iter()
                .map(|h| h.join().unwrap())
                .collect::<Vec<_>>(),
            hm.into_iter()
                .map(|h| h.join().unwrap())
                .collect::<Vec<_>>(),
        )
    });
    for (k, a) in r.iter().enumerate() {
        let b = &alone_routes[k % routes.len()];
        assert!(
            a == b,
            "{}: {}",
            routes[k % routes.len()].name,
            first_difference(a, b)
        );
    }
    assert!(alone_routes[1].matches("\"action\"").count() >= 2);
    for ((a, b), s) in m.iter().zip(&alone_motions).zip(&motions) {
        assert!(a == b, "{}: {}", s.name, first_difference(a, b));
    }
}

/// The rail scenario in `dir` with an absolute robot path and outputs in `dir`.
fn scenario_in(dir: &Path) -> PathBuf {
    common::bundled_scenario_in(
        dir,
        "sevenfold_rail",
        "sevenfold.toml",
        "rail.scenario.toml",
        &[],
    )
}

#[test]
fn two_plan_processes_write_identical_route_files() {
    let dir = tempfile::tempdir().unwrap();
    let file = scenario_in(dir.path());
    let route = dir.path().join("run.route.json");
    let mut outputs = Vec::new();
    for _ in 0..2 {
        let out = Command::new(env!("CARGO_BIN_EXE_clamber"))
            .arg("--quiet")
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
        outputs.push(std::fs::read_to_string(&route).unwrap());
        std::fs::remove_file(&route).unwrap();
    }
    assert!(outputs[0].len() > 1000);
    assert!(
        outputs[0] == outputs[1],
        "{}",
        first_difference(&outputs[0], &outputs[1])
    );
    // And the library writes the same bytes as the binary.
    let s = load_scenario(&file).unwrap().scenario;
    let lib = route_json(&s);
    assert!(lib == outputs[0], "{}", first_difference(&lib, &outputs[0]));
}
