//! Choosing the grip position along a bar: the choice is a valid grip and its reach margin
//! is as good as a brute-force scan finds.

mod common;

use std::sync::Arc;

use clamber::constraint::{BarGrip, ConstraintStack, FrameMatch, FrameRef, MatchMode};
use clamber::grip_position::choose_grip_position;
use clamber::math::Pose;
use clamber::projection::{project, ProjectionBuffer, ProjectionSettings};
use nalgebra::{Point3, Translation3, Vector3};

#[test]
fn chosen_grip_position_is_a_valid_grip_with_near_best_margin() {
    let robot = common::arm7();
    let bar = BarGrip::new(
        &robot,
        "hand",
        Point3::new(0.45, -0.5, 0.55),
        Point3::new(0.45, 0.5, 0.55),
        Vector3::new(1.0, 0.0, 0.0),
        false,
    )
    .unwrap();
    let others = ConstraintStack::new();
    let settings = ProjectionSettings::default();
    let seed = vec![0.0, 0.6, 0.0, 1.2, 0.0, 0.8, 0.0];
    let choice = choose_grip_position(&robot, &others, &bar, &seed, &settings, 9)
        .unwrap()
        .expect("bar reachable");
    assert!((0.0..=bar.length).contains(&choice.position));

    // The configuration holds the bar, at the reported position, within the limits.
    let stack = ConstraintStack::new().with(bar.clone());
    let mut buf = stack.buffer(&robot);
    let r = stack.evaluate(&robot, &choice.q, &mut buf, false).unwrap();
    assert!(r <= settings.tolerance, "residual {r}");
    assert!((bar.grip_position(&buf.poses) - choice.position).abs() < 1e-6);
    assert!(robot.within_limits(&choice.q, 0.0));
    assert!((robot.reach_margin(&choice.q) - choice.margin).abs() < 1e-12);

    // Brute force: project a point grip at 41 positions from the same seed.
    let mut best = f64::NEG_INFINITY;
    for i in 0..=40 {
        let s = bar.length * i as f64 / 40.0;
        let p = bar.start + bar.axis.into_inner() * s;
        let hold = Pose::from_parts(Translation3::from(p.coords), bar.orientation);
        let grip = FrameMatch::new(
            FrameRef::effector(&robot, "hand").unwrap(),
            FrameRef::world(hold),
            MatchMode::Full,
            "scan",
        );
        let mut st = ConstraintStack::new();
        st.push(Arc::new(grip));
        let mut pb = ProjectionBuffer::new(&robot, &st);
        let mut q = seed.clone();
        if project(&robot, &st, &settings, &mut q, &mut pb)
            .unwrap()
            .converged()
        {
            best = best.max(robot.reach_margin(&q));
        }
    }
    println!(
        "chosen s = {:.4} m, margin {:.4}; scan best {:.4}; {} projections",
        choice.position, choice.margin, best, choice.projections
    );
    assert!(
        choice.margin >= best - 0.02,
        "chosen {} vs scan best {best}",
        choice.margin
    );
}
