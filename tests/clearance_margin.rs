//! The planner's clearance margin and checked walks, against analytic geometry.
//!
//! A ball robot (three prismatic joints carrying a sphere of radius `R`) moves along straight
//! segments. Its joint distance is its travel in metres, so a point checked with clearance
//! `c` keeps every point within `c` of it free: with a margin of at least half the coarse
//! spacing, a stretch between two points clear by the margin is free for certain. Whether a
//! straight segment hits a sphere obstacle is closed-form (distance from the obstacle's
//! centre to the segment against the sum of the radii), so every answer is checked against
//! that exact value.

mod common;

use clamber::collision::{CollisionModel, CollisionScratch, Obstacle};
use clamber::constraint::{ConstraintStack, FrameRef};
use clamber::cspace::{ClearanceMargin, ConfigSpace, FreeSpace};
use clamber::math::{pose_from_xyz_rpy, Pose};
use clamber::model::{Geometry, Robot, Shape};
use clamber::projection::{ProjectionBuffer, ProjectionSettings};
use clamber::walk::{walk, walk_checked, WalkSettings, WalkStop};
use common::{point_robot, point_robot_with, Sphere};
use nalgebra::{Point3, Vector3};
use proptest::prelude::*;

/// Radius of the robot's ball.
const R: f64 = 0.05;

fn ball_robot() -> Robot {
    point_robot_with(
        3.0,
        vec![Shape {
            origin: pose_from_xyz_rpy([0.0; 3], [0.0; 3]),
            geometry: Geometry::Sphere { radius: R },
            source: None,
        }],
    )
}

fn obstacle(at: [f64; 3], geometry: Geometry) -> Obstacle {
    Obstacle {
        name: "thing".into(),
        shape: Shape {
            origin: pose_from_xyz_rpy(at, [0.0; 3]),
            geometry,
            source: None,
        },
    }
}

/// Distance from `c` to the segment a-b (closed form).
fn point_segment_distance(a: &[f64], b: &[f64], c: &[f64]) -> f64 {
    let (a, b, c) = (
        Point3::new(a[0], a[1], a[2]),
        Point3::new(b[0], b[1], b[2]),
        Point3::new(c[0], c[1], c[2]),
    );
    let ab = b - a;
    let t = if ab.norm_squared() > 0.0 {
        ((c - a).dot(&ab) / ab.norm_squared()).clamp(0.0, 1.0)
    } else {
        0.0
    };
    (a + ab * t - c).norm()
}

/// Whether the motion a -> b is accepted by a free space (`extend` without a step limit).
fn accepted(space: &mut FreeSpace<'_>, a: &[f64], b: &[f64]) -> bool {
    let e = space.extend(a, b, f64::INFINITY).unwrap();
    assert_eq!(e.reached, !e.path.is_empty());
    e.reached
}

#[test]
fn a_thin_wall_between_coarse_points_is_found_only_with_the_margin() {
    let robot = ball_robot();
    // A 2 mm wall at x = 0; the ball moves from x = -0.06 to x = 0.06 through it.
    let t = 0.002;
    let wall = obstacle(
        [0.0, 0.0, 0.0],
        Geometry::Cuboid {
            size: Vector3::new(t, 1.0, 1.0),
        },
    );
    let model = CollisionModel::new(&robot, &[wall]).unwrap();
    let (a, b) = (vec![-0.06, 0.0, 0.0], vec![0.06, 0.0, 0.0]);
    // Preconditions, closed form: both ends clear of the wall by 0.06 - R - t/2 = 9 mm (less
    // than the 1 cm margin), the middle inside it.
    let end_clearance: f64 = 0.06 - R - t / 2.0;
    assert!((end_clearance - 0.009).abs() < 1e-12);
    let spacing = 0.12; // one coarse check: at b

    let mut coarse = FreeSpace::new(&robot, Some(&model), spacing).unwrap();
    assert!(
        accepted(&mut coarse, &a, &b),
        "without a margin the coarse check sees only the ends and misses the wall"
    );
    let margin = ClearanceMargin::new(0.01, 0.005, 0.0).unwrap();
    let mut guarded = FreeSpace::new(&robot, Some(&model), spacing)
        .unwrap()
        .with_clearance_margin(margin);
    assert!(
        !accepted(&mut guarded, &a, &b),
        "ends within the margin: the stretch is checked finely and the wall found"
    );
    // The same motion 2 cm beside a wall that ends at y = 0.02 + R + 1.1 cm: ends and middle
    // clear by more than the margin, so the stretch is taken on the coarse check alone.
    let short_wall = obstacle(
        [0.0, -0.5 - 0.02 - R - 0.011 + 0.02, 0.0],
        Geometry::Cuboid {
            size: Vector3::new(t, 1.0, 1.0),
        },
    );
    let model2 = CollisionModel::new(&robot, &[short_wall]).unwrap();
    let mut guarded2 = FreeSpace::new(&robot, Some(&model2), spacing)
        .unwrap()
        .with_clearance_margin(margin);
    let (a2, b2) = (vec![-0.06, 0.02, 0.0], vec![0.06, 0.02, 0.0]);
    let before = guarded2.stats().collision_checks;
    assert!(accepted(&mut guarded2, &a2, &b2));
    // One margin check at a and one at b; no fine checks (the fine spacing would add 23).
    assert_eq!(guarded2.stats().collision_checks - before, 2);
}

