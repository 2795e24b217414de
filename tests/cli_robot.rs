//! `clamber robot FILE`: the text and JSON reports, and failure on a bad file.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use clamber::report::{RobotReport, REACH_SAMPLES};
use clamber::robot_file::load_robot;

fn data(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(rel)
}

fn clamber(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_clamber"))
        .args(args)
        .output()
        .expect("run the clamber binary")
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

#[test]
fn robot_command_prints_dof_and_joints() {
    let file = data("toml/three_link.toml");
    let out = clamber(&["robot", file.to_str().expect("utf-8 path")]);
    let stdout = text(&out.stdout);
    assert!(
        out.status.success(),
        "exit {:?}, stderr: {}",
        out.status,
        text(&out.stderr)
    );
    assert!(stdout.contains("robot: tri"), "{stdout}");
    assert!(
        stdout.contains("DOF: nq = 3, nv = 3 (0 passive, 3 driven)"),
        "{stdout}"
    );
    for joint in ["j1", "j2", "j3"] {
        assert!(
            stdout
                .lines()
                .any(|l| l.trim_start().starts_with(&format!("{joint} "))),
            "no row for {joint}: {stdout}"
        );
    }
    // j1's row: type, parent -> child, axis and the four limits.
    let j1 = stdout
        .lines()
        .find(|l| l.trim_start().starts_with("j1 "))
        .unwrap_or_default();
    let cells: Vec<&str> = j1.split_whitespace().collect();
    assert_eq!(
        cells,
        ["j1", "revolute", "base", "->", "l1", "[0,", "0,", "1]", "-2.5", "2.5", "2", "5", "no"]
    );
    assert!(
        stdout.contains("ignored self-collision pairs: 4"),
        "{stdout}"
    );
    assert!(
        stdout.contains(&format!(
            "sampled max distance from `l1` origin over {REACH_SAMPLES} samples"
        )),
        "{stdout}"
    );
    assert!(
        stdout.contains("capsule   radius 0.02, length 0.4"),
        "{stdout}"
    );
}

#[test]
fn robot_command_json() {
    let file = data("toml/floating_passive.toml");
    let out = clamber(&["robot", "--json", file.to_str().expect("utf-8 path")]);
    assert!(out.status.success(), "stderr: {}", text(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("valid JSON");
    assert_eq!(v["name"], "flier");
    assert_eq!(
        (
            v["nq"].as_u64(),
            v["nv"].as_u64(),
            v["passive_dof"].as_u64()
        ),
        (Some(9), Some(8), Some(1))
    );
    let joints = v["joints"].as_array().expect("joints array");
    let names: Vec<&str> = joints.iter().filter_map(|j| j["name"].as_str()).collect();
    assert_eq!(names, ["float", "slide", "hinge", "tag_mount"]);
    // Floating joint: six coordinates; rotation bounds unbounded (null).
    let float = &joints[0]["limits"];
    assert_eq!(float.as_array().map(Vec::len), Some(6));
    assert_eq!(float[2]["upper"].as_f64(), Some(3.0));
    assert!(float[4]["lower"].is_null() && float[4]["upper"].is_null());
    assert_eq!(float[4]["velocity"].as_f64(), Some(1.5));
    assert_eq!(v["reach"][0]["from_link"], "body");
}

#[test]
fn bad_file_fails_with_position() {
    let file = data("bad/missing_parent_link.toml");
    let out = clamber(&["robot", file.to_str().expect("utf-8 path")]);
    assert!(!out.status.success(), "a bad file must fail");
    assert_ne!(out.status.code(), Some(0));
    let stderr = text(&out.stderr);
    assert!(
        stderr.contains("missing_parent_link.toml:22:10: `parent`"),
        "{stderr}"
    );
    assert!(out.stdout.is_empty(), "nothing on stdout for a failure");
}

/// A planar chain of links 0.4, 0.3 and 0.2 m (three_link.toml: joint origins and the
/// grip frame along x, all axes along z) reaches at most 0.9 m from joint1's axis, and
/// exactly that when straight: the triangle inequality |a + b + c| <= |a| + |b| + |c|,
/// with equality for aligned vectors. The sampled maximum must not exceed that, and with
/// 2000 samples comes within 3 %.
#[test]
fn reach_of_planar_chain_is_bounded_by_link_lengths() {
    let robot = load_robot(&data("toml/three_link.toml")).expect("loads");
    let report = RobotReport::new(&robot).expect("report");
    let reach = &report.reach[0];
    assert_eq!(
        (reach.effector.as_str(), reach.from_link.as_str()),
        ("tip", "l1")
    );
    assert_eq!(reach.samples, REACH_SAMPLES);
    assert!(reach.max_distance <= 0.9 + 1e-12, "{}", reach.max_distance);
    assert!(reach.max_distance >= 0.97 * 0.9, "{}", reach.max_distance);
    // Same seed, same number.
    let again = RobotReport::new(&robot).expect("report");
    assert_eq!(again.reach[0].max_distance, reach.max_distance);
}
