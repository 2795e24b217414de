//! Shared by the viewer's integration tests: the bundled rail demo, planned with the library.

#![allow(dead_code)]

use std::path::PathBuf;

use clamber::route::{plan_route, RouteSettings};
use clamber::scenario::Scenario;
use clamber::scenario_file::load_scenario;
use clamber_view::Replay;

pub fn demo_path() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../scenarios/sevenfold_rail.scenario.toml")
}

/// The demo scenario and its route as JSON (planned here, the same way `clamber plan` does).
pub fn demo_route() -> (Scenario, String) {
    let f = load_scenario(&demo_path()).expect("the bundled demo scenario loads");
    let route = plan_route(&f.scenario, &RouteSettings::default()).expect("the demo has a route");
    assert!(
        route.switches.len() >= 2,
        "the demo route releases the rail and grabs the peg"
    );
    let json = route.to_json().expect("route JSON");
    (f.scenario, json)
}

pub fn demo_replay() -> (Scenario, Replay) {
    let (s, json) = demo_route();
    let replay = Replay::from_json(&json, std::path::Path::new("demo.route.json"), s.robot.nq())
        .expect("the route JSON reads back");
    (s, replay)
}
