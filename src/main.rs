//! The `clamber` command-line tool.
//!
//! Global options (`--json`, `--quiet`, `--verbose`) apply to every command. Exit codes are
//! defined once, in [`Exit`], and listed in `clamber --help` and `docs/cli.md`. Errors in
//! input files are drawn with the offending line of the file (codespan-reporting).

use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{Context, Result};
use clap::{CommandFactory, Parser, Subcommand};
use clap_complete::Shell;
use codespan_reporting::diagnostic::{Diagnostic, Label};
use codespan_reporting::files::SimpleFile;
use codespan_reporting::term::{self, termcolor};
use serde::Serialize;

mod cli;

use clamber::output::OutputError;
use clamber::robot_file::RobotFileError;
use clamber::route_file::RouteFileError;
use clamber::scenario::Goal;
use clamber::scenario_file::{load_scenario, ScenarioFile, ScenarioFileError};

/// The process exit codes, in one place. Shown by `clamber --help`, documented in
/// `docs/cli.md`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Exit {
    Success = 0,
    /// An unexpected failure inside Clamber (a bug or an environment problem).
    Internal = 1,
    /// The command line itself is wrong (clap's usage errors use this code).
    Usage = 2,
    /// An input file (scenario, robot, mechanism, route) is missing or malformed.
    BadInput = 3,
    /// No route was found within the scenario's limits.
    NoRoute = 4,
    /// The verifier rejected a route.
    Verification = 5,
    /// An output file could not be written (nothing partial is left behind).
    Output = 6,
    /// `show`/`render`: the viewer executable `clamber-view` is not installed.
    NoViewer = 7,
    /// Interrupted (SIGINT); see `cli::interrupt`. The handler exits with this code itself.
    Interrupted = 130,
}

