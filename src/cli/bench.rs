//! `clamber bench SUITE`: every scenario of a suite planned with every seed, in parallel
//! over cores, with a JSON report, a text table and a plot of the run times.
//!
//! A suite is a small TOML file (documented in `docs/cli.md`):
//!
//! ```toml
//! name = "quick"                                   # optional; default: the file's stem
//! scenarios = ["../scenarios/sevenfold_rail.scenario.toml"]   # relative to this file
//! seeds = 4                                        # seeds 1, 2, 3, 4 of every scenario
//! time_limit = 120                                 # optional, seconds: replaces each
//!                                                  # scenario's time limit
//! output = "out/quick"                             # optional: report directory
//! ```
//!
//! Runs are independent (each plans a copy of its scenario with its own seed), so they are
//! spread over `--jobs` worker threads (`std::thread::scope` and a shared counter: the runs
//! take from a fraction of a second to many seconds each, so how they are handed out costs
//! nothing measurable, and no thread-pool crate is needed). Results are stored by run index,
//! so the report is the same whatever the number of jobs; only the measured times differ.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use clamber::plot::{quantile, times_bytes, Format, TimesChart};
use clamber::scenario_file::{load_scenario, ScenarioFile};

use super::{plan_scenario, write_outputs, CommandError, Planned};

/// The suite file as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SuiteFile {
    name: Option<String>,
    scenarios: Vec<String>,
    seeds: u64,
    time_limit: Option<f64>,
    output: Option<String>,
}

/// A suite, checked, with paths resolved against the suite file's directory.
#[derive(Debug)]
pub struct Suite {
    pub name: String,
    pub scenarios: Vec<PathBuf>,
    pub seeds: u64,
    pub time_limit: Option<Duration>,
    pub output: Option<PathBuf>,
}

fn bad(path: &Path, msg: impl std::fmt::Display) -> anyhow::Error {
    CommandError::BadSuite(format!("{}: {msg}", path.display())).into()
}

/// Read and check a suite file.
pub fn read_suite(path: &Path) -> Result<Suite> {
    let text = std::fs::read_to_string(path).map_err(|e| bad(path, format!("cannot read: {e}")))?;
    let raw: SuiteFile = toml::from_str(&text).map_err(|e| {
        let at = e
            .span()
            .map(|r| {
                let before = &text[..r.start.min(text.len())];
                let line = before.matches('\n').count() + 1;
                let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
                format!("{line}:{column}: ")
            })
            .unwrap_or_default();
        bad(path, format!("{at}{}", e.message()))
    })?;
    if raw.scenarios.is_empty() {
        return Err(bad(
            path,
            "`scenarios`: expected at least one scenario file",
        ));
    }
    if raw.seeds == 0 {
        return Err(bad(
            path,
            "`seeds`: expected a number of seeds of at least 1",
        ));
    }
    let time_limit = match raw.time_limit {
        None => None,
        Some(t) if t.is_finite() && t > 0.0 => Some(Duration::from_secs_f64(t)),
        Some(t) => {
            return Err(bad(
                path,
                format!("`time_limit`: expected seconds greater than 0, found {t}"),
            ))
        }
    };
    let base = path.parent().unwrap_or(Path::new(""));
    let name = raw.name.unwrap_or_else(|| {
        path.file_stem()
            .map(|s| s.to_string_lossy().trim_end_matches(".suite").to_string())
            .unwrap_or_else(|| "suite".into())
    });
    Ok(Suite {
        name,
        scenarios: raw.scenarios.iter().map(|s| base.join(s)).collect(),
        seeds: raw.seeds,
        time_limit,
        output: raw.output.map(|o| base.join(o)),
    })
}

/// One planning run.
#[derive(Clone, Debug, Serialize)]
pub struct Run {
    pub scenario: String,
    pub seed: u64,
    /// `route`, `motion`, `no_route`, `verification_failed` or `error`.
    pub outcome: &'static str,
    /// Wall-clock seconds of planning (machine- and load-dependent).
    pub seconds: f64,
    /// SHA-256 of the route (or motion) JSON, hex; `None` when nothing was planned.
    pub digest: Option<String>,
    /// Duration of the planned motion (seconds).
    pub motion_duration: Option<f64>,
    /// The error, for a run that planned nothing.
    pub message: Option<String>,
}

impl Run {
    pub fn succeeded(&self) -> bool {
        self.digest.is_some()
    }
}

