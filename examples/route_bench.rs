//! Route planning benchmark on the climbing corridor (`demo::climb::corridor`):
//! success over many seeds, median and 95th-percentile planning time, cost per switch for
//! corridors of several lengths, and failed switch attempts with and without the search's
//! feedback.
//!
//! Run: `cargo run --release --example route_bench [-- seeds [bars...]]`
//! (defaults: 100 seeds on the 10-bar corridor; 20 seeds each for 4, 8 and 16 bars).

use std::time::{Duration, Instant};

use clamber::demo::climb::corridor;
use clamber::route::{plan_route, RouteSettings};

struct Run {
    ok: bool,
    seconds: f64,
    switches: usize,
    failed: usize,
    attempts: usize,
    pose_s: f64,
    leg_s: f64,
}

fn run(bars: usize, seed: u64, feedback: bool) -> Run {
    let mut sc = corridor(bars).expect("corridor builds");
    sc.limits.seed = seed;
    sc.limits.time_limit = Duration::from_secs(30);
    let settings = RouteSettings {
        feedback,
        ..Default::default()
    };
    let t = Instant::now();
    let r = plan_route(&sc, &settings);
    let seconds = t.elapsed().as_secs_f64();
    match r {
        Ok(r) => Run {
            ok: true,
            seconds,
            switches: r.switches.len(),
            failed: r.stats.search.failed_switch_attempts,
            attempts: r.stats.search.switch_attempts,
            pose_s: r.stats.search.switch_pose_seconds,
            leg_s: r.stats.search.leg_seconds,
        },
        Err(e) => {
            eprintln!("bars {bars} seed {seed} feedback {feedback}: {e}");
            Run {
                ok: false,
                seconds,
                switches: 0,
                failed: 0,
                attempts: 0,
                pose_s: 0.0,
                leg_s: 0.0,
            }
        }
    }
}

fn percentile(sorted: &[f64], p: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let i = ((p * (sorted.len() - 1) as f64).round() as usize).min(sorted.len() - 1);
    sorted[i]
}

fn summary(label: &str, runs: &[Run]) {
    let mut t: Vec<f64> = runs.iter().filter(|r| r.ok).map(|r| r.seconds).collect();
    t.sort_by(f64::total_cmp);
    let ok = runs.iter().filter(|r| r.ok).count();
    let switches: usize = runs.iter().filter(|r| r.ok).map(|r| r.switches).sum();
    let total: f64 = t.iter().sum();
    let failed: usize = runs.iter().map(|r| r.failed).sum();
    let attempts: usize = runs.iter().map(|r| r.attempts).sum();
    let pose: f64 = runs.iter().map(|r| r.pose_s).sum();
    let leg: f64 = runs.iter().map(|r| r.leg_s).sum();
    println!(
        "{label:<28} {ok:>4}/{:<4} median {:>7.3} s  p95 {:>7.3} s  switches/route {:>5.1}  \
         s/switch {:>7.4}  attempts {attempts:>5}  failed {failed:>5}  (poses {pose:.1} s, legs {leg:.1} s)",
        runs.len(),
        percentile(&t, 0.5),
        percentile(&t, 0.95),
        switches as f64 / ok.max(1) as f64,
        total / switches.max(1) as f64,
    );
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let seeds: u64 = args.first().and_then(|s| s.parse().ok()).unwrap_or(100);
    let sizes: Vec<usize> = if args.len() > 1 {
        args[1..].iter().filter_map(|s| s.parse().ok()).collect()
    } else {
        vec![4, 8, 16]
    };
    println!("route_bench: {seeds} seeds on corridor(10), feedback on and off; min(seeds, 20) seeds per size");
    // ROUTE_BENCH_FEEDBACK=on runs only the feedback-on setting (quick runs).
    let only_on = std::env::var("ROUTE_BENCH_FEEDBACK").is_ok_and(|v| v == "on");
    let modes: &[bool] = if only_on { &[true] } else { &[true, false] };
    for &feedback in modes {
        let runs: Vec<Run> = (1..=seeds).map(|s| run(10, s, feedback)).collect();
        summary(
            &format!(
                "corridor 10, feedback {}",
                if feedback { "on" } else { "off" }
            ),
            &runs,
        );
    }
    for &n in &sizes {
        let runs: Vec<Run> = (1..=seeds.min(20)).map(|s| run(n, s, true)).collect();
        summary(&format!("corridor {n}, feedback on"), &runs);
    }
}
