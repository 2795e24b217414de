mod route_scene;
use clamber::route::{plan_route, RouteSettings};
use clamber::scenario::Goal;

#[test]
fn smoke() {
    let sc = route_scene::scenario(
        &[0.0, 0.5, 1.0, 1.5],
        Goal::Grip {
            effector: "right_gripper".into(),
            hold: 3,
        },
        1,
    );
    let t = std::time::Instant::now();
    let r = plan_route(&sc, &RouteSettings::default());
    match r {
        Ok(r) => {
            println!(
                "ok in {:?}: {} switches, stats {:?}",
                t.elapsed(),
                r.switches.len(),
                r.stats
            );
            for l in &r.legs {
                println!(
                    "leg {:?} {} pts resid {:.2e} clear {:.3} dur {:.2}",
                    l.stance,
                    l.path.len(),
                    l.max_residual,
                    l.min_clearance,
                    l.duration
                );
            }
            for s in &r.switches {
                println!(
                    "{} {} {} pos {:?} margin {:.3}",
                    s.action, s.effector, s.hold, s.grip_position, s.reach_margin
                );
            }
        }
        Err(e) => println!("err in {:?}: {e}", t.elapsed()),
    }
}
