//! Goals of the kind "body within a region": the climber's torso inside a box. Checked against
//! the box itself with forward kinematics computed here (not the planner's own check), on a
//! region a corridor route ends in and on one far outside the module (no route, explained).

use clamber::demo::climb::corridor;
use clamber::kinematics::forward_kinematics;
use clamber::math::Pose;
use clamber::route::{plan_route, RouteError, RouteSettings};
use clamber::scenario::Goal;
use nalgebra::Point3;

fn torso_at(sc: &clamber::scenario::Scenario, q: &[f64]) -> Point3<f64> {
    let robot = &sc.robot;
    let mut poses = vec![Pose::identity(); robot.links().len()];
    forward_kinematics(robot, q, &mut poses).unwrap();
    Point3::from(poses[robot.link_id("torso").unwrap()].translation.vector)
}

#[test]
fn the_torso_ends_inside_a_region_along_the_corridor() {
    // Where the torso is at the end of an ordinary corridor route: the region is a box of
    // +-0.15 m around that point, shifted back along the corridor by 0.2 m.
    let base = corridor(6).unwrap();
    let route = plan_route(&base, &RouteSettings::default()).unwrap();
    let end = route.legs.last().unwrap().path.last().unwrap().clone();
    let p = torso_at(&base, &end) - nalgebra::Vector3::new(0.2, 0.0, 0.0);
    let half = nalgebra::Vector3::repeat(0.15);
    let (min, max) = (p - half, p + half);
    let start_torso = torso_at(&base, &base.start.q);
    assert!(
        (0..3).any(|k| start_torso[k] < min[k] || start_torso[k] > max[k]),
        "the start is outside the region"
    );
    for seed in 1..=3 {
        let mut sc = corridor(6).unwrap();
        sc.limits.seed = seed;
        sc.goal = Goal::BodyInRegion {
            link: "torso".into(),
            min,
            max,
        };
        let r = plan_route(&sc, &RouteSettings::default())
            .unwrap_or_else(|e| panic!("seed {seed}: {e}"));
        let last = r.legs.last().unwrap().path.last().unwrap();
        let t = torso_at(&sc, last);
        assert!(
            (0..3).all(|k| t[k] >= min[k] && t[k] <= max[k]),
            "seed {seed}: torso ends at {t:?}, region {min:?} .. {max:?}"
        );
        assert!(
            !r.switches.is_empty(),
            "the region needs switches to get to"
        );
        // The last leg stays on its stance at the route's tolerances (the verifier's figure).
        assert!(r.legs.last().unwrap().max_residual <= r.path_tolerance);
    }
}

#[test]
fn a_region_outside_the_module_has_no_route_and_is_explained() {
    let mut sc = corridor(4).unwrap();
    sc.goal = Goal::BodyInRegion {
        link: "torso".into(),
        min: Point3::new(20.0, 20.0, 20.0),
        max: Point3::new(21.0, 21.0, 21.0),
    };
    let err = plan_route(&sc, &RouteSettings::default()).expect_err("no route");
    let RouteError::NoRoute(ex) = err else {
        panic!("expected NoRoute, got {err}");
    };
    let text = ex.to_string();
    println!("{text}");
    assert!(ex.exhausted);
    assert!(text.contains("link torso inside [20.000, 20.000, 20.000]"));
    // The furthest stance's holds are at least the region's distance from the module.
    assert!(ex.furthest_distance_to_goal > 15.0);
}

#[test]
fn bad_regions_are_typed_errors() {
    for (link, min, max) in [
        ("no_such_link", Point3::origin(), Point3::new(1.0, 1.0, 1.0)),
        (
            "torso",
            Point3::new(1.0, 0.0, 0.0),
            Point3::new(0.0, 1.0, 1.0),
        ),
        (
            "torso",
            Point3::new(f64::NAN, 0.0, 0.0),
            Point3::new(1.0, 1.0, 1.0),
        ),
    ] {
        let mut sc = corridor(4).unwrap();
        sc.goal = Goal::BodyInRegion {
            link: link.into(),
            min,
            max,
        };
        assert!(
            matches!(
                plan_route(&sc, &RouteSettings::default()),
                Err(RouteError::BadGoal(_))
            ),
            "{link} {min:?} {max:?}"
        );
    }
}
