//! The catalogue of malformed scenario files (`tests/data/bad_scenarios/`): each must be
//! rejected with a typed error at the line and column listed in `INDEX.toml`, with the
//! listed message fragment, and without a panic.

use std::path::{Path, PathBuf};

use clamber::scenario_file::{load_scenario, parse_scenario, ScenarioFileError};
use serde::Deserialize;

#[derive(Deserialize)]
struct Index {
    case: Vec<Case>,
}

#[derive(Deserialize)]
struct Case {
    file: String,
    line: usize,
    column: usize,
    message: String,
}

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/bad_scenarios")
}

fn index() -> Index {
    let text = std::fs::read_to_string(dir().join("INDEX.toml")).expect("INDEX.toml");
    toml::from_str(&text).expect("INDEX.toml parses")
}

#[test]
fn catalogue_has_at_least_twenty_cases_and_every_file_is_listed() {
    let idx = index();
    assert!(idx.case.len() >= 20, "{} cases", idx.case.len());
    let mut listed: Vec<&str> = idx.case.iter().map(|c| c.file.as_str()).collect();
    listed.sort_unstable();
    let mut on_disk: Vec<String> = std::fs::read_dir(dir())
        .expect("dir")
        .filter_map(|e| {
            let name = e.ok()?.file_name().to_string_lossy().into_owned();
            name.ends_with(".scenario.toml").then_some(name)
        })
        .collect();
    on_disk.sort_unstable();
    assert_eq!(listed, on_disk, "INDEX.toml and the files disagree");
}

#[test]
fn each_malformed_file_reports_its_line_column_and_message() {
    let mut failures = Vec::new();
    for case in index().case {
        let path = dir().join(&case.file);
        let result = std::panic::catch_unwind(|| load_scenario(&path));
        let outcome = match result {
            Err(_) => Err("panicked".to_string()),
            Ok(Ok(_)) => Err("was accepted".to_string()),
            Ok(Err(e)) => Ok(e),
        };
        let e: ScenarioFileError = match outcome {
            Ok(e) => e,
            Err(what) => {
                failures.push(format!("{}: {what}", case.file));
                continue;
            }
        };
        let text = e.to_string();
        if e.position() != Some((case.line, case.column)) {
            failures.push(format!(
                "{}: at {:?}, expected ({}, {}): {text}",
                case.file,
                e.position(),
                case.line,
                case.column
            ));
        }
        if !text.contains(&case.message) {
            failures.push(format!(
                "{}: message lacks {:?}: {text}",
                case.file, case.message
            ));
        }
        // The rendered message starts with the file and the position.
        let prefix = format!("{}:{}:{}: ", path.display(), case.line, case.column);
        if !text.starts_with(&prefix) {
            failures.push(format!(
                "{}: message does not start with {prefix:?}: {text}",
                case.file
            ));
        }
        if e.path() != path {
            failures.push(format!("{}: names {:?}", case.file, e.path()));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn value_errors_name_their_field() {
    let e = load_scenario(&dir().join("negative_tolerance.scenario.toml")).expect_err("rejected");
    assert_eq!(e.field(), Some("tolerance"));
    let e = load_scenario(&dir().join("handle_missing_link.scenario.toml")).expect_err("rejected");
    assert_eq!(e.field(), Some("link"));
    let e = load_scenario(&dir().join("stance_missing_hold.scenario.toml")).expect_err("rejected");
    assert_eq!(e.field(), Some("stance.hand"));
}

#[test]
fn missing_scenario_file_is_an_io_error() {
    let e = load_scenario(&dir().join("does_not_exist.scenario.toml")).expect_err("rejected");
    assert!(matches!(e, ScenarioFileError::Io { .. }), "{e:?}");
    assert_eq!(e.position(), None);
}

/// Every line of a bundled scenario deleted, or its value replaced by values of every other
/// type: the reader never panics, and each error points inside the file.
#[test]
fn mutated_files_never_panic_and_errors_point_inside_the_file() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/sevenfold_rail.scenario.toml");
    let text = std::fs::read_to_string(&path).expect("bundled scenario");
    let lines: Vec<&str> = text.lines().collect();
    let replacements = [
        "5",
        "-1",
        "0",
        "\"x\"",
        "\"\"",
        "nan",
        "-inf",
        "[1]",
        "[1, 2, 3]",
        "[\"a\", \"b\", \"c\"]",
        "{}",
        "{ joint1 = 1 }",
        "true",
        "1979-05-27",
        "9223372036854775807",
        "1e308",
    ];
    let mut variants = Vec::new();
    for i in 0..lines.len() {
        let mut v = lines.clone();
        v.remove(i);
        variants.push(v.join("\n"));
        if let Some((key, _)) = lines[i].split_once(" = ") {
            for r in replacements {
                let mut v = lines.clone();
                let line = format!("{key} = {r}");
                v[i] = &line;
                variants.push(v.join("\n"));
            }
        }
    }
    assert!(variants.len() > 200, "{} variants", variants.len());
    let (mut accepted, mut rejected) = (0, 0);
    for variant in &variants {
        let n_lines = variant.lines().count().max(1);
        let result = std::panic::catch_unwind(|| parse_scenario(variant, &path));
        match result {
            Err(_) => panic!("reader panicked on:\n{variant}"),
            Ok(Ok(_)) => accepted += 1,
            Ok(Err(e)) => {
                rejected += 1;
                let (line, column) = e.position().expect("a parse error has a place");
                assert!(
                    (1..=n_lines + 1).contains(&line) && column >= 1,
                    "{e} points outside the file"
                );
            }
        }
    }
    // Most mutations break something; some (a comment deleted, a changed seed) do not.
    assert!(
        rejected > accepted,
        "{rejected} rejected, {accepted} accepted"
    );
}
