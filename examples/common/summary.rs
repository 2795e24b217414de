//! Shared by the demo examples: plan a scenario and print what came out.

use clamber::motion::{plan_motion, MotionSettings};
use clamber::scenario::Scenario;

pub fn run(mut s: Scenario) -> anyhow::Result<()> {
    if let Some(seed) = std::env::args().nth(1) {
        s.limits.seed = seed.parse()?;
    }
    let m = plan_motion(&s, &MotionSettings::default())?;
    let st = &m.stats;
    println!(
        "scenario `{}` on robot `{}`, seed {}",
        m.scenario, m.robot, m.seed
    );
    println!("  stance: {}", s.start.stance.describe(&s.scene));
    println!(
        "  planner {:?}: {} samples, {} nodes, {} projections, {} collision checks",
        st.planner, st.planner_samples, st.planner_nodes, st.projections, st.collision_checks
    );
    println!(
        "  path: {} planned waypoints -> {} after densifying ({} projections); {} corners",
        st.planned_waypoints,
        m.path.len(),
        st.densify_projections,
        st.corners
    );
    println!(
        "  timed: {:.2} s, {} samples every {} s",
        st.duration,
        m.samples.len(),
        m.tolerances.time_step
    );
    println!(
        "  tolerance {:.0e} (waypoints projected to {:.0e}); max residual at samples {:.2e}, \
         between samples {:.2e}; min clearance {:.4} m",
        m.tolerances.tolerance,
        m.tolerances.projection_tolerance,
        st.max_residual_samples,
        st.max_residual_samples_verified,
        st.min_clearance
    );
    let t = &st.times;
    println!(
        "  time: planning {:.1} ms, densify {:.1} ms, timing {:.1} ms, verify {:.1} ms, total {:.1} ms",
        t.planning.as_secs_f64() * 1e3,
        t.densify.as_secs_f64() * 1e3,
        t.timing.as_secs_f64() * 1e3,
        t.verify.as_secs_f64() * 1e3,
        t.total.as_secs_f64() * 1e3
    );
    println!("  dofs: {}", m.dof_names.join(" "));
    Ok(())
}
