//! `clamber bench` end to end: the same suite on 1 and 2 worker threads gives the same
//! outcome and the same route digest for every (scenario, seed); the report, the table and
//! the times plot are written; per-scenario figures follow from the runs; bad suites are
//! rejected with exit code 3 and the file and line.

use std::path::{Path, PathBuf};
use std::process::Command;

use clamber::plot::quantile;
use serde_json::Value;

fn suite() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/bench/quick.suite.toml")
}

fn bench(jobs: usize, out: &Path) -> Value {
    let o = Command::new(env!("CARGO_BIN_EXE_clamber"))
        .args(["bench", "--quiet", "--jobs", &jobs.to_string(), "--out"])
        .arg(out)
        .arg(suite())
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(
        o.stdout.is_empty(),
        "--quiet printed {}",
        String::from_utf8_lossy(&o.stdout)
    );
    serde_json::from_str(&std::fs::read_to_string(out.join("report.json")).unwrap()).unwrap()
}

/// (scenario, seed, outcome, digest) of every run.
fn results(report: &Value) -> Vec<(String, u64, String, Option<String>)> {
    report["runs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            (
                r["scenario"].as_str().unwrap().to_string(),
                r["seed"].as_u64().unwrap(),
                r["outcome"].as_str().unwrap().to_string(),
                r["digest"].as_str().map(str::to_string),
            )
        })
        .collect()
}

#[test]
fn one_and_two_jobs_give_the_same_results_and_the_report_is_complete() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("one"), dir.path().join("two"));
    let one = bench(1, &a);
    let two = bench(2, &b);
    assert_eq!(one["jobs"], 1);
    assert_eq!(two["jobs"], 2);
    let (ra, rb) = (results(&one), results(&two));
    assert_eq!(ra.len(), 2 * 3, "2 scenarios x 3 seeds");
    assert_eq!(ra, rb, "1 job and 2 jobs disagree");
    // Every run planned something (the suite is chosen to be solvable), and different
    // seeds of the route scenario are different runs (seed 1..3 in order).
    for (scenario, _, outcome, digest) in &ra {
        assert!(
            digest.as_ref().is_some_and(|d| d.len() == 64),
            "{scenario}: {outcome}"
        );
    }
    assert_eq!(
        ra.iter().map(|r| r.1).collect::<Vec<_>>(),
        [1, 2, 3, 1, 2, 3]
    );
    assert!(ra.iter().all(|r| r.2 == "route"), "{ra:?}");
    // Different seeds plan different routes (the digest sees the route, not just the file).
    assert_ne!(ra[3].3, ra[4].3);

    // Per-scenario figures follow from the runs.
    for s in one["scenarios"].as_array().unwrap() {
        let name = s["scenario"].as_str().unwrap();
        let mut times: Vec<f64> = one["runs"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|r| r["scenario"] == name)
            .map(|r| r["seconds"].as_f64().unwrap())
            .collect();
        assert_eq!(s["runs"], 3);
        assert_eq!(s["successes"], 3);
        assert_eq!(s["median_seconds"].as_f64(), quantile(&mut times, 0.5));
        assert_eq!(s["p95_seconds"].as_f64(), quantile(&mut times, 0.95));
    }

    // Table and plots.
    let table = std::fs::read_to_string(a.join("table.txt")).unwrap();
    assert!(
        table.contains("median s") && table.contains("sevenfold-rail-to-peg"),
        "{table}"
    );
    assert_eq!(table.matches(" route ").count(), 6, "{table}");
    let png = std::fs::read(a.join("times.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    let svg = std::fs::read_to_string(a.join("times.svg")).unwrap();
    assert!(roxmltree::Document::parse(&svg).is_ok());
    let mut names: Vec<String> = std::fs::read_dir(&a)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(
        names,
        ["report.json", "table.txt", "times.png", "times.svg"]
    );
}

/// Quantiles by linear interpolation between order statistics: the worked values are
/// those of numpy.percentile's default ("linear", Hyndman and Fan's type 7):
/// percentile([1, 2, 3, 4], 50) = 2.5, percentile([1, 2, 3, 4], 95) = 3.85,
/// percentile([7], 95) = 7.
#[test]
fn quantiles_match_the_type_7_rule() {
    assert_eq!(quantile(&mut [4.0, 1.0, 3.0, 2.0], 0.5), Some(2.5));
    let p95 = quantile(&mut [4.0, 1.0, 3.0, 2.0], 0.95).unwrap();
    assert!((p95 - 3.85).abs() < 1e-12, "{p95}");
    assert_eq!(quantile(&mut [7.0], 0.95), Some(7.0));
    assert_eq!(quantile(&mut [], 0.5), None);
}

#[test]
fn a_bad_suite_is_rejected_with_its_file_and_line() {
    let dir = tempfile::tempdir().unwrap();
    for (text, expect) in [
        ("scenarios = []\nseeds = 2\n", "at least one scenario"),
        ("scenarios = [\"a.toml\"]\nseeds = 0\n", "`seeds`"),
        ("scenarios = [\"a.toml\"]\nseeds = 2\nsedes = 3\n", "3:1"),
        ("scenarios = [\"a.toml\"]\nseeds = \"two\"\n", "2:9"),
        (
            "scenarios = [\"a.toml\"]\nseeds = 2\ntime_limit = -1\n",
            "`time_limit`",
        ),
        (
            "scenarios = [\"missing.scenario.toml\"]\nseeds = 2\n",
            "missing.scenario.toml",
        ),
    ] {
        let p = dir.path().join("bad.suite.toml");
        std::fs::write(&p, text).unwrap();
        let o = Command::new(env!("CARGO_BIN_EXE_clamber"))
            .args(["bench", "--out"])
            .arg(dir.path().join("out"))
            .arg(&p)
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(3), "{text}: {err}");
        assert!(err.contains(expect), "{text}: expected `{expect}` in {err}");
        assert!(!dir.path().join("out").exists(), "{text}: output written");
    }
}
