//! Interrupting `clamber plan` (SIGINT, as Ctrl-C sends) never leaves a partial output:
//! - interrupted while planning: the process ends with exit code 130 and no route, CSV,
//!   summary or plot file exists, and no temporary file is left in the output directory;
//! - interrupted while writing (made slow on purpose with the test hook
//!   `CLAMBER_TEST_WRITE_PAUSE_MS`): the writing finishes, every output is whole, then the
//!   process ends with 130; no temporary file is left.
//!
//! Exit code and behaviour as documented in docs/cli.md.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// A bundled scenario copied into `dir` with absolute robot path and every output in `dir`.
fn scenario_in(dir: &Path, name: &str, robot: &str) -> PathBuf {
    common::bundled_scenario_in(dir, name, robot, "s.scenario.toml", &[])
}

/// A 200-bar climbing corridor (`demo::climb::corridor`) with a 120 s time limit, written
/// as a scenario file whose outputs all point into `dir`: planning it takes seconds (7.3 s
/// measured in the test profile on the loaded development machine), far more than the
/// 0.5 s after which the test interrupts it.
fn long_corridor_in(dir: &Path) -> PathBuf {
    let mut sc = clamber::demo::climb::corridor(200).unwrap();
    sc.limits.time_limit = Duration::from_secs(120);
    let outputs = clamber::scenario_file::Outputs {
        route: Some("run.route.json".into()),
        trajectory: Some("run.csv".into()),
        summary: Some("run.txt".into()),
        picture: None,
        plots: Some("run.plots".into()),
    };
    let text = clamber::scenario_file::to_toml(&sc, &root().join("robots/brachia.toml"), &outputs)
        .unwrap();
    let p = dir.join("s.scenario.toml");
    std::fs::write(&p, text).unwrap();
    p
}

fn sigint(child: &Child) {
    use nix::sys::signal::{kill, Signal};
    use nix::unistd::Pid;
    let pid = i32::try_from(child.id()).unwrap();
    kill(Pid::from_raw(pid), Signal::SIGINT).unwrap();
}

fn wait_with_timeout(child: &mut Child, limit: Duration) -> Option<i32> {
    let t0 = Instant::now();
    loop {
        if let Some(st) = child.try_wait().unwrap() {
            return st.code();
        }
        if t0.elapsed() > limit {
            let _ = child.kill();
            panic!("the process did not end within {limit:?} of the interrupt");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// Every file under `dir` (recursively), relative names, sorted.
fn files(dir: &Path) -> Vec<String> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.push(p.strip_prefix(dir).unwrap().display().to_string());
            }
        }
    }
    out.sort();
    out
}

#[test]
fn sigint_while_planning_leaves_no_output_and_no_temporary_file() {
    let dir = tempfile::tempdir().unwrap();
    let file = long_corridor_in(dir.path());
    let mut child = Command::new(env!("CARGO_BIN_EXE_clamber"))
        .arg("plan")
        .arg(&file)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(500));
    assert!(
        child.try_wait().unwrap().is_none(),
        "the plan ended before the interrupt; the test needs a slower scenario"
    );
    sigint(&child);
    let code = wait_with_timeout(&mut child, Duration::from_secs(10));
    assert_eq!(code, Some(130));
    assert_eq!(
        files(dir.path()),
        ["s.scenario.toml"],
        "outputs or temporary files left"
    );
}

#[test]
fn sigint_while_writing_finishes_the_outputs_whole() {
    let dir = tempfile::tempdir().unwrap();
    let file = scenario_in(dir.path(), "sevenfold_rail", "sevenfold.toml");
    let mut child = Command::new(env!("CARGO_BIN_EXE_clamber"))
        .arg("plan")
        .arg(&file)
        .env("CLAMBER_TEST_WRITE_PAUSE_MS", "400")
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Wait for the first output (the route) to appear: the writing step has begun.
    let route = dir.path().join("run.route.json");
    let t0 = Instant::now();
    while !route.exists() {
        assert!(
            child.try_wait().unwrap().is_none(),
            "plan ended before writing"
        );
        assert!(
            t0.elapsed() < Duration::from_secs(300),
            "no route after 300 s"
        );
        std::thread::sleep(Duration::from_millis(10));
    }
    sigint(&child);
    let code = wait_with_timeout(&mut child, Duration::from_secs(30));
    assert_eq!(code, Some(130));
    let names = files(dir.path());
    assert!(
        !names.iter().any(|n| n.contains("clamber-partial")),
        "{names:?}"
    );
    // All of the run's outputs are there and whole.
    let mut expected: Vec<String> = ["run.csv", "run.route.json", "run.txt", "s.scenario.toml"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    for p in ["clearance", "joints", "residual"] {
        for e in ["png", "svg"] {
            expected.push(format!("run.plots/{p}.{e}"));
        }
    }
    expected.sort();
    assert_eq!(names, expected);
    let doc: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&route).unwrap()).unwrap();
    assert!(doc["legs"].as_array().is_some_and(|l| !l.is_empty()));
    let svg = std::fs::read_to_string(dir.path().join("run.plots/residual.svg")).unwrap();
    assert!(roxmltree::Document::parse(&svg).is_ok());
}
