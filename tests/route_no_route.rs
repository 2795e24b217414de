//! The gap scene has no route: the explanation names the blocking switch (grabbing the rung
//! beyond the gap) and how far out of reach it is, which must equal the gap width measured
//! from the scene's bars minus the reach bound summed by hand from the robot file.
//! Also: typed errors for goals and settings the route planner does not take.

mod route_scene;

use clamber::demo::climb::{gap, GAP_FAR, GAP_NEAR};
use clamber::route::{plan_route, RouteError, RouteSettings, SwitchFailure};
use clamber::scenario::Goal;
use clamber::scene::HoldKind;

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
