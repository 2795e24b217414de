//! Off-screen rendering of the bundled rail demo on the CI machine (software Vulkan, no GPU).
//!
//! Independent check of where the robot is drawn: a picture with the robot minus the same
//! picture without it gives the robot's pixels (mask); the hand position computed with
//! Clamber's forward kinematics, projected with the picture's camera (pinhole projection:
//! the camera's own projection matrix), must land on that mask, and the mask must move
//! between two times of the route.

mod common;

use clamber::kinematics::forward_kinematics;
use clamber::Pose;
use clamber_view::framing::ViewSettings;
use clamber_view::render::{Layers, Renderer};
use image::RgbImage;
use kiss3d::camera::Camera3d;
use kiss3d::prelude::{Vec2, Vec3};

const W: u32 = 480;
const H: u32 = 360;

/// Pixels that differ between `a` and `b` by more than a small amount (sum over channels).
fn mask(a: &RgbImage, b: &RgbImage) -> Vec<bool> {
    a.pixels()
        .zip(b.pixels())
        .map(|(p, q)| {
            let d: i32 = (0..3).map(|k| (p.0[k] as i32 - q.0[k] as i32).abs()).sum();
            d > 24
        })
        .collect()
}

fn count(m: &[bool]) -> usize {
    m.iter().filter(|&&x| x).count()
}

/// Number of mask pixels within `r` pixels of (`x`, `y`) (image coordinates, y down).
fn near(m: &[bool], x: f32, y: f32, r: f32) -> usize {
    let mut n = 0;
    for j in 0..H {
        for i in 0..W {
            let (dx, dy) = (i as f32 + 0.5 - x, j as f32 + 0.5 - y);
            if dx * dx + dy * dy <= r * r && m[(j * W + i) as usize] {
                n += 1;
            }
        }
    }
    n
}

#[test]
fn renders_the_robot_where_forward_kinematics_puts_it() {
    let (s, replay) = common::demo_replay();
    let view = ViewSettings {
        width: W,
        height: H,
        ..Default::default()
    };
    let mut r = Renderer::new(&s, &replay, view).expect("an off-screen surface (software Vulkan)");
    let robot_on = Layers {
        robot: true,
        overlay: false,
    };
    let robot_off = Layers {
        robot: false,
        overlay: false,
    };
    // Start, and the end (hand on the peg).
    let times = [replay.start(), replay.end()];
    let mut masks = Vec::new();
    let mut pictures = Vec::new();
    let hand = s.robot.effector("hand").expect("the demo robot has a hand");
    let mut poses = vec![Pose::identity(); s.robot.links().len()];
    for &t in &times {
        let with = r.frame(t, robot_on);
        let without = r.frame(t, robot_off);
        assert_eq!((with.width(), with.height()), (W, H));
        let m = mask(&with, &without);
        let n = count(&m);
        let total = (W * H) as usize;
        // The arm covers a visible part of the picture but not all of it.
        assert!(
            n > total / 200 && n < total / 2,
            "t = {t}: {n} robot pixels of {total}"
        );
        // The hand (grip frame origin, by FK) projects onto robot pixels.
        let q = replay.frame(&s.robot, t).q;
        forward_kinematics(&s.robot, &q, &mut poses).unwrap();
        let p = (poses[hand.link] * hand.grip).translation.vector;
        let px = r.camera().project(
            Vec3::new(p.x as f32, p.y as f32, p.z as f32),
            Vec2::new(W as f32, H as f32),
        );
        // kiss3d's projection has y up from the bottom edge; images have y down.
        let (x, y) = (px.x, H as f32 - px.y);
        assert!(
            x > 0.0 && x < W as f32 && y > 0.0 && y < H as f32,
            "t = {t}: hand projects outside the picture at ({x}, {y})"
        );
        let hits = near(&m, x, y, 12.0);
        assert!(
            hits >= 20,
            "t = {t}: only {hits} robot pixels within 12 px of the projected hand ({x:.0}, {y:.0})"
        );
        // And a place far from the robot (the top-left corner) is not robot.
        assert_eq!(
            near(&m, 8.0, 8.0, 6.0),
            0,
            "t = {t}: robot pixels in the corner"
        );
        masks.push(m);
        pictures.push(with);
    }
    // The robot moved: the two pictures and the two masks differ.
    let moved = masks[0]
        .iter()
        .zip(&masks[1])
        .filter(|(a, b)| a != b)
        .count();
    assert!(
        moved > (W * H) as usize / 500,
        "masks at start and end differ in only {moved} pixels"
    );
    let differ = count(&mask(&pictures[0], &pictures[1]));
    assert!(
        differ > (W * H) as usize / 500,
        "pictures differ in {differ} pixels"
    );
}

#[test]
fn the_render_command_writes_a_png_and_a_strip() {
    let (s, json) = common::demo_route();
    let dir = tempfile::tempdir().unwrap();
    let route = dir.path().join("demo.route.json");
    std::fs::write(&route, json).unwrap();
    let _ = s;
    let exe = env!("CARGO_BIN_EXE_clamber-view");
    let one = dir.path().join("one.png");
    let st = std::process::Command::new(exe)
        .args(["render"])
        .arg(common::demo_path())
        .arg(&route)
        .args(["--time", "1.0", "--width", "320", "--height", "240", "-o"])
        .arg(&one)
        .status()
        .unwrap();
    assert!(st.success());
    let img = image::open(&one).unwrap().to_rgb8();
    assert_eq!((img.width(), img.height()), (320, 240));
    let strip = dir.path().join("strip.png");
    let st = std::process::Command::new(exe)
        .args(["render"])
        .arg(common::demo_path())
        .arg(&route)
        .args(["--strip", "3", "--width", "200", "--height", "160", "-o"])
        .arg(&strip)
        .status()
        .unwrap();
    assert!(st.success());
    let img = image::open(&strip).unwrap().to_rgb8();
    assert_eq!((img.width(), img.height()), (3 * 200 + 2 * 4, 160));
    // Bad input: a clear error, the documented exit code (3), and no picture.
    let bad = dir.path().join("bad.route.json");
    std::fs::write(
        &bad,
        "{\"legs\": [{\"stance\": {}, \"path\": [[1, 2]], \"times\": [0]}]}",
    )
    .unwrap();
    let none = dir.path().join("none.png");
    let out = std::process::Command::new(exe)
        .args(["render"])
        .arg(common::demo_path())
        .arg(&bad)
        .arg("-o")
        .arg(&none)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(3));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("bad.route.json") && err.contains("legs[0].path[0]"),
        "{err}"
    );
    assert!(!none.exists());
}