/// Per-scenario figures.
#[derive(Clone, Debug, Serialize)]
pub struct ScenarioFigures {
    pub scenario: String,
    pub file: PathBuf,
    pub runs: usize,
    pub successes: usize,
    pub median_seconds: Option<f64>,
    pub p95_seconds: Option<f64>,
}

/// The whole report.
#[derive(Clone, Debug, Serialize)]
pub struct Report {
    pub suite: String,
    pub clamber_version: &'static str,
    pub jobs: usize,
    pub seeds: u64,
    pub time_limit_override: Option<f64>,
    /// Wall-clock seconds of the whole bench.
    pub wall_seconds: f64,
    pub scenarios: Vec<ScenarioFigures>,
    pub runs: Vec<Run>,
}

/// Run one scenario with one seed.
fn run_one(f: &ScenarioFile, seed: u64, time_limit: Option<Duration>) -> Run {
    let mut f = f.clone();
    f.scenario.limits.seed = seed;
    if let Some(t) = time_limit {
        f.scenario.limits.time_limit = t;
    }
    let t0 = Instant::now();
    let result = plan_scenario(&f, None);
    let seconds = t0.elapsed().as_secs_f64();
    let mut run = Run {
        scenario: f.scenario.name.clone(),
        seed,
        outcome: "error",
        seconds,
        digest: None,
        motion_duration: None,
        message: None,
    };
    let json = match &result {
        Ok(Planned::Route(r)) => {
            run.outcome = "route";
            run.motion_duration = Some(r.duration);
            r.to_json()
        }
        Ok(Planned::Motion(m)) => {
            run.outcome = "motion";
            run.motion_duration = Some(m.stats.duration);
            m.to_json()
        }
        Err(e) => {
            run.outcome = match e.downcast_ref::<CommandError>() {
                Some(CommandError::NoRoute(_)) => "no_route",
                Some(CommandError::Verification(_)) => "verification_failed",
                _ => "error",
            };
            run.message = Some(format!("{e:#}").lines().next().unwrap_or("").to_string());
            return run;
        }
    };
    match json {
        Ok(text) => run.digest = Some(format!("{:x}", Sha256::digest(text.as_bytes()))),
        Err(e) => {
            run.outcome = "error";
            run.message = Some(format!("writing the JSON: {e}"));
        }
    }
    run
}

/// Run every (scenario, seed) of `files` on `jobs` threads; results in run order
/// (scenario-major, seeds ascending).
pub fn run_all(
    files: &[ScenarioFile],
    seeds: u64,
    time_limit: Option<Duration>,
    jobs: usize,
    progress: &ProgressBar,
) -> Vec<Run> {
    let tasks: Vec<(usize, u64)> = (0..files.len())
        .flat_map(|i| (1..=seeds).map(move |s| (i, s)))
        .collect();
    let slots: Vec<Mutex<Option<Run>>> = tasks.iter().map(|_| Mutex::new(None)).collect();
    let next = AtomicUsize::new(0);
    std::thread::scope(|scope| {
        for _ in 0..jobs.max(1).min(tasks.len().max(1)) {
            scope.spawn(|| loop {
                let k = next.fetch_add(1, Ordering::Relaxed);
                let Some(&(i, seed)) = tasks.get(k) else {
                    break;
                };
                let run = run_one(&files[i], seed, time_limit);
                progress.set_message(format!("{} seed {seed}", run.scenario));
                progress.inc(1);
                *slots[k].lock().unwrap_or_else(|p| p.into_inner()) = Some(run);
            });
        }
    });
    slots
        .into_iter()
        .map(|m| m.into_inner().unwrap_or_else(|p| p.into_inner()))
        .map(|r| {
            r.unwrap_or_else(|| Run {
                scenario: String::new(),
                seed: 0,
                outcome: "error",
                seconds: 0.0,
                digest: None,
                motion_duration: None,
                message: Some("the run did not finish (its worker thread panicked)".into()),
            })
        })
        .collect()
}

fn figures(files: &[ScenarioFile], paths: &[PathBuf], runs: &[Run]) -> Vec<ScenarioFigures> {
    files
        .iter()
        .zip(paths)
        .map(|(f, p)| {
            let name = &f.scenario.name;
            let mine: Vec<&Run> = runs.iter().filter(|r| &r.scenario == name).collect();
            let mut times: Vec<f64> = mine.iter().map(|r| r.seconds).collect();
            ScenarioFigures {
                scenario: name.clone(),
                file: p.clone(),
                runs: mine.len(),
                successes: mine.iter().filter(|r| r.succeeded()).count(),
                median_seconds: quantile(&mut times, 0.5),
                p95_seconds: quantile(&mut times, 0.95),
            }
        })
        .collect()
}

