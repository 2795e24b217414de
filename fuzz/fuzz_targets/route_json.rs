//! Property: reading any route JSON back for the shipped scenario
//! `scenarios/sevenfold_rail.scenario.toml` and re-checking what it says (as `clamber verify`
//! does) returns a report or a typed error, never panics or hangs.
#![no_main]

use std::path::Path;
use std::sync::OnceLock;

use clamber::route::collision_model;
use clamber::route_file::parse_route;
use clamber::scenario::Scenario;
use clamber::verify::{verify_path, VerifySettings};
use libfuzzer_sys::fuzz_target;

fn scenario() -> &'static (Scenario, Option<clamber::collision::CollisionModel>) {
    static S: OnceLock<(Scenario, Option<clamber::collision::CollisionModel>)> = OnceLock::new();
    S.get_or_init(|| {
        let path = Path::new(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../scenarios/sevenfold_rail.scenario.toml"
        ));
        let s = clamber::scenario_file::load_scenario(path)
            .expect("the shipped scenario loads")
            .scenario;
        let c = collision_model(&s).expect("the shipped scenario's collision model builds");
        (s, c)
    })
}

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let (s, collision) = scenario();
    let Ok(doc) = parse_route(text, s) else {
        return;
    };
    let stride = s.limits.stride;
    for piece in &doc.pieces {
        let Ok(stack) = piece.stance.constraints(&s.robot, &s.scene, &s.constant) else {
            continue;
        };
        let Ok(settings) = VerifySettings::new(stride / 10.0, piece.tolerance, stride) else {
            continue;
        };
        let _ = verify_path(&s.robot, &stack, collision.as_ref(), &piece.path, &settings);
    }
    for w in &doc.switches {
        for st in [&w.from, &w.to] {
            let Ok(stack) = st.constraints(&s.robot, &s.scene, &s.constant) else {
                continue;
            };
            let Ok(settings) = VerifySettings::new(stride / 10.0, s.limits.tolerance, stride)
            else {
                continue;
            };
            let pose = std::slice::from_ref(&w.pose);
            let _ = verify_path(&s.robot, &stack, collision.as_ref(), pose, &settings);
        }
    }
});
