//! The `plan`, `check` and `verify` commands of the `clamber` binary (binary-only code; the
//! library does the work). Errors that decide the exit code are typed here ([`CommandError`])
//! so `main` can map them.

pub mod view;

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use serde_json::Value;

use clamber::model::{JointKind, Robot};
use clamber::motion::{plan_motion, Motion, MotionError, MotionSettings};
use clamber::output::write_atomic;
use clamber::route::feasibility::check_feasibility;
use clamber::route::{collision_model, plan_route, Route, RouteError, RouteSettings};
use clamber::scenario::{Goal, Scenario};
use clamber::scenario_file::{load_scenario, ScenarioFile};
use clamber::scene::Stance;
use clamber::verify::{verify_path, VerifySettings};

/// Outcomes that have their own exit code.
#[derive(Debug, thiserror::Error)]
pub enum CommandError {
    #[error("no route found\n{0}")]
    NoRoute(String),
    #[error("verification failed: {0}")]
    Verification(String),
}

/// What `plan` produced: a multi-stance route or a single-stance motion.
pub enum Planned {
    Route(Box<Route>),
    Motion(Box<Motion>),
}

/// Names of the configuration's coordinates (one per entry of `q`), for CSV headers.
pub fn q_names(robot: &Robot) -> Vec<String> {
    let mut out = Vec::with_capacity(robot.nq());
    for j in robot.joints() {
        match j.kind {
            JointKind::Floating => {
                for s in ["x", "y", "z", "qx", "qy", "qz", "qw"] {
                    out.push(format!("{}.{s}", j.name));
                }
            }
            JointKind::Fixed => {}
            _ => out.push(j.name.clone()),
        }
    }
    out
}

/// CSV: a header `time,<coordinate names>` then one row per time.
pub fn trajectory_csv(robot: &Robot, rows: &[(f64, &[f64])]) -> String {
    let mut s = String::from("time");
    for n in q_names(robot) {
        s.push(',');
        s.push_str(&n);
    }
    s.push('\n');
    for (t, q) in rows {
        let _ = write!(s, "{t}");
        for v in *q {
            let _ = write!(s, ",{v}");
        }
        s.push('\n');
    }
    s
}

fn plan_scenario(f: &ScenarioFile) -> Result<Planned> {
    let s = &f.scenario;
    if matches!(s.goal, Goal::Configuration(_)) {
        match plan_motion(s, &MotionSettings::default()) {
            Ok(m) => Ok(Planned::Motion(Box::new(m))),
            Err(MotionError::NoPath { .. }) => Err(CommandError::NoRoute(
                "no path to the goal configuration within the limits".into(),
            )
            .into()),
            Err(e) => Err(e).context("planning the motion"),
        }
    } else {
        match plan_route(s, &RouteSettings::default()) {
            Ok(r) => Ok(Planned::Route(Box::new(r))),
            Err(RouteError::NoRoute(x)) => Err(CommandError::NoRoute(x.to_string()).into()),
            Err(RouteError::VerificationFailed { what, defects }) => {
                Err(CommandError::Verification(format!("{what}: {defects}")).into())
            }
            Err(e) => Err(e).context("planning the route"),
        }
    }
}

/// A short human summary of a plan.
fn summary(s: &Scenario, planned: &Planned) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "scenario: {}  robot: {}  seed: {}",
        s.name,
        s.robot.name(),
        s.limits.seed
    );
    let _ = writeln!(
        out,
        "tolerance: {:e}  stride: {}",
        s.limits.tolerance, s.limits.stride
    );
    match planned {
        Planned::Route(r) => {
            let _ = writeln!(
                out,
                "route: {} legs, {} switches, duration {:.2} s, verified at spacing {:.4}",
                r.legs.len(),
                r.switches.len(),
                r.duration,
                r.verify_resolution
            );
            let _ = writeln!(
                out,
                "max residual along legs {:.2e} (path tolerance {:e}), min clearance {:.3} m",
                r.legs.iter().map(|l| l.max_residual).fold(0.0, f64::max),
                r.path_tolerance,
                r.min_clearance
            );
            for w in &r.switches {
                let _ = writeln!(
                    out,
                    "  t = {:7.2} s  {} {} {}  (residuals {:.1e} / {:.1e}, clearance {:.3} m)",
                    w.time,
                    w.effector,
                    w.action,
                    w.hold,
                    w.residual_from,
                    w.residual_to,
                    w.clearance
                );
            }
        }
        Planned::Motion(m) => {
            let st = &m.stats;
            let _ = writeln!(
                out,
                "motion: {} waypoints, {} timed samples, duration {:.2} s",
                m.path.len(),
                m.samples.len(),
                st.duration
            );
            let _ = writeln!(
                out,
                "max residual {:.2e} (tolerance {:e}), verified points {}, min clearance {:.3} m",
                st.max_residual_samples_verified
                    .max(st.max_residual_path_verified),
                m.tolerances.tolerance,
                st.verified_points,
                st.min_clearance
            );
        }
    }
    out
}