fn secs(v: Option<f64>) -> String {
    v.map_or_else(|| "-".into(), |v| format!("{v:.3}"))
}

/// The text table of a report.
pub fn table(r: &Report) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "suite {}: {} runs ({} seeds), {} jobs, {:.2} s wall clock",
        r.suite,
        r.runs.len(),
        r.seeds,
        r.jobs,
        r.wall_seconds
    );
    let _ = writeln!(
        out,
        "{:<32} {:>5} {:>9} {:>10} {:>10}",
        "scenario", "runs", "success", "median s", "p95 s"
    );
    for s in &r.scenarios {
        let _ = writeln!(
            out,
            "{:<32} {:>5} {:>9} {:>10} {:>10}",
            s.scenario,
            s.runs,
            format!("{}/{}", s.successes, s.runs),
            secs(s.median_seconds),
            secs(s.p95_seconds)
        );
    }
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "{:<32} {:>5} {:>20} {:>9} {:>16}",
        "scenario", "seed", "outcome", "seconds", "digest"
    );
    for run in &r.runs {
        let _ = writeln!(
            out,
            "{:<32} {:>5} {:>20} {:>9.3} {:>16}",
            run.scenario,
            run.seed,
            run.outcome,
            run.seconds,
            run.digest.as_deref().map_or("-", |d| &d[..16.min(d.len())])
        );
    }
    out
}

/// What `clamber bench` is asked to do.
pub struct BenchArgs<'a> {
    pub suite: &'a Path,
    pub jobs: Option<usize>,
    pub out: Option<PathBuf>,
    /// Draw a progress bar on standard error.
    pub progress: bool,
    pub json: bool,
}

/// `clamber bench`: run the suite and write the report; returns the text to print.
pub fn bench(args: BenchArgs<'_>) -> Result<String> {
    let suite = read_suite(args.suite)?;
    let files = suite
        .scenarios
        .iter()
        .map(|p| load_scenario(p).map_err(anyhow::Error::from))
        .collect::<Result<Vec<_>>>()?;
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let jobs = args.jobs.unwrap_or(cores).max(1);
    let total = files.len() as u64 * suite.seeds;
    let progress = if args.progress {
        let pb = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::stderr());
        if let Ok(style) =
            ProgressStyle::with_template("{bar:30} {pos}/{len} runs, {elapsed} elapsed  {msg}")
        {
            pb.set_style(style);
        }
        pb
    } else {
        ProgressBar::hidden()
    };
    let t0 = Instant::now();
    let runs = run_all(&files, suite.seeds, suite.time_limit, jobs, &progress);
    let wall_seconds = t0.elapsed().as_secs_f64();
    progress.finish_and_clear();
    let report = Report {
        suite: suite.name.clone(),
        clamber_version: env!("CARGO_PKG_VERSION"),
        jobs,
        seeds: suite.seeds,
        time_limit_override: suite.time_limit.map(|t| t.as_secs_f64()),
        wall_seconds,
        scenarios: figures(&files, &suite.scenarios, &runs),
        runs,
    };
    let json = serde_json::to_string_pretty(&report)?;
    let text = table(&report);
    let groups: Vec<(String, Vec<(f64, bool)>)> = report
        .scenarios
        .iter()
        .map(|s| {
            (
                s.scenario.clone(),
                report
                    .runs
                    .iter()
                    .filter(|r| r.scenario == s.scenario)
                    .map(|r| (r.seconds, r.succeeded()))
                    .collect(),
            )
        })
        .collect();
    let chart = TimesChart {
        title: &report.suite,
        groups: &groups,
    };
    let mut written = Vec::new();
    if let Some(dir) = args.out.or(suite.output) {
        let files = vec![
            (dir.join("report.json"), json.clone().into_bytes()),
            (dir.join("table.txt"), text.clone().into_bytes()),
            (dir.join("times.png"), times_bytes(&chart, Format::Png)?),
            (dir.join("times.svg"), times_bytes(&chart, Format::Svg)?),
        ];
        written = write_outputs(files).context("writing the bench report")?;
    }
    if args.json {
        return Ok(json);
    }
    let mut out = text;
    for p in written {
        let _ = writeln!(out, "wrote {}", p.display());
    }
    Ok(out)
}