impl Exit {
    const ALL: [(Exit, &'static str); 9] = [
        (Exit::Success, "success"),
        (
            Exit::Internal,
            "internal error (a bug or an environment problem)",
        ),
        (Exit::Usage, "bad command line"),
        (Exit::BadInput, "an input file is missing or malformed"),
        (Exit::NoRoute, "no route found within the limits"),
        (Exit::Verification, "the verifier rejected the route"),
        (Exit::Output, "an output file could not be written"),
        (
            Exit::NoViewer,
            "show/render: the viewer clamber-view is not installed (other codes: the viewer's own)",
        ),
        (
            Exit::Interrupted,
            "interrupted (Ctrl-C): no output file of the run, or all of them, is written",
        ),
    ];

    fn code(self) -> u8 {
        self as u8
    }

    /// The exit code an error calls for, from the typed errors in its chain.
    fn of(e: &anyhow::Error) -> Exit {
        for cause in e.chain() {
            if cause.is::<ScenarioFileError>()
                || cause.is::<RobotFileError>()
                || cause.is::<RouteFileError>()
            {
                return Exit::BadInput;
            }
            if cause.is::<OutputError>() {
                return Exit::Output;
            }
            if let Some(cli::view::ViewerError::Missing { .. }) = cause.downcast_ref() {
                return Exit::NoViewer;
            }
            match cause.downcast_ref::<cli::CommandError>() {
                Some(cli::CommandError::NoRoute(_)) => return Exit::NoRoute,
                Some(cli::CommandError::Verification(_)) => return Exit::Verification,
                Some(cli::CommandError::BadSuite(_)) => return Exit::BadInput,
                Some(cli::CommandError::Usage(_)) => return Exit::Usage,
                None => {}
            }
        }
        Exit::Internal
    }

    fn help() -> String {
        let mut s = String::from("Exit codes:\n");
        for (e, what) in Exit::ALL {
            s.push_str(&format!("  {}  {what}\n", e.code()));
        }
        s
    }
}

/// `clamber plan --planner` values.
#[derive(Clone, Copy, Debug, clap::ValueEnum)]
enum PlannerArg {
    LazyPrm,
    RrtConnect,
}

impl PlannerArg {
    fn choice(self) -> clamber::motion::PlannerChoice {
        match self {
            PlannerArg::LazyPrm => clamber::motion::PlannerChoice::LazyPrm,
            PlannerArg::RrtConnect => clamber::motion::PlannerChoice::RrtConnect,
        }
    }
}

#[derive(Parser)]
#[command(
    name = "clamber",
    version,
    about = "Plans verified motions for robots that hold on to the world while they move",
    after_help = Exit::help(),
)]
struct Cli {
    /// Machine-readable output: reports and errors as JSON on standard output.
    #[arg(long, global = true)]
    json: bool,
    /// Print nothing but errors.
    #[arg(long, short, global = true, conflicts_with = "verbose")]
    quiet: bool,
    /// Print more detail (every value, the full cause of an error).
    #[arg(long, short, global = true)]
    verbose: bool,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Inspect a robot file: DOF, joints and limits, effectors, links and shapes, reach.
    Robot {
        /// Robot file (.toml or .urdf).
        file: PathBuf,
    },
    /// Read and check a scenario file; print what it describes (robot, scene, start, goal,
    /// limits, outputs).
    Scenario {
        /// Scenario file (*.scenario.toml).
        file: PathBuf,
    },
    /// Plan a verified, timed route for a scenario; write the route (JSON), the trajectory
    /// (CSV) and a summary to the scenario's output paths.
    Plan {
        /// Scenario file (*.scenario.toml).
        file: PathBuf,
        /// Write the route here instead of the scenario's `outputs.route`.
        #[arg(long, short)]
        output: Option<PathBuf>,
        /// Write the plots (joints, residual, clearance; PNG and SVG) into this directory
        /// instead of the scenario's `outputs.plots`.
        #[arg(long)]
        plots: Option<PathBuf>,
        /// Planning time limit in seconds, instead of the scenario's `limits.time_limit`.
        #[arg(long, value_parser = positive_seconds)]
        time_limit: Option<f64>,
        /// Random seed, instead of the scenario's `limits.seed`.
        #[arg(long)]
        seed: Option<u64>,
        /// Planner of a single-stance motion (a goal configuration): lazy-prm (the default)
        /// or rrt-connect. Route legs always use RRT-Connect.
        #[arg(long, value_enum)]
        planner: Option<PlannerArg>,
    },
    /// Switch feasibility over a scenario's scene: for each effector and pair of holds,
    /// feasible or not, with reach margin and clearance at the best switch pose.
    Check {
        /// Scenario file (*.scenario.toml).
        file: PathBuf,
    },
    /// Re-check a route file against its scenario, independently of the planner.
    Verify {
        /// Scenario file (*.scenario.toml).
        scenario: PathBuf,
        /// Route (or motion) JSON written by `clamber plan`.
        route: PathBuf,
    },
    /// Plan every scenario of a suite with every seed, in parallel; write a JSON report, a
    /// table (success, median and p95 time per scenario; outcome and route digest per run)
    /// and a plot of the run times.
    Bench {
        /// Suite file (TOML: `scenarios`, `seeds`, optional `name`, `time_limit`, `output`).
        suite: PathBuf,
        /// Worker threads (default: the number of cores).
        #[arg(long, short)]
        jobs: Option<usize>,
        /// Write the report into this directory instead of the suite's `output`.
        #[arg(long)]
        out: Option<PathBuf>,
    },
    /// Replay a route in a 3D window (runs the separate `clamber-view` executable; its
    /// options: `clamber show --help`).
    #[command(disable_help_flag = true)]
    Show {
        /// SCENARIO ROUTE [--screenshot PNG --after SECONDS] [view options]
        #[arg(trailing_var_arg = true, allow_hyphen_values = true)]
        args: Vec<std::ffi::OsString>,
    },
    /// Render a route at a time (or a strip of key frames) to PNG with no window (runs
    /// `clamber-view`; its options: `clamber render --help`).
    #[command(disable_help_flag = true)]
    Render {
        /// SCENARIO ROUTE [--time T | --strip N] -o OUT.png [view options]
        #[arg(trailing_var_arg = true, allow_hyphen_values = true)]
        args: Vec<std::ffi::OsString>,
    },
    /// Print a shell completion script for clamber.
    Completions {
        /// The shell to complete in.
        shell: Shell,
    },
}

/// A time limit given on the command line: seconds, finite and positive.
fn positive_seconds(text: &str) -> Result<f64, String> {
    match text.parse::<f64>() {
        Ok(v) if v.is_finite() && v > 0.0 && v < 1e9 => Ok(v),
        _ => Err(format!(
            "expected a positive number of seconds (e.g. 2.5), got `{text}`"
        )),
    }
}

/// How much to print.
#[derive(Clone, Copy)]
struct Style {
    json: bool,
    quiet: bool,
    verbose: bool,
}

