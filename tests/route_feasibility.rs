//! Switch feasibility on the scene built for it: the verdicts match the scene's documented
//! expectations (distances from geometry, the reach bound by hand), every feasible move has a
//! switch pose that holds both grips (checked here from forward kinematics), and a route
//! planned in the same scene only uses moves the check found feasible.

mod route_scene;

use clamber::demo::climb::{feasibility_expectations, feasibility_scene, Verdict as Expect};
use clamber::route::feasibility::{check_feasibility, Verdict};
use clamber::route::{plan_route, RouteError, RouteSettings, SwitchFailure};
use clamber::scenario::Goal;
use clamber::scene::Stance;

#[test]
fn verdicts_match_the_scene_and_agree_with_routes() {
    let sc = feasibility_scene().unwrap();
    let settings = RouteSettings::default();
    let report = check_feasibility(&sc, &settings).unwrap();
    println!("{report}");
    let tol = sc.limits.tolerance;
    let bound = route_scene::brachia_bound_by_hand();
    for exp in feasibility_expectations(&sc).unwrap() {
        let entries: Vec<_> = report
            .entries
            .iter()
            .filter(|e| e.anchor_hold == exp.held && e.to_hold == exp.target)
            .collect();
        assert!(!entries.is_empty(), "{} -> {} listed", exp.held, exp.target);
        match &exp.verdict {
            Expect::Feasible => {
                assert!(
                    entries.iter().any(|e| e.verdict == Verdict::Feasible),
                    "{} -> {}: feasible expected",
                    exp.held,
                    exp.target
                );
            }
            Expect::OutOfReach { excess } => {
                for e in &entries {
                    assert_eq!(e.verdict, Verdict::OutOfReach);
                    let Some(SwitchFailure::OutOfReach { by, distance, .. }) = &e.reason else {
                        panic!("reason expected");
                    };
                    if e.to_hold == exp.target
                        && e.reason
                            .as_ref()
                            .is_some_and(|r| r.to_string().contains(&exp.target))
                    {
                        assert!((by - excess).abs() < 1e-9, "{by} vs {excess}");
                        assert!(
                            (distance - bound - by).abs() < 1e-9,
                            "excess = distance - hand-summed bound"
                        );
                    }
                }
            }
            Expect::InsideObstacle { .. } => {
                assert!(entries.iter().all(|e| e.verdict != Verdict::Feasible));
            }
            _ => {}
        }
    }
    // Feasible moves: the switch pose holds the anchor grip and the new grip.
    let mut feasible = 0;
    for e in report
        .entries
        .iter()
        .filter(|e| e.verdict == Verdict::Feasible)
    {
        let [h, _, b] = e.holds;
        let q = e.pose.as_ref().unwrap();
        let stance = Stance::new()
            .with(e.anchor_effector.clone(), h)
            .with(e.effector.clone(), b);
        for (eff, &hold) in &stance.grips {
            let (d, a) = route_scene::grip_errors(&sc.robot, &sc.scene, q, eff, hold);
            assert!(
                d <= tol && a <= tol,
                "{eff} on {hold}: {d:.3e} m, {a:.3e} rad"
            );
        }
        feasible += 1;
    }
    assert!(feasible > 0);

    // The scene's own goal (the far rail) has no route.
    assert!(matches!(
        plan_route(&sc, &settings),
        Err(RouteError::NoRoute(_))
    ));
    // A route to dock_c uses only moves the check found feasible.
    let mut sc2 = sc.clone();
    let (c, _) = sc2.scene.hold("dock_c").unwrap();
    sc2.goal = Goal::Grip {
        effector: "right_gripper".into(),
        hold: c,
    };
    let r = plan_route(&sc2, &settings).expect("route to dock_c");
    let mut last_hold = sc2.start.stance.grips.clone();
    for s in &r.switches {
        if s.action == "release" {
            continue;
        }
        let from = last_hold
            .get(&s.effector)
            .copied()
            .expect("the effector held a hold before");
        let (b, _) = sc2.scene.hold(&s.hold).unwrap();
        let (other, &anchor) = s.from_index.grips.iter().next().expect("one grip kept");
        assert_ne!(other, &s.effector);
        let entry = report
            .find(&s.effector, anchor, from, b)
            .expect("move listed");
        assert_eq!(entry.verdict, Verdict::Feasible, "route uses {entry:?}");
        last_hold.insert(s.effector.clone(), b);
    }
}
