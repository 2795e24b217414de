//! The gap scene has no route: the explanation names the blocking switch (grabbing the rung
//! beyond the gap) and how far out of reach it is, which must equal the gap width measured
//! from the scene's bars minus the reach bound summed by hand from the robot file.
//! Also: typed errors for goals and settings the route planner does not take.

mod route_scene;

use clamber::demo::climb::{gap, GAP_FAR, GAP_NEAR};
use clamber::route::{plan_route, RouteError, RouteSettings, SwitchFailure};
use clamber::scenario::Goal;
use clamber::scene::HoldKind;

/// Brachia already holds the last rung before a gap 0.2 m wider than its reach bound: the
/// explanation must name the grab across the gap and the excess, from the scene's geometry.
#[test]
fn own_gap_explanation_names_the_blocking_switch_and_the_excess() {
    let bound = route_scene::brachia_bound_by_hand();
    let xs = [0.0, 0.5, 0.5 + bound + 0.2];
    let sc = route_scene::scenario(
        &xs,
        Goal::Grip {
            effector: "left_gripper".into(),
            hold: 2,
        },
        1,
    );
    let err = plan_route(&sc, &RouteSettings::default()).expect_err("no route across the gap");
    let RouteError::NoRoute(ex) = err else {
        panic!("expected NoRoute, got {err}");
    };
    println!("{ex}");
    assert!(ex.exhausted && !ex.timed_out);
    // Width from the bars' coordinates (all parallel to y).
    let width = xs[2] - xs[1];
    let expected = width - bound;
    let b = ex
        .blocking
        .iter()
        .find(|b| {
            b.hold == "rung2"
                && b.effector == "left_gripper"
                && b.from.values().any(|h| h == "rung1")
        })
        .expect("the grab across the gap is named");
    let by = b
        .reasons
        .iter()
        .find_map(|r| match r {
            SwitchFailure::OutOfReach { by, anchor, .. } if anchor == "rung1" => Some(*by),
            _ => None,
        })
        .expect("an out-of-reach reason");
    assert!(
        (by - expected).abs() < 1e-9,
        "out of reach by {by}, geometry says {expected}"
    );
    assert!((by - 0.2).abs() < 1e-9);
    assert!(ex.to_string().contains("out of reach by 0.200 m"));
}

/// The climbing demo's gap scene: the search climbs to the ledge by the gap and stops there.
#[test]
fn gap_explanation_names_the_blocking_switch_and_the_excess() {
    let sc = gap().unwrap();
    let err = plan_route(&sc, &RouteSettings::default()).expect_err("no route across the gap");
    let RouteError::NoRoute(ex) = err else {
        panic!("expected NoRoute, got {err}");
    };
    // Gap width from the scene's geometry: both bars run along y at fixed x.
    let x = |name: &str| match &sc.scene.hold(name).unwrap().1.kind {
        HoldKind::Bar { start, end, .. } => {
            assert!(
                (start.x - end.x).abs() < 1e-15,
                "the rungs are parallel to y"
            );
            start.x
        }
        _ => panic!("bar expected"),
    };
    let width = x(GAP_FAR) - x(GAP_NEAR);
    let expected = width - route_scene::brachia_bound_by_hand();
    assert!(expected > 0.0);
    let text = ex.to_string();
    println!("{text}");
    assert!(ex.exhausted && !ex.timed_out);
    assert!(
        ex.furthest.values().any(|h| h == GAP_NEAR),
        "furthest stance holds the near ledge"
    );
    let blocking = ex
        .blocking
        .iter()
        .find(|b| b.hold == GAP_FAR && b.from.values().any(|h| h == GAP_NEAR))
        .expect("grabbing the far ledge from the near one is named");
    let by = blocking
        .reasons
        .iter()
        .find_map(|r| match r {
            SwitchFailure::OutOfReach { by, anchor, .. } if anchor == GAP_NEAR => Some(*by),
            _ => None,
        })
        .expect("an out-of-reach reason");
    assert!(
        (by - expected).abs() < 1e-9,
        "out of reach by {by}, geometry says {expected}"
    );
    assert!(text.contains(GAP_FAR) && text.contains("out of reach by"));
    let json = serde_json::to_string(&*ex).unwrap();
    assert!(json.contains("\"kind\":\"out_of_reach\""));
}

#[test]
fn configuration_goals_and_bad_settings_are_typed_errors() {
    let mut sc = gap().unwrap();
    sc.goal = Goal::Configuration(sc.start.q.clone());
    assert!(matches!(
        plan_route(&sc, &RouteSettings::default()),
        Err(RouteError::UnsupportedGoal {
            kind: "configuration",
            ..
        })
    ));
    let sc = gap().unwrap();
    for bad in [
        RouteSettings {
            failure_factor: 1.0,
            ..Default::default()
        },
        RouteSettings {
            switch_seeds: 0,
            ..Default::default()
        },
        RouteSettings {
            path_tolerance: f64::NAN,
            ..Default::default()
        },
        RouteSettings {
            min_clearance: -1.0,
            ..Default::default()
        },
        RouteSettings {
            timing_grid: 1,
            ..Default::default()
        },
    ] {
        assert!(
            matches!(plan_route(&sc, &bad), Err(RouteError::Settings(_))),
            "{bad:?}"
        );
    }
    let mut sc = gap().unwrap();
    sc.goal = Goal::Grip {
        effector: "tail".into(),
        hold: 0,
    };
    assert!(matches!(
        plan_route(&sc, &RouteSettings::default()),
        Err(RouteError::BadGoal(_))
    ));
    let mut sc = gap().unwrap();
    sc.start.q[0] += 0.3;
    assert!(matches!(
        plan_route(&sc, &RouteSettings::default()),
        Err(RouteError::BadStart(_))
    ));
}