fn robot(file: &Path, style: Style) -> Result<()> {
    let robot = clamber::robot_file::load_robot(file)?;
    let report = clamber::report::RobotReport::new(&robot)
        .with_context(|| format!("{}: cannot compute the report", file.display()))?;
    if style.quiet {
        return Ok(());
    }
    if style.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", report.to_text());
    }
    Ok(())
}

/// What `clamber scenario` reports.
#[derive(Serialize)]
struct ScenarioSummary {
    name: String,
    robot: String,
    robot_file: PathBuf,
    nq: usize,
    nv: usize,
    passive_dof: usize,
    obstacles: Vec<String>,
    holds: Vec<HoldSummary>,
    mechanisms: Vec<String>,
    start_stance: String,
    /// Residual norm of the start's stance at the start configuration.
    start_residual: f64,
    settled: bool,
    start_q: Vec<f64>,
    goal: String,
    tolerance: f64,
    stride: f64,
    time_limit_s: f64,
    seed: u64,
    outputs: Vec<(String, PathBuf)>,
}

#[derive(Serialize)]
struct HoldSummary {
    name: String,
    kind: &'static str,
}

fn describe_goal(f: &ScenarioFile) -> String {
    let s = &f.scenario;
    match &s.goal {
        Goal::Configuration(_) => "reach a configuration".into(),
        Goal::Stance(st) => format!("hold the stance {}", st.describe(&s.scene)),
        Goal::Grip { effector, hold } => format!(
            "{effector} on {}",
            s.scene.holds.get(*hold).map_or("?", |h| h.name.as_str())
        ),
        Goal::BodyInRegion { link, min, max } => format!(
            "link {link} inside [{}, {}, {}] .. [{}, {}, {}]",
            min.x, min.y, min.z, max.x, max.y, max.z
        ),
        _ => "another goal".into(),
    }
}

fn scenario(file: &Path, style: Style) -> Result<()> {
    let f = load_scenario(file)?;
    if style.quiet {
        return Ok(());
    }
    let s = &f.scenario;
    let stack = s
        .start
        .stance
        .constraints(&s.robot, &s.scene, &s.constant)
        .context("building the start stance's constraints")?;
    let mut buf = stack.buffer(&s.robot);
    let start_residual = stack
        .evaluate(&s.robot, &s.start.q, &mut buf, false)
        .context("evaluating the start stance")?;
    let o = &f.outputs;
    let outputs = [
        ("route", &o.route),
        ("trajectory", &o.trajectory),
        ("summary", &o.summary),
        ("picture", &o.picture),
        ("plots", &o.plots),
    ]
    .into_iter()
    .filter_map(|(k, p)| p.clone().map(|p| (k.to_string(), p)))
    .collect();
    let summary = ScenarioSummary {
        name: s.name.clone(),
        robot: s.robot.name().to_string(),
        robot_file: f.robot_file.clone(),
        nq: s.robot.nq(),
        nv: s.robot.nv(),
        passive_dof: s.robot.passive_dof(),
        obstacles: s.scene.obstacles.iter().map(|o| o.name.clone()).collect(),
        holds: s
            .scene
            .holds
            .iter()
            .map(|h| HoldSummary {
                name: h.name.clone(),
                kind: match h.kind {
                    clamber::scene::HoldKind::Point { .. } => "point",
                    clamber::scene::HoldKind::Bar { .. } => "bar",
                    clamber::scene::HoldKind::Handle { .. } => "handle",
                    _ => "other",
                },
            })
            .collect(),
        mechanisms: s
            .scene
            .mechanisms
            .iter()
            .map(|m| m.spec.name.clone())
            .collect(),
        start_stance: s.start.stance.describe(&s.scene),
        start_residual,
        settled: f.settled,
        start_q: s.start.q.clone(),
        goal: describe_goal(&f),
        tolerance: s.limits.tolerance,
        stride: s.limits.stride,
        time_limit_s: s.limits.time_limit.as_secs_f64(),
        seed: s.limits.seed,
        outputs,
    };
    if style.json {
        println!("{}", serde_json::to_string_pretty(&summary)?);
        return Ok(());
    }
    let mut out = String::new();
    let m = &summary;
    out.push_str(&format!("scenario: {}\n", m.name));
    out.push_str(&format!(
        "robot: {} ({}), nq = {}, nv = {} ({} passive)\n",
        m.robot,
        m.robot_file.display(),
        m.nq,
        m.nv,
        m.passive_dof
    ));
    out.push_str(&format!("obstacles: {}\n", list(&m.obstacles)));
    let holds: Vec<String> = m
        .holds
        .iter()
        .map(|h| format!("{} ({})", h.name, h.kind))
        .collect();
    out.push_str(&format!("holds: {}\n", list(&holds)));
    out.push_str(&format!("mechanisms: {}\n", list(&m.mechanisms)));
    out.push_str(&format!(
        "start: stance {} (residual {:.2e}{})\n",
        if m.start_stance.is_empty() {
            "free"
        } else {
            &m.start_stance
        },
        m.start_residual,
        if m.settled { ", settled" } else { "" }
    ));
    if style.verbose {
        for j in s.robot.joints().iter().filter(|j| j.kind.nq() > 0) {
            let x = &s.start.q[j.q_index..j.q_index + j.kind.nq()];
            out.push_str(&format!("  {} = {x:?}\n", j.name));
        }
    }
    out.push_str(&format!("goal: {}\n", m.goal));
    out.push_str(&format!(
        "limits: tolerance {:e}, stride {}, time limit {} s, seed {}\n",
        m.tolerance, m.stride, m.time_limit_s, m.seed
    ));
    for (k, p) in &m.outputs {
        out.push_str(&format!("output {k}: {}\n", p.display()));
    }
    print!("{out}");
    Ok(())
}

