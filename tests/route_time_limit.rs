//! Time limits: a route search given less time than it needs stops at its limit and says what
//! it reached so far. The bound checked is the limit plus 5 % plus a fixed allowance of
//! 0.25 s for the step that was running when the limit passed (a switch-pose search is not
//! interrupted; measured overshoot on the development machine: see docs/routes.md).

use std::time::{Duration, Instant};

use clamber::demo::climb::corridor;
use clamber::route::{plan_route, RouteError, RouteSettings};

#[test]
fn a_short_time_limit_ends_the_search_and_reports_the_furthest_stance() {
    // A 40-bar corridor needs about 75 switches; the fastest switches measured took about
    // 6 ms each, so no machine finishes it inside these limits (a 16-bar corridor was once
    // routed in 150 ms).
    let base = corridor(40).unwrap();
    for limit_ms in [30u64, 80, 150] {
        let mut sc = base.clone();
        let limit = Duration::from_millis(limit_ms);
        sc.limits.time_limit = limit;
        let t = Instant::now();
        let result = plan_route(&sc, &RouteSettings::default());
        let elapsed = t.elapsed();
        println!("limit {limit:?}: ended after {elapsed:?}");
        let bound = limit.mul_f64(1.05) + Duration::from_millis(250);
        assert!(
            elapsed <= bound,
            "limit {limit:?} but planning took {elapsed:?} (bound {bound:?})"
        );
        match result {
            Err(RouteError::NoRoute(ex)) => {
                assert!(ex.timed_out, "the explanation says the time limit ended it");
                assert!(ex.to_string().contains("time limit"));
                assert!(ex.stances_reached >= 1);
                assert!(!ex.furthest.is_empty(), "the furthest stance is named");
            }
            Ok(r) => panic!(
                "a 40-bar corridor route in {limit:?}? ({} switches)",
                r.switches.len()
            ),
            Err(e) => panic!("unexpected error {e}"),
        }
    }
}

/// The command line's `--time-limit` replaces the scenario's; running out is exit code 4
/// (no route, docs/cli.md) with the explanation, and no output file is written.
#[test]
fn plan_time_limit_flag_ends_with_no_route_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let route = dir.path().join("r.json");
    let scenario = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/scenarios/tessel_corridor.scenario.toml"
    );
    let t = Instant::now();
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_clamber"))
        .args(["plan", scenario, "--time-limit", "0.02", "-o"])
        .arg(&route)
        .output()
        .unwrap();
    println!("ended after {:?}", t.elapsed());
    let stderr = String::from_utf8_lossy(&out.stderr);
    println!("{stderr}");
    assert_eq!(out.status.code(), Some(4), "exit code 4 (no route)");
    assert!(
        stderr.contains("time limit"),
        "says the time limit ended it"
    );
    assert!(!route.exists(), "no route file");
    for bad in ["0", "-1", "nan", "soon"] {
        let out = std::process::Command::new(env!("CARGO_BIN_EXE_clamber"))
            .args(["plan", scenario, &format!("--time-limit={bad}")])
            .output()
            .unwrap();
        assert_eq!(
            out.status.code(),
            Some(2),
            "usage error for --time-limit {bad}"
        );
        assert!(String::from_utf8_lossy(&out.stderr).contains("positive number of seconds"));
    }
}