#[test]
fn margin_settings_are_checked() {
    assert!(ClearanceMargin::new(0.0, 0.005, 0.0).is_err());
    assert!(ClearanceMargin::new(0.01, -1.0, 0.0).is_err());
    assert!(ClearanceMargin::new(f64::NAN, 0.005, 0.0).is_err());
    let s = clamber::motion::MotionSettings {
        plan_margin: Some(-0.01),
        ..Default::default()
    };
    assert!(s.validate().is_err());
    let s = clamber::motion::MotionSettings {
        plan_clearance: 0.02, // not below the default 0.01 margin
        ..Default::default()
    };
    assert!(s.validate().is_err());
    assert!(clamber::motion::MotionSettings::default()
        .validate()
        .is_ok());
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(1000))]

    /// With the margin at half the coarse spacing (the ball moves exactly its joint distance),
    /// the margin check never refuses a free segment and refuses every segment that goes
    /// deeper into the obstacle than a fine check can miss.
    #[test]
    fn margin_checks_agree_with_the_closed_form(
        a in prop::array::uniform3(-1.0f64..1.0),
        b in prop::array::uniform3(-1.0f64..1.0),
        along in 0.0f64..1.0,
        offset in prop::array::uniform3(-0.3f64..0.3),
        radius in 0.01f64..0.4,
        spacing in 0.05f64..0.5,
    ) {
        // The obstacle's centre near the segment, so grazes and near misses are common.
        let c: Vec<f64> = (0..3).map(|k| a[k] + along * (b[k] - a[k]) + offset[k]).collect();
        let robot = ball_robot();
        let model =
            CollisionModel::new(&robot, &[obstacle([c[0], c[1], c[2]], Geometry::Sphere { radius })])
                .unwrap();
        let (a, b) = (a.to_vec(), b.to_vec());
        let touch = R + radius;
        // Both ends must be free (the planner only extends from valid configurations).
        let end = |q: &[f64]| (0..3).map(|k| (q[k] - c[k]).powi(2)).sum::<f64>().sqrt();
        prop_assume!(end(&a) > touch + 1e-6 && end(&b) > touch + 1e-6);
        let fine = 0.005;
        let mut space = FreeSpace::new(&robot, Some(&model), spacing)
            .unwrap()
            .with_clearance_margin(ClearanceMargin::new(spacing / 2.0, fine, 0.0).unwrap());
        let d = point_segment_distance(&a, &b, &c);
        let ok = accepted(&mut space, &a, &b);
        if d > touch + 1e-9 {
            prop_assert!(ok, "free segment (clearance {:.4}) refused", d - touch);
        }
        // Points checked every `fine` metres or closer miss only a chord shorter than `fine`
        // inside the inflated sphere (radius `touch`), so a miss is less than
        // fine^2 / (4 touch) deep: (touch - d)(touch + d) = (chord / 2)^2 < fine^2 / 4.
        // Stretches between points clear by the margin (half the spacing) are free for
        // certain. Deeper than that (plus 1e-6 for the distance solver), it must be refused.
        if touch - d > fine * fine / (4.0 * touch) + 1e-6 {
            prop_assert!(!ok, "segment {:.4} deep into the obstacle accepted", touch - d);
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(500))]

    /// `within_margins` answers as two `in_collision_with_margin` calls do, and both agree
    /// with the closed-form distance between the ball and a sphere obstacle.
    #[test]
    fn two_margins_at_once_match_two_queries_and_the_closed_form(
        q in prop::array::uniform3(-0.5f64..0.5),
        radius in 0.01f64..0.3,
        inner in 0.0f64..0.05,
        extra in 0.0f64..0.1,
    ) {
        let robot = ball_robot();
        let model =
            CollisionModel::new(&robot, &[obstacle([0.0; 3], Geometry::Sphere { radius })]).unwrap();
        let outer = inner + extra;
        let mut poses = vec![Pose::identity(); robot.links().len()];
        clamber::kinematics::forward_kinematics(&robot, &q, &mut poses).unwrap();
        let mut scratch = CollisionScratch::new();
        let both = model.within_margins(&poses, inner, outer, &mut scratch).unwrap();
        let one = model.in_collision_with_margin(&poses, inner, &mut scratch).unwrap();
        let two = model.in_collision_with_margin(&poses, outer, &mut scratch).unwrap();
        prop_assert_eq!(both, (one, two));
        let gap = (q[0] * q[0] + q[1] * q[1] + q[2] * q[2]).sqrt() - R - radius;
        for (hit, m) in [(one, inner), (two, outer)] {
            if (gap - m).abs() > 1e-9 {
                prop_assert_eq!(hit, gap <= m, "gap {} margin {}", gap, m);
            }
        }
    }
}

