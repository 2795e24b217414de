//! The binary with scenario files: `clamber scenario`, exit codes as documented in
//! `docs/cli.md`, `--json` errors with their place, `--quiet`, and shell completions.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

fn clamber(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_clamber"))
        .args(args)
        .output()
        .expect("run the clamber binary")
}

fn text(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes).into_owned()
}

fn path(rel: &str) -> String {
    repo(rel).to_str().expect("utf-8 path").to_string()
}

/// The exit-code table of docs/cli.md: rows `| code | meaning |` under "## Exit codes".
fn documented_exit_codes() -> Vec<(i32, String)> {
    let doc = std::fs::read_to_string(repo("docs/cli.md")).expect("docs/cli.md");
    let section = doc
        .split("## Exit codes")
        .nth(1)
        .expect("docs/cli.md has an Exit codes section");
    section
        .lines()
        .take_while(|l| !l.starts_with("## "))
        .filter_map(|l| {
            let cells: Vec<&str> = l.split('|').map(str::trim).collect();
            let code = cells.get(1)?.parse::<i32>().ok()?;
            Some((code, cells.get(2)?.to_string()))
        })
        .collect()
}

fn code_for(meaning_fragment: &str) -> i32 {
    documented_exit_codes()
        .into_iter()
        .find(|(_, m)| m.contains(meaning_fragment))
        .unwrap_or_else(|| panic!("docs/cli.md documents no code for {meaning_fragment:?}"))
        .0
}

#[test]
fn help_lists_the_documented_exit_codes() {
    let out = clamber(&["--help"]);
    assert!(out.status.success());
    let help = text(&out.stdout);
    let codes = documented_exit_codes();
    assert!(codes.len() >= 6, "{codes:?}");
    let mut seen = std::collections::BTreeSet::new();
    for (code, _) in &codes {
        assert!(seen.insert(*code), "code {code} documented twice");
        assert!(
            help.lines()
                .any(|l| l.trim_start().starts_with(&format!("{code}  "))),
            "--help does not list exit code {code}:\n{help}"
        );
    }
}

#[test]
fn scenario_command_describes_a_good_file() {
    let out = clamber(&["scenario", &path("scenarios/sevenfold_rail.scenario.toml")]);
    let stdout = text(&out.stdout);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    assert!(
        stdout.contains("scenario: sevenfold-rail-to-peg"),
        "{stdout}"
    );
    assert!(
        stdout.contains("holds: rail (bar), peg (point)"),
        "{stdout}"
    );
    assert!(stdout.contains("start: stance hand@rail"), "{stdout}");
    assert!(stdout.contains("goal: hand on peg"), "{stdout}");
    assert!(stdout.contains("seed 7"), "{stdout}");
}

#[test]
fn scenario_command_json_matches_the_library() {
    let file = repo("scenarios/sevenfold_lever.scenario.toml");
    let out = clamber(&["scenario", "--json", file.to_str().expect("utf-8")]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON on stdout");
    let f = clamber::scenario_file::load_scenario(&file).expect("loads");
    assert_eq!(v["nq"], f.scenario.robot.nq());
    assert_eq!(v["passive_dof"], 1);
    assert_eq!(v["mechanisms"][0], "floor_lever");
    let residual = v["start_residual"].as_f64().expect("number");
    assert!(residual <= f.scenario.limits.tolerance, "{residual}");
}

#[test]
fn bad_scenario_exits_with_the_bad_input_code_and_shows_the_line() {
    let file = path("tests/data/bad_scenarios/negative_tolerance.scenario.toml");
    let out = clamber(&["scenario", &file]);
    assert_eq!(out.status.code(), Some(code_for("malformed")));
    let stderr = text(&out.stderr);
    // The snippet shows the offending line and the message.
    assert!(stderr.contains("tolerance = -1e-6"), "{stderr}");
    assert!(
        stderr.contains("expected a number greater than 0"),
        "{stderr}"
    );
    assert!(stderr.contains(":12:13"), "{stderr}");
    assert!(out.stdout.is_empty());
}

#[test]
fn error_in_the_robot_file_is_shown_in_both_files() {
    // A scenario whose robot file is itself malformed: both places are reported.
    let dir = tempfile::tempdir().expect("temp dir");
    let robot = dir.path().join("broken.toml");
    std::fs::write(&robot, "[robot]\nname = \"broken\"\n\n[[link]]\nname = 5\n").expect("write");
    let scenario = dir.path().join("s.scenario.toml");
    std::fs::write(&scenario, "robot = \"broken.toml\"\n[goal]\nq = {}\n").expect("write");
    let out = clamber(&["scenario", "--json", scenario.to_str().expect("utf-8")]);
    assert_eq!(out.status.code(), Some(code_for("malformed")));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON error");
    let places = v["error"]["places"].as_array().expect("places");
    assert_eq!(places.len(), 2, "{v:#}");
    assert_eq!(places[0]["line"], 1);
    assert_eq!(places[0]["column"], 9);
    assert_eq!(places[1]["line"], 5);
    assert_eq!(places[1]["column"], 8);
    assert!(places[1]["file"]
        .as_str()
        .expect("file")
        .ends_with("broken.toml"));
}

#[test]
fn json_error_carries_place_field_and_code() {
    let file = path("tests/data/bad_scenarios/handle_missing_link.scenario.toml");
    let out = clamber(&["--json", "scenario", &file]);
    let code = code_for("malformed");
    assert_eq!(out.status.code(), Some(code));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON error");
    assert_eq!(v["error"]["exit_code"], code);
    assert_eq!(v["error"]["field"], "link");
    assert_eq!(v["error"]["places"][0]["line"], 7);
    assert_eq!(v["error"]["places"][0]["column"], 8);
}

#[test]
fn quiet_prints_nothing_on_success() {
    let out = clamber(&[
        "scenario",
        "-q",
        &path("scenarios/sevenfold_rail.scenario.toml"),
    ]);
    assert_eq!(out.status.code(), Some(0));
    assert!(out.stdout.is_empty(), "{}", text(&out.stdout));
    assert!(out.stderr.is_empty(), "{}", text(&out.stderr));
}

#[test]
fn usage_error_has_its_own_code() {
    let out = clamber(&["scenario"]);
    assert_eq!(out.status.code(), Some(code_for("command line")));
    let out = clamber(&["--quiet", "--verbose", "robot", "x.toml"]);
    assert_eq!(out.status.code(), Some(code_for("command line")));
}

#[test]
fn missing_robot_file_for_robot_command_is_bad_input() {
    let out = clamber(&["robot", "/nonexistent/robot.toml"]);
    assert_eq!(out.status.code(), Some(code_for("malformed")));
}

#[test]
fn completions_cover_the_commands() {
    for shell in ["bash", "zsh", "fish"] {
        let out = clamber(&["completions", shell]);
        assert_eq!(out.status.code(), Some(0), "{shell}");
        let script = text(&out.stdout);
        // Options appear as `--json` (bash, zsh) or `-l json` (fish).
        for word in [
            "scenario",
            "robot",
            "completions",
            "json",
            "quiet",
            "verbose",
        ] {
            assert!(script.contains(word), "{shell} completion lacks {word}");
        }
    }
}
