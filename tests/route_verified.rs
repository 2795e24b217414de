//! A route on the climbing corridor, checked from outside the planner: every switch pose
//! holds both stances' grips (grip errors computed here from forward kinematics and the bar
//! geometry, not from the planner's report), every leg stays on its stance at a tenth of the
//! stride, within limits and collision-free, the pieces join, time runs forward, and the same
//! seed gives byte-identical JSON.

mod route_scene;

use clamber::collision::{CollisionModel, CollisionScratch};
use clamber::demo::climb::corridor;
use clamber::kinematics::forward_kinematics;
use clamber::math::Pose;
use clamber::route::{plan_route, Route, RouteSettings};
use clamber::scenario::Scenario;
use clamber::scene::Stance;
use route_scene::grip_errors;

fn check_stance(sc: &Scenario, stance: &Stance, q: &[f64], pos_tol: f64, ang_tol: f64, what: &str) {
    for (e, &h) in &stance.grips {
        let (d, a) = grip_errors(&sc.robot, &sc.scene, q, e, h);
        assert!(d <= pos_tol, "{what}: {e} is {d:.3e} m off hold {h}");
        assert!(a <= ang_tol, "{what}: {e} is {a:.3e} rad off hold {h}");
    }
}

fn check_route(sc: &Scenario, r: &Route) {
    let robot = &sc.robot;
    let tol = sc.limits.tolerance;
    assert_eq!(r.legs.len(), r.switches.len() + 1);
    assert!(!r.switches.is_empty());
    // Switch poses: both stances, to the scenario's tolerance.
    for (k, s) in r.switches.iter().enumerate() {
        check_stance(
            sc,
            &s.from_index,
            &s.pose,
            tol,
            tol,
            &format!("switch {k} (from)"),
        );
        check_stance(
            sc,
            &s.to_index,
            &s.pose,
            tol,
            tol,
            &format!("switch {k} (to)"),
        );
        assert!(
            robot.within_limits(&s.pose, 0.0),
            "switch {k} outside limits"
        );
        // The pieces join: leg k ends at the pose, leg k+1 starts there.
        assert_eq!(r.legs[k].path.last().unwrap(), &s.pose);
        assert_eq!(r.legs[k + 1].path.first().unwrap(), &s.pose);
        assert_eq!(r.legs[k].stance_index, s.from_index);
        assert_eq!(r.legs[k + 1].stance_index, s.to_index);
        assert!((s.time - r.legs[k].times.last().unwrap()).abs() < 1e-12);
    }
    // Goal stance reached.
    if let clamber::scenario::Goal::Stance(g) = &sc.goal {
        assert_eq!(&r.legs.last().unwrap().stance_index, g);
    }
    // Legs, densely: a tenth of the stride between checked points.
    let model = CollisionModel::new(robot, &sc.scene.obstacles).unwrap();
    let mut scratch = CollisionScratch::new();
    let mut poses = vec![Pose::identity(); robot.links().len()];
    let step = sc.limits.stride / 10.0;
    let mut q = vec![0.0; robot.nq()];
    let mut checked = 0;
    let mut worst: f64 = 0.0;
    for (k, leg) in r.legs.iter().enumerate() {
        assert!(
            leg.times.windows(2).all(|w| w[1] >= w[0]),
            "leg {k}: time runs forward"
        );
        for w in leg.path.windows(2) {
            let d = robot.distance(&w[0], &w[1]).unwrap();
            assert!(d <= sc.limits.stride + 1e-9, "leg {k}: gap {d}");
            let n = ((d / step).ceil() as usize).max(1);
            for i in 0..=n {
                robot
                    .interpolate(&w[0], &w[1], i as f64 / n as f64, &mut q)
                    .unwrap();
                for (e, &h) in &leg.stance_index.grips {
                    let (dp, da) = grip_errors(robot, &sc.scene, &q, e, h);
                    worst = worst.max(dp).max(da);
                    assert!(
                        dp <= r.path_tolerance && da <= r.path_tolerance,
                        "leg {k}: {e} off by {dp:.3e} m / {da:.3e} rad"
                    );
                }
                assert!(robot.within_limits(&q, 0.0), "leg {k}: outside limits");
                forward_kinematics(robot, &q, &mut poses).unwrap();
                assert!(
                    !model.in_collision(&poses, &mut scratch).unwrap(),
                    "leg {k}: collision"
                );
                checked += 1;
            }
        }
        // Waypoints hold the scenario's tolerance.
        for (i, q) in leg.path.iter().enumerate() {
            check_stance(
                sc,
                &leg.stance_index,
                q,
                tol,
                tol,
                &format!("leg {k} waypoint {i}"),
            );
        }
    }
    println!("checked {checked} points; worst grip error between waypoints {worst:.3e}");
}

#[test]
fn corridor_route_passes_independent_checks_and_is_deterministic() {
    let mut sc = corridor(6).unwrap();
    sc.limits.seed = 5;
    sc.limits.time_limit = std::time::Duration::from_secs(120);
    let settings = RouteSettings::default();
    let r = plan_route(&sc, &settings).expect("a route on the 6-bar corridor");
    println!(
        "{} switches, duration {:.1} s, stats {:?}",
        r.switches.len(),
        r.duration,
        r.stats
    );
    check_route(&sc, &r);
    // Same seed, same route, byte for byte.
    let again = plan_route(&sc, &settings).unwrap();
    assert_eq!(r.to_json().unwrap(), again.to_json().unwrap());
    // The JSON carries what the brief promises.
    let v: serde_json::Value = serde_json::from_str(&r.to_json().unwrap()).unwrap();
    assert_eq!(v["format_version"], 1);
    assert_eq!(v["seed"], 5);
    assert_eq!(v["clamber_version"], env!("CARGO_PKG_VERSION"));
    assert_eq!(v["tolerance"], sc.limits.tolerance);
    assert!(v["legs"][0]["max_residual"].is_number());
}

#[test]
fn own_rungs_route_with_feedback_off_also_verifies() {
    let xs: Vec<f64> = (0..5).map(|i| i as f64 * 0.5).collect();
    let sc = route_scene::scenario(
        &xs,
        clamber::scenario::Goal::Grip {
            effector: "left_gripper".into(),
            hold: 4,
        },
        3,
    );
    let settings = RouteSettings {
        feedback: false,
        ..Default::default()
    };
    let r = plan_route(&sc, &settings).expect("a route under the rungs");
    check_route(&sc, &r);
    assert_eq!(
        r.legs
            .last()
            .unwrap()
            .stance_index
            .grips
            .get("left_gripper"),
        Some(&4)
    );
}