#[test]
fn checked_walk_stops_at_the_first_refused_point() {
    let robot = point_robot(2.0);
    let stack = ConstraintStack::new().with(Sphere {
        point: FrameRef::on_link(&robot, "point", Pose::identity()).unwrap(),
    });
    let settings = WalkSettings::new(
        0.05,
        1.0,
        10_000,
        ProjectionSettings::new(1e-9, 50, 0.5).unwrap(),
    )
    .unwrap();
    let mut buf = ProjectionBuffer::new(&robot, &stack);
    // A quarter of a great circle on the unit sphere: about pi/2 / 0.05 = 32 steps.
    let (qa, qb) = ([1.0, 0.0, 0.0], [0.0, 1.0, 0.0]);
    let full = walk(&robot, &stack, &qa, &qb, &settings, &mut buf).unwrap();
    assert!(full.reached());
    assert!(full.path.len() > 30, "{} points", full.path.len());
    // Refuse every point with y > 0.5 (the plane y = 0.5 stands for an obstacle).
    let mut asked = 0;
    let w = walk_checked(
        &robot,
        &stack,
        &qa,
        &qb,
        &settings,
        &mut buf,
        |prev, next| {
            asked += 1;
            // Each question is about the step from the walk's last point.
            assert!(robot.distance(prev, next).unwrap() <= 0.05 + 1e-12);
            Ok::<_, clamber::constraint::ConstraintError>(next[1] <= 0.5)
        },
    )
    .unwrap();
    assert_eq!(w.stop, WalkStop::Refused);
    assert!(w.path.iter().all(|q| q[1] <= 0.5));
    // The same points as the unchecked walk up to there, and no projection after the refusal.
    let kept = w.path.len();
    assert_eq!(&full.path[..kept], &w.path[..]);
    assert!(
        full.path[kept][1] > 0.5,
        "the refused point is the walk's next one"
    );
    assert_eq!(asked, kept);
    assert!(
        w.projections <= kept,
        "{} projections for {kept} points",
        w.projections
    );
    assert!(w.projections < full.projections / 2);
}

#[test]
fn interior_points_keep_the_interior_clearance_and_ends_only_must_not_touch() {
    let robot = ball_robot();
    // A sphere of radius 0.05 at the origin; the ball (radius R = 0.05) passes it at a
    // centre distance of 0.1005 m: 0.5 mm of clearance at the closest point, x = 0.
    let rho = 0.05;
    let model = CollisionModel::new(
        &robot,
        &[obstacle([0.0; 3], Geometry::Sphere { radius: rho })],
    )
    .unwrap();
    let y0 = R + rho + 0.0005;
    let (a, b) = (vec![-0.06, y0, 0.0], vec![0.06, y0, 0.0]);
    let space = |interior: f64| {
        FreeSpace::new(&robot, Some(&model), 0.01)
            .unwrap()
            .with_clearance_margin(ClearanceMargin::new(0.01, 0.005, interior).unwrap())
    };
    // Closed form: the closest point of the chord is 0.5 mm clear.
    assert!((point_segment_distance(&a, &b, &[0.0; 3]) - (R + rho) - 0.0005).abs() < 1e-12);
    assert!(
        accepted(&mut space(0.0), &a, &b),
        "0.5 mm of clearance passes when only touching blocks"
    );
    assert!(
        !accepted(&mut space(0.001), &a, &b),
        "0.5 mm inside a straight segment is refused with 1 mm interior clearance"
    );
    // An end 0.5 mm from the sphere is judged exactly: reached head-on (every interior
    // point farther away) it is accepted with the 1 mm interior clearance.
    let end = vec![0.0, y0, 0.0];
    let from = vec![0.0, y0 + 0.1, 0.0];
    assert!(accepted(&mut space(0.001), &from, &end));
    assert!(accepted(&mut space(0.001), &end, &from));
    assert!(
        ClearanceMargin::new(0.01, 0.005, 0.01).is_err(),
        "interior must be below the margin"
    );
    assert!(ClearanceMargin::new(0.01, 0.005, -0.001).is_err());
}
