//! Success rate and planning time of the single-stance demo scenarios over many seeds.
//!
//!     cargo run --release --example scenario_bench -- [--seeds 100] [--only door]
//!         [--plan-fraction F] [--max-step D] [--planner rrt|prm|both]
//!         [--sampling-margin M|none] [--shortcuts N] [--segment-share S]
//!         [--plan-margin M|none] [--plan-clearance C]
//!
//! Scenarios: `free` (the bar-slide arm and goal with no grip: a free query), `door`, `lever`,
//! `bar_slide`, `carry`. For each scenario and seed 1..=N: `plan_motion` with default
//! settings; prints successes, median and 95th percentile of the planning stage and of the
//! whole pipeline (plan, densify, time, resample, verify), and the mean planner work.

use std::time::Duration;

use clamber::demo::{bar_slide, carry, door, lever};
use clamber::motion::{plan_motion, MotionSettings, PlannerChoice};
use clamber::scenario::Scenario;
use clamber::scene::Stance;

/// A demo scenario's builder.
type Builder = fn() -> Result<Scenario, clamber::demo::door::DemoError>;

fn percentile(sorted: &[Duration], p: f64) -> Duration {
    if sorted.is_empty() {
        return Duration::ZERO;
    }
    // Nearest rank (common practice).
    let rank = ((p * sorted.len() as f64).ceil() as usize).clamp(1, sorted.len());
    sorted[rank - 1]
}

/// A free query for the same planner code: the bar-slide arm, start and goal, with no grip
/// held (the C-space is the joint box; the ball and the rail are still obstacles).
fn free_arm() -> Result<Scenario, clamber::demo::door::DemoError> {
    let mut s = bar_slide::scenario()?;
    s.name = "free".into();
    s.start.stance = Stance::new();
    Ok(s)
}

/// A number, or `none` for a setting that can be off.
fn optional(v: &str) -> anyhow::Result<Option<f64>> {
    Ok(if v == "none" { None } else { Some(v.parse()?) })
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

fn main() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let mut seeds = 100u64;
    let mut only: Option<String> = None;
    let mut planners = vec![PlannerChoice::RrtConnect, PlannerChoice::LazyPrm];
    let mut settings = MotionSettings::default();
    let mut it = args.iter();
    while let Some(flag) = it.next() {
        let mut value = || {
            it.next()
                .map(String::as_str)
                .ok_or_else(|| anyhow::anyhow!("{flag} needs a value"))
        };
        match flag.as_str() {
            "--seeds" => seeds = value()?.parse()?,
            "--only" => only = Some(value()?.to_string()),
            "--segment-share" => settings.segment_share = value()?.parse()?,
            "--plan-fraction" => settings.plan_fraction = value()?.parse()?,
            "--max-step" => settings.max_step = value()?.parse()?,
            "--sampling-margin" => settings.sampling_margin = optional(value()?)?,
            "--plan-margin" => settings.plan_margin = optional(value()?)?,
            "--plan-clearance" => settings.plan_clearance = value()?.parse()?,
            "--shortcuts" => settings.shortcut_attempts = value()?.parse()?,
            "--planner" => {
                planners = match value()? {
                    "rrt" => vec![PlannerChoice::RrtConnect],
                    "prm" => vec![PlannerChoice::LazyPrm],
                    "both" => vec![PlannerChoice::RrtConnect, PlannerChoice::LazyPrm],
                    _ => anyhow::bail!("--planner needs rrt, prm or both"),
                }
            }
            other => anyhow::bail!(
                "unknown argument `{other}` (see the options at the top of this file)"
            ),
        }
    }
    let builders: Vec<(&str, Builder)> = vec![
        ("free", free_arm),
        ("door", door::scenario),
        ("lever", lever::scenario),
        ("bar_slide", bar_slide::scenario),
        ("carry", carry::scenario),
    ];
    println!("settings: {settings:?}");
    println!("| scenario | planner | success | planning median | planning p95 | pipeline median | pipeline p95 | mean samples | mean projections | mean collision checks | mean duration (s) |");
    println!("|---|---|---|---|---|---|---|---|---|---|---|");
    for ((name, build), planner) in builders
        .iter()
        .flat_map(|b| planners.iter().map(move |p| (*b, *p)))
    {
        let mut settings = settings;
        settings.planner = planner;
        if only.as_deref().is_some_and(|o| o != name) {
            continue;
        }
        let base = build()?;
        let (mut plan_t, mut total_t) = (Vec::new(), Vec::new());
        let (mut ok, mut samples, mut projections, mut checks, mut duration) =
            (0u64, 0usize, 0usize, 0usize, 0.0);
        let mut failures = Vec::new();
        for seed in 1..=seeds {
            let mut s = base.clone();
            s.limits.seed = seed;
            match plan_motion(&s, &settings) {
                Ok(m) => {
                    ok += 1;
                    plan_t.push(m.stats.times.planning);
                    total_t.push(m.stats.times.total);
                    samples += m.stats.planner_samples;
                    projections += m.stats.projections;
                    checks += m.stats.collision_checks;
                    duration += m.stats.duration;
                }
                Err(e) => failures.push(format!("seed {seed}: {e}")),
            }
        }
        plan_t.sort();
        total_t.sort();
        let n = ok.max(1) as f64;
        println!(
            "| {name} | {planner:?} | {ok}/{seeds} | {:.1} ms | {:.1} ms | {:.1} ms | {:.1} ms | {:.0} | {:.0} | {:.0} | {:.2} |",
            ms(percentile(&plan_t, 0.5)),
            ms(percentile(&plan_t, 0.95)),
            ms(percentile(&total_t, 0.5)),
            ms(percentile(&total_t, 0.95)),
            samples as f64 / n,
            projections as f64 / n,
            checks as f64 / n,
            duration / n,
        );
        for f in failures.iter().take(5) {
            eprintln!("  {name} {planner:?} {f}");
        }
    }
    Ok(())
}
