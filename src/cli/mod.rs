//! The `plan`, `check` and `verify` commands of the `clamber` binary (binary-only code; the
//! library does the work). Errors that decide the exit code are typed here ([`CommandError`])
//! so `main` can map them.

pub mod bench;
pub mod interrupt;
pub mod view;

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};

use clamber::model::{JointKind, Robot};
use clamber::motion::{plan_motion, Motion, MotionError, MotionSettings, PlannerChoice};
use clamber::output::write_atomic;
use clamber::plot::plot_bytes;
use clamber::plot_data::{motion_plot_data, route_plot_data};
use clamber::route::feasibility::check_feasibility;
use clamber::route::{collision_model, plan_route, Route, RouteError, RouteSettings};
use clamber::route_file::parse_route;
use clamber::scenario::{Goal, Scenario};
use clamber::scenario_file::{load_scenario, ScenarioFile};
use clamber::verify::{verify_path, VerifySettings};

/// Outcomes that have their own exit code.
#[derive(Debug, thiserror::Error)]
pub enum CommandError {
    #[error("no route found\n{0}")]
    NoRoute(String),
    #[error("verification failed: {0}")]
    Verification(String),
    /// A bench suite file that cannot be read or is malformed.
    #[error("{0}")]
    BadSuite(String),
    /// A command-line option that does not fit the input (exit code 2, like a clap error).
    #[error("{0}")]
    Usage(String),
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

/// Plan a loaded scenario: a single-stance motion for a goal configuration (with `planner`,
/// or the default planner), a route otherwise (route legs always use RRT-Connect; asking
/// for a planner there is a usage error).
pub(crate) fn plan_scenario(f: &ScenarioFile, planner: Option<PlannerChoice>) -> Result<Planned> {
    let s = &f.scenario;
    if matches!(s.goal, Goal::Configuration(_)) {
        let mut settings = MotionSettings::default();
        if let Some(p) = planner {
            settings.planner = p;
        }
        match plan_motion(s, &settings) {
            Ok(m) => Ok(Planned::Motion(Box::new(m))),
            Err(MotionError::NoPath { .. }) => Err(CommandError::NoRoute(
                "no path to the goal configuration within the limits".into(),
            )
            .into()),
            Err(e) => Err(e).context("planning the motion"),
        }
    } else {
        if planner.is_some() {
            return Err(CommandError::Usage(
                "--planner applies to a goal configuration (`goal.q`, a single-stance motion); \
                 this scenario's goal is a route, whose legs are planned with RRT-Connect"
                    .into(),
            )
            .into());
        }
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
                "max residual along legs {:.2e} (path tolerance {:e}), min clearance at \
                 waypoints {:.3} m (switch poses keep at least {:.3} m)",
                r.legs.iter().map(|l| l.max_residual).fold(0.0, f64::max),
                r.path_tolerance,
                r.legs
                    .iter()
                    .map(|l| l.min_clearance)
                    .fold(f64::INFINITY, f64::min),
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

/// Time step of the joint samples in the plots (seconds).
pub const PLOT_TIME_STEP: f64 = 0.01;

/// The plots of a planned result, rendered (not yet written): `(file name, bytes)`.
fn plot_files(s: &Scenario, planned: &Planned) -> Result<Vec<(String, Vec<u8>)>> {
    let data = match planned {
        Planned::Route(r) => route_plot_data(s, r, &RouteSettings::default(), PLOT_TIME_STEP),
        Planned::Motion(m) => motion_plot_data(s, m),
    }
    .context("evaluating the plotted series")?;
    Ok(plot_bytes(&data)?
        .into_iter()
        .map(|(name, format, bytes)| (format!("{name}.{}", format.extension()), bytes))
        .collect())
}

/// Write `files` (path, bytes) atomically, creating missing directories, as one step that an
/// interrupt does not cut (see [`interrupt`]). Returns the paths written.
pub fn write_outputs(files: Vec<(PathBuf, Vec<u8>)>) -> Result<Vec<PathBuf>> {
    // Test hook (tests/cli_kill.rs): a pause before each file makes the writing step long
    // enough to interrupt it on purpose.
    let pause = std::env::var("CLAMBER_TEST_WRITE_PAUSE_MS")
        .ok()
        .and_then(|v| v.parse::<u64>().ok())
        .map(std::time::Duration::from_millis);
    interrupt::committing(|| {
        let mut written = Vec::new();
        for (p, bytes) in files {
            if let Some(d) = pause {
                std::thread::sleep(d);
            }
            if let Some(dir) = p.parent().filter(|d| !d.as_os_str().is_empty()) {
                std::fs::create_dir_all(dir)
                    .with_context(|| format!("creating {}", dir.display()))?;
            }
            write_atomic(&p, &bytes)?;
            written.push(p);
        }
        Ok(written)
    })
}

/// Limits given on the command line, replacing the scenario file's.
#[derive(Clone, Copy, Debug, Default)]
pub struct PlanOverrides {
    pub time_limit: Option<std::time::Duration>,
    pub seed: Option<u64>,
    /// The planner of a single-stance motion (`None`: the default, lazy PRM).
    pub planner: Option<PlannerChoice>,
}

/// `clamber plan`: plan, verify (inside the library), render the plots and write the outputs
/// atomically. Returns the text to print.
pub fn plan(
    file: &Path,
    route_out: Option<PathBuf>,
    plots_out: Option<PathBuf>,
    overrides: PlanOverrides,
    json: bool,
) -> Result<String> {
    let mut f = load_scenario(file)?;
    if let Some(t) = overrides.time_limit {
        f.scenario.limits.time_limit = t;
    }
    if let Some(seed) = overrides.seed {
        f.scenario.limits.seed = seed;
    }
    let s = &f.scenario;
    let planned = plan_scenario(&f, overrides.planner)?;
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
    let mut files: Vec<(PathBuf, Vec<u8>)> = [
        (route_path.clone(), doc.as_bytes()),
        (o.trajectory.clone(), csv.as_bytes()),
        (o.summary.clone(), text.as_bytes()),
    ]
    .into_iter()
    .filter_map(|(p, b)| p.map(|p| (p, b.to_vec())))
    .collect();
    // Every plot is rendered before anything is written.
    if let Some(dir) = plots_out.or_else(|| o.plots.clone()) {
        for (name, bytes) in plot_files(s, &planned)? {
            files.push((dir.join(name), bytes));
        }
    }
    let written = write_outputs(files)?;
    // The picture is drawn by the separate viewer from the route file just written; without
    // the viewer, or when it fails, the plan still stands and the note says why.
    let picture_note = match (&o.picture, &route_path) {
        (Some(picture), Some(route)) => Some(draw_picture(file, route, picture)),
        (Some(_), None) => Some("picture not drawn: it needs a route output".to_string()),
        _ => None,
    };
    if json {
        if let Some(note) = picture_note {
            eprintln!("{note}");
        }
        return Ok(doc);
    }
    let mut out = text;
    for p in written {
        let _ = writeln!(out, "wrote {}", p.display());
    }
    if let Some(note) = picture_note {
        let _ = writeln!(out, "{note}");
    }
    Ok(out)
}

/// Render a strip of four key frames of `route` to `picture` with `clamber render`; the line
/// to print.
fn draw_picture(scenario: &Path, route: &Path, picture: &Path) -> String {
    let args: Vec<std::ffi::OsString> = vec![
        scenario.into(),
        route.into(),
        "--strip".into(),
        "4".into(),
        "-o".into(),
        picture.into(),
    ];
    match view::forward("render", &args) {
        Ok(0) => format!("wrote {}", picture.display()),
        Ok(code) => format!("picture not drawn: clamber-view exited with code {code}"),
        Err(e) => format!("picture not drawn: {e}"),
    }
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

/// `clamber verify`: re-check a route (or motion) file against its scenario, independently of
/// the planner: every leg densely against its stance (residual, limits, collisions, gaps),
/// every switch pose against both stances.
pub fn verify(scenario_file: &Path, route_file: &Path, json: bool) -> Result<String> {
    let f = load_scenario(scenario_file)?;
    let s = &f.scenario;
    let text = std::fs::read_to_string(route_file)
        .with_context(|| format!("reading {}", route_file.display()))?;
    let doc = parse_route(&text, s).map_err(|e| {
        let msg = format!("{}: {e}", route_file.display());
        anyhow::Error::new(e).context(msg)
    })?;
    let collision = collision_model(s).context("building the collision model")?;
    let stride = s.limits.stride;
    let mut problems = Vec::new();
    let mut checked = 0usize;
    let mut worst: f64 = 0.0;
    let legs = &doc.pieces;
    for piece in legs {
        let stack = piece.stance.constraints(&s.robot, &s.scene, &s.constant)?;
        let settings = VerifySettings::new(stride / 10.0, piece.tolerance, stride)?;
        let report = verify_path(&s.robot, &stack, collision.as_ref(), &piece.path, &settings)?;
        checked += report.checked;
        worst = worst.max(report.max_residual);
        for d in report.defects.iter().take(5) {
            problems.push(format!("{}: {d}", piece.label));
        }
    }
    for w in &doc.switches {
        let i = w.index;
        let pose = std::slice::from_ref(&w.pose);
        for (key, st) in [("from", &w.from), ("to", &w.to)] {
            let stack = st.constraints(&s.robot, &s.scene, &s.constant)?;
            let settings = VerifySettings::new(stride / 10.0, s.limits.tolerance, stride)?;
            let report = verify_path(&s.robot, &stack, collision.as_ref(), pose, &settings)?;
            checked += report.checked;
            worst = worst.max(report.max_residual);
            for d in &report.defects {
                problems.push(format!("switch {i} ({key} stance): {d}"));
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
