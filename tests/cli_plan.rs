//! `clamber plan`, `clamber verify` and `clamber check` end to end on the bundled rail
//! scenario, run as a user would (the built binary, in a scratch directory).
//!
//! Outside checks: the route file is re-checked by `clamber verify` (its own dense pass over
//! the JSON, independent of the planner's internal verification), and a route corrupted by
//! hand (a waypoint moved by 0.05 rad, far beyond the 1e-3 path tolerance on a 0.3 m lever
//! arm) must be rejected with exit code 5, as documented in docs/cli.md.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_clamber"))
}

/// The rail scenario, copied into `dir` with an absolute robot path and outputs in `dir`.
fn scenario_in(dir: &Path, peg_xyz: Option<&str>) -> PathBuf {
    let edits: Vec<(&str, &str)> = peg_xyz
        .map(|xyz| ("xyz = [0.35, 0.35, 0.4]", xyz))
        .into_iter()
        .collect();
    common::bundled_scenario_in(
        dir,
        "sevenfold_rail",
        "sevenfold.toml",
        "rail.scenario.toml",
        &edits,
    )
}

#[test]
fn plan_writes_outputs_that_verify_accepts_and_a_corrupted_route_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let file = scenario_in(dir.path(), None);
    let out = Command::new(bin()).arg("plan").arg(&file).output().unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let route = dir.path().join("run.route.json");
    let csv = std::fs::read_to_string(dir.path().join("run.csv")).unwrap();
    let summary = std::fs::read_to_string(dir.path().join("run.txt")).unwrap();
    assert!(summary.contains("switches"), "{summary}");
    // CSV: time plus one column per coordinate of q (sevenfold: 7 joints).
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(header.len(), 1 + 7);
    assert_eq!(header[0], "time");
    let mut last = f64::NEG_INFINITY;
    for l in lines {
        let cells: Vec<f64> = l.split(',').map(|c| c.parse().unwrap()).collect();
        assert_eq!(cells.len(), 8);
        assert!(cells[0] >= last, "time goes backwards");
        last = cells[0];
    }

    let ok = Command::new(bin())
        .arg("verify")
        .arg(&file)
        .arg(&route)
        .output()
        .unwrap();
    assert_eq!(
        ok.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&ok.stderr)
    );
    assert!(String::from_utf8_lossy(&ok.stdout).contains("verified"));

    // Corrupt one interior waypoint of the first leg that has one.
    let mut doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&route).unwrap()).unwrap();
    let legs = doc["legs"].as_array_mut().unwrap();
    let leg = legs
        .iter_mut()
        .find(|l| l["path"].as_array().unwrap().len() >= 3)
        .expect("a leg with an interior waypoint");
    let v = leg["path"][1][1].as_f64().unwrap();
    leg["path"][1][1] = serde_json::json!(v + 0.05);
    let bad = dir.path().join("bad.route.json");
    std::fs::write(&bad, serde_json::to_string(&doc).unwrap()).unwrap();
    let rejected = Command::new(bin())
        .arg("verify")
        .arg(&file)
        .arg(&bad)
        .output()
        .unwrap();
    assert_eq!(rejected.status.code(), Some(5));
    let err = String::from_utf8_lossy(&rejected.stderr);
    assert!(err.contains("leg"), "{err}");
}

#[test]
fn unreachable_peg_gives_no_route_exit_and_no_route_file() {
    let dir = tempfile::tempdir().unwrap();
    // The peg 3 m away: sevenfold's whole arm is about 1.3 m long (robots/sevenfold.toml).
    let file = scenario_in(dir.path(), Some("xyz = [3.0, 0.35, 0.4]"));
    let out = Command::new(bin()).arg("plan").arg(&file).output().unwrap();
    assert_eq!(
        out.status.code(),
        Some(4),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("peg"), "{err}");
    assert!(!dir.path().join("run.route.json").exists());
    assert!(!dir.path().join("run.csv").exists());
}

/// The docks scene of the climbing demos (scenarios/tessel_docks.scenario.toml, exported from
/// `demo::climb::feasibility_scene`): `far_rail` is 3.185 m from `dock_a`, and the climber's
/// reach bound is 1.935 m (docs/scenarios-climb.md; both recomputed in tests/demo_climb.rs
/// from the scene and robot geometry), so grabbing it while holding `dock_a` is out of reach
/// by 1.250 m.
#[test]
fn check_prints_a_feasibility_table_and_json() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let file = root.join("scenarios/tessel_docks.scenario.toml");
    let out = Command::new(bin())
        .arg("check")
        .arg(&file)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(!text.contains("NaN"), "a verdict without a number:\n{text}");
    let far = text
        .lines()
        .find(|l| l.contains("dock_a") && l.contains("far_rail") && l.starts_with("left_gripper"))
        .expect("a row for far_rail");
    assert!(
        far.contains("out of reach") && far.contains("1.250 m"),
        "{far}"
    );
    assert!(text.lines().any(|l| l.contains("feasible ")), "{text}");
    let out = Command::new(bin())
        .args(["--json", "check"])
        .arg(&file)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    assert!(v.to_string().contains("far_rail"));
}

#[test]
fn planner_option_picks_the_motion_planner_and_is_refused_for_a_route() {
    let dir = tempfile::tempdir().unwrap();
    let lever = common::bundled_scenario_in(
        dir.path(),
        "sevenfold_lever",
        "sevenfold.toml",
        "lever.scenario.toml",
        &[],
    );
    // The motion JSON records the planner that made it (stats.planner).
    for (arg, recorded) in [
        (None, "LazyPrm"),
        (Some("rrt-connect"), "RrtConnect"),
        (Some("lazy-prm"), "LazyPrm"),
    ] {
        let out_file = dir
            .path()
            .join(format!("m-{}.json", arg.unwrap_or("default")));
        let mut cmd = Command::new(bin());
        cmd.arg("plan").arg(&lever).arg("-o").arg(&out_file);
        if let Some(a) = arg {
            cmd.args(["--planner", a]);
        }
        let out = cmd.output().unwrap();
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let doc: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(&out_file).unwrap()).unwrap();
        assert_eq!(doc["stats"]["planner"], recorded, "--planner {arg:?}");
    }
    // A route goal: exit 2 (bad command line, docs/cli.md), a reason, no file.
    let rail = scenario_in(dir.path(), None);
    let route = dir.path().join("refused.json");
    let out = Command::new(bin())
        .arg("plan")
        .arg(&rail)
        .arg("-o")
        .arg(&route)
        .args(["--planner", "rrt-connect"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("--planner applies to a goal configuration"),
        "{err}"
    );
    assert!(!route.exists());
    assert!(!dir.path().join("run.route.json").exists());
}
