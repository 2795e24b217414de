//! Print a summary of each climbing demo scene: holds, distances between consecutive holds,
//! the climber's reach bounds, the lure and gap margins, and for every consecutive pair of
//! the corridor the two-grip configuration found (reach margin, clearance).
//!
//! Run: `cargo run --release --example climb_scenes`

use std::time::Instant;

use anyhow::Result;
use clamber::collision::{CollisionModel, CollisionScratch};
use clamber::demo::climb;
use clamber::kinematics::forward_kinematics;
use clamber::math::Pose;
use clamber::reach::{effector_reach, effector_span, hold_distance, hold_segment};
use clamber::scenario::{Goal, Scenario};

fn describe_goal(s: &Scenario) -> String {
    match &s.goal {
        Goal::Stance(st) => format!("stance {}", st.describe(&s.scene)),
        Goal::Grip { effector, hold } => format!(
            "{effector} on {}",
            s.scene.holds.get(*hold).map_or("?", |h| h.name.as_str())
        ),
        other => format!("{other:?}"),
    }
}

fn print_scene(s: &Scenario, built_in: f64) {
    println!(
        "== {} ({} holds, {} obstacles; built in {:.3} s)",
        s.name,
        s.scene.holds.len(),
        s.scene.obstacles.len(),
        built_in
    );
    println!("  start: {}", s.start.stance.describe(&s.scene));
    println!("  goal:  {}", describe_goal(s));
    println!(
        "  hold                 from (x, y, z)              to (x, y, z)          nearest other"
    );
    for (i, h) in s.scene.holds.iter().enumerate() {
        if let Some((a, b)) = hold_segment(h) {
            println!(
                "  {:<18} ({:6.3}, {:6.3}, {:6.3})  ({:6.3}, {:6.3}, {:6.3})  {:7.3} m",
                h.name,
                a.x,
                a.y,
                a.z,
                b.x,
                b.y,
                b.z,
                climb::nearest_other_hold(&s.scene, i)
            );
        }
    }
}

/// Reach margin and clearance at a configuration.
fn quality(s: &Scenario, q: &[f64]) -> Result<(f64, f64)> {
    let model = CollisionModel::new(&s.robot, &s.scene.obstacles)?;
    let mut poses = vec![Pose::identity(); s.robot.links().len()];
    forward_kinematics(&s.robot, q, &mut poses)?;
    let c = model.clearance(&poses, &mut CollisionScratch::new())?;
    Ok((s.robot.reach_margin(q), c.distance))
}

fn main() -> Result<()> {
    let robot = climb::climber()?;
    let span = effector_span(&robot, climb::LEFT, climb::RIGHT)?;
    println!("climber `{}`: {} DOF", robot.name(), robot.nv());
    println!("  span bound (grip to grip):      {span:.4} m");
    for e in [climb::LEFT, climb::RIGHT] {
        println!(
            "  reach bound torso -> {e}: {:.4} m",
            effector_reach(&robot, e, "torso")?
        );
    }
    println!(
        "  bar spacing {} m, bar length {} m, standoff {} m, module {} x {} m",
        climb::BAR_SPACING,
        climb::BAR_LENGTH,
        climb::STANDOFF,
        climb::MODULE_WIDTH,
        climb::MODULE_HEIGHT
    );

    for n in [4usize, 8, 12, 16] {
        let t = Instant::now();
        let s = climb::corridor(n)?;
        let built = t.elapsed().as_secs_f64();
        if n == 12 {
            print_scene(&s, built);
            let (lure, _) = s.scene.hold(climb::LURE)?;
            let d = climb::nearest_other_hold(&s.scene, lure);
            println!(
                "  lure: {d:.4} m from the nearest rung = span + {:.4} m (required margin {} m)",
                d - span,
                climb::LURE_MARGIN
            );
            println!("  consecutive pairs (hand-over-hand parity):");
            println!("  pair     distance  reach margin  clearance  search");
            for k in 0..n - 1 {
                let a = s.scene.hold(&format!("rung_{k:02}"))?.0;
                let b = s.scene.hold(&format!("rung_{:02}", k + 1))?.0;
                let stance = climb::pair_stance(k, a, k + 1, b);
                let d = hold_distance(&s.scene.holds[a], &s.scene.holds[b]).unwrap_or(f64::NAN);
                let t = Instant::now();
                match climb::find_pose(&s.robot, &s.scene, &stance, 100 + k as u64, 400)? {
                    Some(q) => {
                        let (m, c) = quality(&s, &q)?;
                        println!(
                            "  {k:2}-{:<2}   {d:6.3} m  {m:8.3} rad  {c:7.3} m  {:6.1} ms",
                            k + 1,
                            t.elapsed().as_secs_f64() * 1e3
                        );
                    }
                    None => println!("  {k:2}-{:<2}   {d:6.3} m  NOT FOUND", k + 1),
                }
            }
        } else {
            println!(
                "== corridor_{n}: {} holds, start {}, built in {built:.3} s",
                s.scene.holds.len(),
                s.start.stance.describe(&s.scene)
            );
        }
    }

    let t = Instant::now();
    let s = climb::point_wall()?;
    print_scene(&s, t.elapsed().as_secs_f64());

    let t = Instant::now();
    let s = climb::gap()?;
    print_scene(&s, t.elapsed().as_secs_f64());
    let near = s.scene.hold(climb::GAP_NEAR)?.1;
    let far = s.scene.hold(climb::GAP_FAR)?.1;
    let w = hold_distance(near, far).unwrap_or(f64::NAN);
    println!(
        "  gap {} -> {}: {w:.4} m = span {span:.4} m + {:.4} m",
        climb::GAP_NEAR,
        climb::GAP_FAR,
        w - span
    );

    let t = Instant::now();
    let s = climb::feasibility_scene()?;
    print_scene(&s, t.elapsed().as_secs_f64());
    println!("  expected verdicts:");
    for e in climb::feasibility_expectations(&s)? {
        println!("  {:<12} -> {:<12} {:?}", e.held, e.target, e.verdict);
    }
    Ok(())
}