/// `clamber plan`: plan, verify (inside the library) and write the outputs atomically.
/// Returns the text to print.
pub fn plan(file: &Path, route_out: Option<PathBuf>, json: bool) -> Result<String> {
    let f = load_scenario(file)?;
    let s = &f.scenario;
    let planned = plan_scenario(&f)?;
    let (doc, csv) = match &planned {
        Planned::Route(r) => {
            let rows: Vec<(f64, &[f64])> = r
                .legs
                .iter()
                .flat_map(|l| {
                    l.times
                        .iter()
                        .copied()
                        .zip(l.path.iter().map(|q| q.as_slice()))
                })
                .collect();
            (r.to_json()?, trajectory_csv(&s.robot, &rows))
        }
        Planned::Motion(m) => {
            let rows: Vec<(f64, &[f64])> =
                m.samples.iter().map(|x| (x.t, x.q.as_slice())).collect();
            (m.to_json()?, trajectory_csv(&s.robot, &rows))
        }
    };
    let text = summary(s, &planned);
    let o = &f.outputs;
    let route_path = route_out.or_else(|| o.route.clone());
    let mut written = Vec::new();
    for (path, bytes) in [
        (route_path, doc.as_bytes()),
        (o.trajectory.clone(), csv.as_bytes()),
        (o.summary.clone(), text.as_bytes()),
    ] {
        if let Some(p) = path {
            if let Some(dir) = p.parent().filter(|d| !d.as_os_str().is_empty()) {
                std::fs::create_dir_all(dir)
                    .with_context(|| format!("creating {}", dir.display()))?;
            }
            write_atomic(&p, bytes)?;
            written.push(p);
        }
    }
    if json {
        return Ok(doc);
    }
    let mut out = text;
    for p in written {
        let _ = writeln!(out, "wrote {}", p.display());
    }
    Ok(out)
}

/// `clamber check`: the switch feasibility table of a scenario's scene.
pub fn check(file: &Path, json: bool) -> Result<String> {
    let f = load_scenario(file)?;
    let report = check_feasibility(&f.scenario, &RouteSettings::default())
        .context("checking switch feasibility")?;
    if json {
        Ok(serde_json::to_string_pretty(&report)?)
    } else {
        Ok(report.to_string())
    }
}

fn stance_of(s: &Scenario, v: &Value, what: &str) -> Result<Stance> {
    let map = v
        .as_object()
        .with_context(|| format!("{what}: expected an object effector -> hold"))?;
    let mut st = Stance::new();
    for (e, h) in map {
        let name = h
            .as_str()
            .with_context(|| format!("{what}: hold of {e} must be a name"))?;
        let (i, _) = s.scene.hold(name).with_context(|| what.to_string())?;
        st = st.with(e.clone(), i);
    }
    Ok(st)
}

fn configurations(v: &Value, what: &str, nq: usize) -> Result<Vec<Vec<f64>>> {
    let rows = v
        .as_array()
        .with_context(|| format!("{what}: expected a list of configurations"))?;
    rows.iter()
        .enumerate()
        .map(|(i, r)| {
            let q: Option<Vec<f64>> = r
                .as_array()
                .and_then(|a| a.iter().map(Value::as_f64).collect::<Option<Vec<f64>>>());
            let q = q.with_context(|| format!("{what}[{i}]: expected a list of numbers"))?;
            if q.len() != nq {
                anyhow::bail!("{what}[{i}]: {} values, the robot has {nq}", q.len());
            }
            Ok(q)
        })
        .collect()
}

