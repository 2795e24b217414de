//! The plotted series against cases computed by hand.
//!
//! A point robot (three prismatic joints x, y, z; a sphere of radius 0.1 on the moving
//! point) holds the unit sphere |p| = 1 while it moves straight from (1, 0, 0) to (0, 1, 0);
//! a ball of radius 0.25 sits at the origin. At fraction f along the straight segment the
//! point is p = (1 - f, f, 0), so (elementary geometry):
//! - residual |p| - 1 in absolute value: 1 - sqrt((1 - f)^2 + f^2);
//! - clearance between the two balls: |p| - 0.1 - 0.25.
//!
//! The segment is sqrt(2) long; at resolution 0.5 the verifier's points are f = 0, 1/3, 2/3,
//! 1 (ceil(2.83) = 3 steps), at times 0, 1, 2, 3 s for waypoint times 0 and 3 s.

mod common;

use clamber::collision::{CollisionModel, Obstacle};
use clamber::constraint::{ConstraintStack, FrameRef};
use clamber::math::Pose;
use clamber::model::{Geometry, Limits, Robot, Shape};
use clamber::plot_data::{along_path, joint_series};
use clamber::timing::time_polyline;
use common::Sphere;

/// The point robot of tests/common with a ball of radius 0.1 and slow joints (0.5 m/s,
/// 1 m/s^2).
fn point_robot() -> Robot {
    common::point_robot_limited(
        Limits {
            lower: -2.0,
            upper: 2.0,
            velocity: 0.5,
            acceleration: 1.0,
        },
        vec![Shape {
            origin: Pose::identity(),
            geometry: Geometry::Sphere { radius: 0.1 },
            source: None,
        }],
    )
}

fn setup() -> (Robot, ConstraintStack, CollisionModel) {
    let robot = point_robot();
    let point = FrameRef::on_link(&robot, "point", Pose::identity()).unwrap();
    let stack = ConstraintStack::new().with(Sphere { point });
    let ball = Obstacle {
        name: "ball".into(),
        shape: Shape {
            origin: Pose::identity(),
            geometry: Geometry::Sphere { radius: 0.25 },
            source: None,
        },
    };
    let model = CollisionModel::new(&robot, &[ball]).unwrap();
    (robot, stack, model)
}

#[test]
fn residual_and_clearance_along_a_chord_of_the_sphere_match_the_closed_form() {
    let (robot, stack, model) = setup();
    let path = vec![vec![1.0, 0.0, 0.0], vec![0.0, 1.0, 0.0]];
    let (residual, clearance) =
        along_path(&robot, &stack, Some(&model), &path, &[0.0, 3.0], 0.5).unwrap();
    let clearance = clearance.expect("a collision model gives a clearance series");
    assert_eq!(residual.t.len(), 4);
    for (k, (&t, (&r, &c))) in residual
        .t
        .iter()
        .zip(residual.y.iter().zip(&clearance.y))
        .enumerate()
    {
        let f = k as f64 / 3.0;
        let norm = ((1.0 - f).powi(2) + f * f).sqrt();
        assert!((t - 3.0 * f).abs() < 1e-12, "time {t} at f = {f}");
        assert!(
            (r - (1.0 - norm)).abs() < 1e-12,
            "residual {r} at f = {f}, expected {}",
            1.0 - norm
        );
        assert!(
            (c - (norm - 0.35)).abs() < 1e-9,
            "clearance {c} at f = {f}, expected {}",
            norm - 0.35
        );
    }
    // Largest residual in the middle: 1 - sqrt(5)/3 at f = 1/3 and 2/3.
    assert!((residual.max() - (1.0 - 5f64.sqrt() / 3.0)).abs() < 1e-12);
}

#[test]
fn along_path_uses_the_verifiers_points_and_rejects_mismatched_times() {
    let (robot, stack, _) = setup();
    // Three waypoints, two segments of length sqrt(2)/2 at resolution 0.3: 3 steps each;
    // the first segment stops short of its end, the last includes it: 3 + 4 points.
    let s = 0.5f64.sqrt();
    let path = vec![vec![1.0, 0.0, 0.0], vec![s, s, 0.0], vec![0.0, 1.0, 0.0]];
    let (residual, clearance) =
        along_path(&robot, &stack, None, &path, &[0.0, 1.0, 2.0], 0.3).unwrap();
    assert!(clearance.is_none());
    assert_eq!(residual.t.len(), 7);
    let report = clamber::verify::verify_path(
        &robot,
        &stack,
        None,
        &path,
        &clamber::verify::VerifySettings::new(0.3, 1.0, 10.0).unwrap(),
    )
    .unwrap();
    assert_eq!(report.checked, residual.t.len());
    assert_eq!(report.max_residual, residual.max());
    assert!(along_path(&robot, &stack, None, &path, &[0.0, 1.0], 0.3).is_err());
    assert!(along_path(&robot, &stack, None, &path, &[0.0, 1.0, 2.0], 0.0).is_err());
}

#[test]
fn joint_series_velocities_are_the_derivative_of_the_positions() {
    let robot = point_robot();
    let path = vec![vec![0.0, 0.0, 0.0], vec![1.0, 0.5, 0.0]];
    let timed = time_polyline(&robot, &path, 8).unwrap();
    let dt = 1e-3;
    let n = (timed.duration() / dt).ceil() as usize;
    let samples: Vec<(f64, Vec<f64>, Vec<f64>)> = (0..=n)
        .map(|i| {
            let t = (i as f64 * dt).min(timed.duration());
            let (q, v) = timed.sample(&robot, t).unwrap();
            (t, q, v)
        })
        .collect();
    let js = joint_series(
        &robot,
        samples
            .iter()
            .map(|(t, q, v)| (*t, q.as_slice(), v.as_slice())),
    );
    assert_eq!(js.positions.len(), 3);
    assert_eq!(js.velocities.len(), 3);
    assert_eq!(js.positions[0].lower, Some(-2.0));
    assert_eq!(js.velocities[1].upper, Some(0.5));
    // Central differences of the positions against the plotted velocity (the profile's
    // acceleration is at most 1 m/s^2 per coordinate, so the O(dt) error of a central
    // difference at a kink of the velocity is below 1e-3 m/s).
    let mut worst: f64 = 0.0;
    for k in 1..js.t.len() - 1 {
        let (t0, t1) = (js.t[k - 1], js.t[k + 1]);
        if t1 <= t0 {
            continue;
        }
        for c in 0..3 {
            let fd = (js.positions[c].values[k + 1] - js.positions[c].values[k - 1]) / (t1 - t0);
            worst = worst.max((fd - js.velocities[c].values[k]).abs());
        }
    }
    assert!(
        worst < 1e-3,
        "velocity differs from finite differences by {worst}"
    );
    // The motion reaches its speed limit somewhere (time-optimal): the x speed peaks at the
    // limit projected on the path direction, or below it.
    let peak = js.velocities[0].values.iter().copied().fold(0.0, f64::max);
    assert!(peak <= 0.5 + 1e-9 && peak > 0.1, "peak x speed {peak}");
}