fn list(items: &[String]) -> String {
    if items.is_empty() {
        "none".into()
    } else {
        items.join(", ")
    }
}

fn completions(shell: Shell) -> Result<()> {
    let mut cmd = Cli::command();
    let mut out = std::io::stdout().lock();
    clap_complete::generate(shell, &mut cmd, "clamber", &mut out);
    out.flush()?;
    Ok(())
}

// ---------------------------------------------------------------------------------------
// Error reporting

/// A place in an input file an error is about.
struct Place<'a> {
    path: &'a Path,
    line: usize,
    column: usize,
    message: String,
}

fn place_of(e: &anyhow::Error) -> Vec<Place<'_>> {
    let mut places = Vec::new();
    for cause in e.chain() {
        if let Some(s) = cause.downcast_ref::<ScenarioFileError>() {
            if let Some((line, column)) = s.position() {
                places.push(Place {
                    path: s.path(),
                    line,
                    column,
                    message: s.message(),
                });
            }
            if let ScenarioFileError::Referenced { source, .. } = s {
                places.extend(robot_place(source));
            }
        } else if let Some(r) = cause.downcast_ref::<RobotFileError>() {
            places.extend(robot_place(r));
        }
    }
    places
}

fn robot_place(r: &RobotFileError) -> Option<Place<'_>> {
    let (line, column) = r.position()?;
    let path = match r {
        RobotFileError::Syntax { path, .. }
        | RobotFileError::Model { path, .. }
        | RobotFileError::Mesh { path, .. } => path,
        _ => return None,
    };
    // The message after "path:line:column: ".
    let full = r.to_string();
    let prefix = format!("{}:{line}:{column}: ", path.display());
    let message = full.strip_prefix(&prefix).unwrap_or(&full).to_string();
    Some(Place {
        path,
        line,
        column,
        message,
    })
}

/// Byte range of the token at 1-based (line, column), column in characters.
fn token_range(text: &str, line: usize, column: usize) -> Option<std::ops::Range<usize>> {
    let line_start = if line <= 1 {
        0
    } else {
        text.match_indices('\n').nth(line - 2).map(|(i, _)| i + 1)?
    };
    let line_text = text[line_start..].split('\n').next().unwrap_or("");
    let offset = line_text
        .char_indices()
        .nth(column.saturating_sub(1))
        .map_or(line_text.len(), |(i, _)| i);
    let start = line_start + offset;
    let rest = &text[start..];
    let len = match rest.chars().next() {
        Some('"') => rest[1..].find('"').map_or(1, |i| i + 2),
        Some('[') => rest.find(']').map_or(1, |i| i + 1),
        _ => rest
            .find(|c: char| c.is_whitespace() || c == ',' || c == ']' || c == '}')
            .unwrap_or(rest.len()),
    };
    Some(start..start + len.max(1).min(rest.len().max(1)).min(text.len() - start))
}

