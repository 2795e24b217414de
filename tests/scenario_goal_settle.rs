//! A configuration goal in a scenario file lies in the start's stance: the reader projects
//! it onto that stance's manifold with the joints the file names held at their values. The
//! lever file names only the lever's pivot; the arm must follow the knob.

use std::path::Path;

use clamber::scenario::Goal;
use clamber::scenario_file::{parse_scenario, ScenarioFileError};

const LEVER: &str = include_str!("../scenarios/sevenfold_lever.scenario.toml");

fn path() -> &'static Path {
    Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/scenarios/lever_test.scenario.toml"
    ))
}

#[test]
fn the_lever_goal_keeps_its_pivot_value_and_holds_the_knob() {
    let f = parse_scenario(LEVER, path()).unwrap();
    let s = &f.scenario;
    let Goal::Configuration(q) = &s.goal else {
        panic!("a configuration goal");
    };
    let pivot = &s.robot.joints()[s.robot.joint_id("lever_pivot").unwrap()];
    assert_eq!(
        q[pivot.q_index], -0.2,
        "the named joint keeps the file's value exactly"
    );
    let stack = s.start.stance.constraints(&s.robot, &s.scene, &[]).unwrap();
    let mut buf = stack.buffer(&s.robot);
    let r = stack.evaluate(&s.robot, q, &mut buf, false).unwrap();
    assert!(r <= s.limits.tolerance, "goal residual {r:e}");
    // The arm joints moved to follow the knob.
    let moved: f64 = q
        .iter()
        .zip(&s.start.q)
        .enumerate()
        .filter(|(k, _)| *k != pivot.q_index)
        .map(|(_, (a, b))| (a - b).abs())
        .sum();
    assert!(moved > 0.05, "the arm joints moved by {moved}");
    assert!(s.robot.within_limits(q, 0.0));
}

#[test]
fn a_goal_the_stance_cannot_hold_is_a_located_error() {
    let text = LEVER.replace(
        "q = { lever_pivot = -0.2 }",
        "q = { lever_pivot = -0.2, joint1 = 2.5, joint2 = 0.7, joint4 = 1.0 }",
    );
    assert_ne!(text, LEVER);
    let err = parse_scenario(&text, path()).expect_err("the arm cannot follow");
    let ScenarioFileError::Field {
        line,
        field,
        message,
        ..
    } = &err
    else {
        panic!("a located field error, got {err}");
    };
    let expected_line = text
        .lines()
        .position(|l| l.contains("joint1 = 2.5"))
        .unwrap()
        + 1;
    assert_eq!(*line, expected_line);
    assert_eq!(field, "q");
    assert!(
        message.contains("cannot hold the start's stance"),
        "{message}"
    );
}
