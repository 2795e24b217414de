//! The malformed-scenario catalogue (`tests/data/bad_scenarios/INDEX.toml`) through the
//! binary, as a user meets it: `clamber plan FILE` exits with the code docs/cli.md gives for
//! malformed input, prints the file's line and column and the message, does not panic, and
//! writes no output file (neither the `-o`/`--plots` paths given nor the file's own outputs).

use std::path::{Path, PathBuf};
use std::process::Command;

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

/// The exit code docs/cli.md documents for malformed input.
fn malformed_code() -> i32 {
    let doc = std::fs::read_to_string(repo("docs/cli.md")).unwrap();
    doc.lines()
        .filter_map(|l| {
            let cells: Vec<&str> = l.split('|').map(str::trim).collect();
            let code = cells.get(1)?.parse::<i32>().ok()?;
            cells.get(2)?.contains("malformed").then_some(code)
        })
        .next()
        .expect("docs/cli.md documents a code for malformed input")
}

#[test]
fn every_catalogue_file_fails_plan_with_its_place_and_writes_nothing() {
    let index: toml::Table = toml::from_str(
        &std::fs::read_to_string(repo("tests/data/bad_scenarios/INDEX.toml")).unwrap(),
    )
    .unwrap();
    let cases = index["case"].as_array().unwrap();
    assert!(cases.len() >= 20, "{} cases", cases.len());
    let code = malformed_code();
    let own_outputs = repo("tests/data/bad_scenarios/out");
    for case in cases {
        let file = case["file"].as_str().unwrap();
        let (line, column) = (
            case["line"].as_integer().unwrap(),
            case["column"].as_integer().unwrap(),
        );
        let message = case["message"].as_str().unwrap();
        let out_dir = tempfile::tempdir().unwrap();
        let path = repo(&format!("tests/data/bad_scenarios/{file}"));
        let out = Command::new(env!("CARGO_BIN_EXE_clamber"))
            .arg("plan")
            .arg(&path)
            .arg("-o")
            .arg(out_dir.path().join("route.json"))
            .arg("--plots")
            .arg(out_dir.path().join("plots"))
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(code), "{file}: {stderr}");
        assert!(!stderr.contains("panicked"), "{file}: {stderr}");
        assert!(
            stderr.contains(&format!("{file}:{line}:{column}")),
            "{file}: expected line {line}, column {column} in\n{stderr}"
        );
        assert!(
            stderr.contains(message),
            "{file}: expected {message:?} in\n{stderr}"
        );
        let left: Vec<_> = std::fs::read_dir(out_dir.path()).unwrap().collect();
        assert!(left.is_empty(), "{file}: wrote {left:?}");
        assert!(!own_outputs.exists(), "{file}: wrote its own outputs");
    }
}