fn report_error(e: &anyhow::Error, style: Style, exit: Exit) {
    if style.json {
        let places: Vec<_> = place_of(e)
            .into_iter()
            .map(|p| {
                serde_json::json!({
                    "file": p.path, "line": p.line, "column": p.column, "message": p.message,
                })
            })
            .collect();
        let field = e.chain().find_map(|c| {
            c.downcast_ref::<ScenarioFileError>()
                .and_then(|s| s.field().map(str::to_string))
        });
        let v = serde_json::json!({
            "error": {
                "message": format!("{e:#}"),
                "exit_code": exit.code(),
                "field": field,
                "places": places,
            }
        });
        println!("{v:#}");
        return;
    }
    let places = place_of(e);
    let mut stderr = termcolor::StandardStream::stderr(if std::io::stderr().is_terminal() {
        termcolor::ColorChoice::Auto
    } else {
        termcolor::ColorChoice::Never
    });
    let config = term::Config::default();
    let mut drawn = false;
    if !style.quiet {
        for (k, p) in places.iter().enumerate() {
            let Ok(text) = std::fs::read_to_string(p.path) else {
                continue;
            };
            let Some(range) = token_range(&text, p.line, p.column) else {
                continue;
            };
            let file = SimpleFile::new(p.path.display().to_string(), text);
            // The header keeps the one-line `file:line:column: message` form that editors
            // and scripts look for; the snippet below it shows the place.
            let header = format!(
                "{}:{}:{}: {}",
                p.path.display(),
                p.line,
                p.column,
                p.message
            );
            let d = if k == 0 {
                Diagnostic::error()
            } else {
                Diagnostic::note()
            }
            .with_message(header)
            .with_labels(vec![Label::primary((), range).with_message(&p.message)]);
            drawn |= term::emit_to_write_style(&mut stderr, &config, &file, &d).is_ok();
        }
    }
    if !drawn {
        // The first error's message already holds file, line, column, field and cause.
        eprintln!("error: {e}");
    }
    if style.verbose {
        for cause in e.chain().skip(1) {
            eprintln!("  caused by: {cause}");
        }
    }
}

fn print_unless_quiet(text: &str, style: Style) {
    if !style.quiet {
        print!("{text}");
        if !text.ends_with('\n') {
            println!();
        }
    }
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() {
                Exit::Usage.code()
            } else {
                Exit::Success.code()
            });
        }
    };
    let style = Style {
        json: cli.json,
        quiet: cli.quiet,
        verbose: cli.verbose,
    };
    if let Err(e) = cli::interrupt::install() {
        eprintln!("warning: Ctrl-C will not be handled: {e}");
    }
    if let Command::Show { args } | Command::Render { args } = &cli.command {
        let sub = if matches!(cli.command, Command::Show { .. }) {
            "show"
        } else {
            "render"
        };
        return match cli::view::forward(sub, args) {
            Ok(code) => ExitCode::from(code),
            Err(e) => {
                let e = anyhow::Error::from(e);
                let exit = Exit::of(&e);
                report_error(&e, style, exit);
                ExitCode::from(exit.code())
            }
        };
    }
    let result = match &cli.command {
        Command::Robot { file } => robot(file, style),
        Command::Scenario { file } => scenario(file, style),
        Command::Completions { shell } => completions(*shell),
        Command::Plan {
            file,
            output,
            plots,
            time_limit,
            seed,
            planner,
        } => {
            let limits = cli::PlanOverrides {
                time_limit: time_limit.map(std::time::Duration::from_secs_f64),
                seed: *seed,
                planner: planner.map(PlannerArg::choice),
            };
            cli::plan(file, output.clone(), plots.clone(), limits, style.json)
                .map(|t| print_unless_quiet(&t, style))
        }
        Command::Bench { suite, jobs, out } => cli::bench::bench(cli::bench::BenchArgs {
            suite,
            jobs: *jobs,
            out: out.clone(),
            progress: !(style.quiet || style.json),
            json: style.json,
        })
        .map(|t| print_unless_quiet(&t, style)),
        Command::Check { file } => {
            cli::check(file, style.json).map(|t| print_unless_quiet(&t, style))
        }
        Command::Verify { scenario, route } => {
            cli::verify(scenario, route, style.json).map(|t| print_unless_quiet(&t, style))
        }
        // Forwarded to the viewer above.
        Command::Show { .. } | Command::Render { .. } => Ok(()),
    };
    match result {
        Ok(()) => ExitCode::from(Exit::Success.code()),
        Err(e) => {
            let exit = Exit::of(&e);
            report_error(&e, style, exit);
            ExitCode::from(exit.code())
        }
    }
}
