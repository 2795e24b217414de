//! Reading route files back (`clamber::route_file`, used by `clamber verify`): every malformed
//! input is a typed error naming the field, and a far-off waypoint cannot make the verifier
//! run without bound (found while fuzzing the route reader: the dense check used to take
//! distance / resolution steps on any segment, 2e8 steps for one waypoint 1e6 rad away).

use std::path::Path;

use clamber::route_file::{parse_route, RouteFileError};
use clamber::scenario::Scenario;
use clamber::scenario_file::load_scenario;
use clamber::verify::{verify_path, Defect, VerifySettings};

fn rail() -> Scenario {
    load_scenario(Path::new("scenarios/sevenfold_rail.scenario.toml"))
        .unwrap()
        .scenario
}

fn q_json(q: &[f64]) -> String {
    serde_json::to_string(q).unwrap()
}

#[test]
fn a_well_formed_route_reads_back() {
    let s = rail();
    let q = q_json(&s.start.q);
    let text = format!(
        r#"{{"path_tolerance": 0.002,
            "legs": [{{"stance": {{"hand": "rail"}}, "path": [{q}, {q}]}},
                     {{"stance": {{"hand": "peg"}}, "path": [{q}]}}],
            "switches": [{{"pose": {q}, "from": {{"hand": "rail"}}, "to": {{"hand": "peg"}}}}]}}"#
    );
    let doc = parse_route(&text, &s).unwrap();
    assert_eq!(doc.pieces.len(), 2);
    assert_eq!(doc.pieces[0].path.len(), 2);
    assert_eq!(doc.pieces[0].path[0], s.start.q);
    assert_eq!(doc.pieces[0].tolerance, 0.002);
    let (rail_i, _) = s.scene.hold("rail").unwrap();
    let (peg_i, _) = s.scene.hold("peg").unwrap();
    assert_eq!(doc.pieces[0].stance.grips.get("hand"), Some(&rail_i));
    assert_eq!(doc.pieces[1].stance.grips.get("hand"), Some(&peg_i));
    assert_eq!(doc.switches.len(), 1);
    assert_eq!(doc.switches[0].to.grips.get("hand"), Some(&peg_i));
}

#[test]
fn a_motion_file_reads_back_with_the_start_stance() {
    let s = rail();
    let q = q_json(&s.start.q);
    let doc = parse_route(
        &format!(r#"{{"tolerances": {{"tolerance": 1e-5}}, "path": [{q}]}}"#),
        &s,
    )
    .unwrap();
    assert_eq!(doc.pieces.len(), 1);
    assert_eq!(doc.pieces[0].stance, s.start.stance);
    assert_eq!(doc.pieces[0].tolerance, 1e-5);
    // Without tolerances, the scenario's.
    let doc = parse_route(&format!(r#"{{"path": [{q}]}}"#), &s).unwrap();
    assert_eq!(doc.pieces[0].tolerance, s.limits.tolerance);
}

fn field_of(e: RouteFileError) -> String {
    match e {
        RouteFileError::Field { field, .. } | RouteFileError::Hold { field, .. } => field,
        other => panic!("expected a field error, got {other:?}"),
    }
}

#[test]
fn malformed_files_name_the_field() {
    let s = rail();
    let q = q_json(&s.start.q);
    let short = q_json(&s.start.q[..3]);
    let cases = [
        (r#"{"legs": 3}"#.to_string(), "legs"),
        (
            format!(r#"{{"legs": [{{"path": [{q}]}}]}}"#),
            "legs[0].stance",
        ),
        (
            format!(r#"{{"legs": [{{"stance": {{"hand": 4}}, "path": [{q}]}}]}}"#),
            "legs[0].stance.hand",
        ),
        (
            format!(r#"{{"legs": [{{"stance": {{"hand": "nowhere"}}, "path": [{q}]}}]}}"#),
            "legs[0].stance.hand",
        ),
        (
            format!(r#"{{"legs": [{{"stance": {{}}, "path": [{q}, {short}]}}]}}"#),
            "legs[0].path[1]",
        ),
        (
            r#"{"legs": [{"stance": {}, "path": [[1, "x", 3, 4, 5, 6, 7]]}]}"#.to_string(),
            "legs[0].path[0]",
        ),
        (
            r#"{"legs": [{"stance": {}, "path": []}]}"#.to_string(),
            "legs[0].path",
        ),
        (
            format!(r#"{{"legs": [], "switches": [{{"pose": {q}, "from": {{}}}}]}}"#),
            "switches[0].to",
        ),
        (
            format!(
                r#"{{"legs": [], "switches": [{{"pose": {short}, "from": {{}}, "to": {{}}}}]}}"#
            ),
            "switches[0].pose",
        ),
        (
            r#"{"legs": [], "path_tolerance": -1}"#.to_string(),
            "path_tolerance",
        ),
        (
            format!(r#"{{"path": [{q}], "tolerances": {{"tolerance": "small"}}}}"#),
            "tolerance",
        ),
    ];
    for (text, field) in cases {
        let e = parse_route(&text, &s).unwrap_err();
        let msg = e.to_string();
        assert_eq!(field_of(e), field, "{text}");
        assert!(msg.contains(field), "{msg}");
    }
}

#[test]
fn not_json_gives_line_and_column() {
    let s = rail();
    let e = parse_route("{\n  \"legs\": [\n  oops\n", &s).unwrap_err();
    match e {
        RouteFileError::Json { line, column, .. } => {
            assert_eq!(line, 3);
            assert_eq!(column, 3);
        }
        other => panic!("{other:?}"),
    }
    assert_eq!(
        parse_route("{\"nothing\": 1}", &s).unwrap_err(),
        RouteFileError::NotARoute
    );
    assert_eq!(
        parse_route("[]", &s).unwrap_err(),
        RouteFileError::NotARoute
    );
}

#[test]
fn a_far_off_waypoint_is_one_gap_checked_at_bounded_points() {
    let s = rail();
    let stack = s
        .start
        .stance
        .constraints(&s.robot, &s.scene, &s.constant)
        .unwrap();
    let stride = s.limits.stride;
    let settings = VerifySettings::new(stride / 10.0, s.limits.tolerance, stride).unwrap();
    for far in [1e6, 1e300] {
        let a = s.start.q.clone();
        let mut b = a.clone();
        b[0] += far;
        let report = verify_path(&s.robot, &stack, None, &[a, b], &settings).unwrap();
        assert!(
            matches!(report.defects.first(), Some(Defect::Gap { .. })),
            "{:?}",
            report.defects
        );
        // A segment of length max_gap gets max_gap / resolution = 10 steps, 11 points.
        assert!(report.checked <= 11, "checked {} points", report.checked);
        assert!(report.checked >= 2);
    }
}

/// `clamber verify` on a malformed route file: exit code 3 (bad input, docs/cli.md) and a
/// message naming the file and the field, not an internal error.
#[test]
fn clamber_verify_reports_a_malformed_route_as_bad_input() {
    let dir = tempfile::tempdir().unwrap();
    let route = dir.path().join("bad.route.json");
    std::fs::write(
        &route,
        r#"{"legs": [{"stance": {"hand": "nowhere"}, "path": []}]}"#,
    )
    .unwrap();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_clamber"))
        .arg("verify")
        .arg("scenarios/sevenfold_rail.scenario.toml")
        .arg(&route)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(3), "{err}");
    assert!(err.contains("bad.route.json"), "{err}");
    assert!(err.contains("legs[0].stance.hand"), "{err}");
}