/// `clamber verify`: re-check a route (or motion) file against its scenario, independently of
/// the planner: every leg densely against its stance (residual, limits, collisions, gaps),
/// every switch pose against both stances.
pub fn verify(scenario_file: &Path, route_file: &Path, json: bool) -> Result<String> {
    let f = load_scenario(scenario_file)?;
    let s = &f.scenario;
    let text = std::fs::read_to_string(route_file)
        .with_context(|| format!("reading {}", route_file.display()))?;
    let doc: Value = serde_json::from_str(&text)
        .with_context(|| format!("{}: not JSON", route_file.display()))?;
    let collision = collision_model(s).context("building the collision model")?;
    let nq = s.robot.nq();
    let stride = s.limits.stride;
    let mut problems = Vec::new();
    let mut checked = 0usize;
    let mut worst: f64 = 0.0;
    // Legs: (label, stance, path, residual tolerance between waypoints).
    let mut legs = Vec::new();
    if let Some(ls) = doc.get("legs").and_then(Value::as_array) {
        let tol = doc
            .get("path_tolerance")
            .and_then(Value::as_f64)
            .unwrap_or(s.limits.tolerance);
        for (i, l) in ls.iter().enumerate() {
            let st = stance_of(
                s,
                l.get("stance").unwrap_or(&Value::Null),
                &format!("legs[{i}].stance"),
            )?;
            let path = configurations(
                l.get("path").unwrap_or(&Value::Null),
                &format!("legs[{i}].path"),
                nq,
            )?;
            legs.push((format!("leg {i}"), st, path, tol));
        }
    } else if let Some(p) = doc.get("path") {
        let tol = doc
            .pointer("/tolerances/tolerance")
            .and_then(Value::as_f64)
            .unwrap_or(s.limits.tolerance);
        legs.push((
            "motion".into(),
            s.start.stance.clone(),
            configurations(p, "path", nq)?,
            tol,
        ));
    } else {
        anyhow::bail!(
            "{}: neither `legs` (a route) nor `path` (a motion)",
            route_file.display()
        );
    }
    for (label, st, path, tol) in &legs {
        let stack = st.constraints(&s.robot, &s.scene, &s.constant)?;
        let settings = VerifySettings::new(stride / 10.0, *tol, stride)?;
        let report = verify_path(&s.robot, &stack, collision.as_ref(), path, &settings)?;
        checked += report.checked;
        worst = worst.max(report.max_residual);
        for d in report.defects.iter().take(5) {
            problems.push(format!("{label}: {d}"));
        }
    }
    if let Some(ws) = doc.get("switches").and_then(Value::as_array) {
        for (i, w) in ws.iter().enumerate() {
            let pose = configurations(
                &Value::Array(vec![w.get("pose").cloned().unwrap_or(Value::Null)]),
                &format!("switches[{i}].pose"),
                nq,
            )?;
            for key in ["from", "to"] {
                let st = stance_of(
                    s,
                    w.get(key).unwrap_or(&Value::Null),
                    &format!("switches[{i}].{key}"),
                )?;
                let stack = st.constraints(&s.robot, &s.scene, &s.constant)?;
                let settings = VerifySettings::new(stride / 10.0, s.limits.tolerance, stride)?;
                let report = verify_path(&s.robot, &stack, collision.as_ref(), &pose, &settings)?;
                checked += report.checked;
                worst = worst.max(report.max_residual);
                for d in &report.defects {
                    problems.push(format!("switch {i} ({key} stance): {d}"));
                }
            }
        }
    }
    let verdict = serde_json::json!({
        "passed": problems.is_empty(),
        "points_checked": checked,
        "max_residual": worst,
        "resolution": stride / 10.0,
        "defects": problems,
    });
    if !problems.is_empty() {
        let msg = if json {
            serde_json::to_string_pretty(&verdict)?
        } else {
            problems.join("\n")
        };
        return Err(CommandError::Verification(msg).into());
    }
    if json {
        Ok(serde_json::to_string_pretty(&verdict)?)
    } else {
        Ok(format!(
            "verified: {} legs, {checked} points checked at spacing {:.4}, max residual {worst:.2e}\n",
            legs.len(),
            stride / 10.0
        ))
    }
}
