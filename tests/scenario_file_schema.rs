//! `docs/scenario.schema.json` (the JSON Schema for editors), checked with the `jsonschema`
//! crate: every bundled scenario file is valid, malformed ones that a schema can catch are
//! not, and the schema's keys are the reader's keys.

use std::path::{Path, PathBuf};

use clamber::scenario_file as sf;
use serde_json::Value;

fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

fn schema() -> Value {
    let text = std::fs::read_to_string(repo("docs/scenario.schema.json")).expect("schema file");
    serde_json::from_str(&text).expect("schema is JSON")
}

/// A TOML file as the JSON value an editor's TOML support validates (NaN and infinities,
/// which JSON lacks, become null and fail every number rule).
fn as_json(path: &Path) -> Value {
    let text = std::fs::read_to_string(path).expect("read");
    let v: toml::Value = toml::from_str(&text).expect("valid TOML");
    serde_json::to_value(&v).expect("to JSON")
}

fn validator() -> jsonschema::Validator {
    jsonschema::validator_for(&schema()).expect("schema compiles")
}

#[test]
fn bundled_scenarios_are_valid() {
    let v = validator();
    let mut n = 0;
    for entry in std::fs::read_dir(repo("scenarios")).expect("scenarios/") {
        let path = entry.expect("entry").path();
        if !path.to_string_lossy().ends_with(".scenario.toml") {
            continue;
        }
        let doc = as_json(&path);
        let errors: Vec<String> = v.iter_errors(&doc).map(|e| e.to_string()).collect();
        assert!(errors.is_empty(), "{}: {errors:?}", path.display());
        n += 1;
    }
    assert!(n >= 2);
}

#[test]
fn malformed_files_fail_the_schema() {
    let v = validator();
    for file in [
        "unknown_hold_key",
        "unknown_output_key",
        "hold_type_unknown",
        "negative_tolerance",
        "negative_seed",
        "time_limit_string",
        "goal_two_kinds",
        "goal_empty",
        "bar_missing_end",
        "point_hold_with_bar_key",
        "nan_in_point_hold",
        "infinite_stride",
        "robot_wrong_type",
        "robot_key_missing",
        "goal_missing",
        "scene_not_a_table",
        "settle_not_boolean",
        "mechanism_unknown_key",
    ] {
        let path = repo(&format!("tests/data/bad_scenarios/{file}.scenario.toml"));
        let doc = as_json(&path);
        assert!(!v.is_valid(&doc), "{file} passed the schema");
    }
}

#[test]
fn a_valid_file_made_invalid_fails() {
    let v = validator();
    let mut doc = as_json(&repo("scenarios/sevenfold_rail.scenario.toml"));
    assert!(v.is_valid(&doc));
    doc["limits"]["stride"] = Value::from(0.0);
    assert!(!v.is_valid(&doc), "stride 0 accepted");
}

/// Property names of an object schema.
fn keys(schema: &Value, pointer: &str) -> Vec<String> {
    let mut k: Vec<String> = schema
        .pointer(pointer)
        .and_then(Value::as_object)
        .unwrap_or_else(|| panic!("no object at {pointer}"))
        .keys()
        .cloned()
        .collect();
    k.sort();
    k
}

fn sorted(words: &[&str]) -> Vec<String> {
    let mut k: Vec<String> = words.iter().map(|s| s.to_string()).collect();
    k.sort();
    k
}

#[test]
fn schema_keys_are_the_readers_keys() {
    let s = schema();
    for (pointer, reader) in [
        ("/properties", sf::FILE_KEYS),
        ("/$defs/scene/properties", sf::SCENE_KEYS),
        ("/$defs/obstacle/properties", sf::OBSTACLE_KEYS),
        ("/$defs/hold/properties", sf::HOLD_KEYS),
        ("/$defs/mechanism/properties", sf::MECHANISM_KEYS),
        ("/$defs/start/properties", sf::START_KEYS),
        ("/$defs/goal/properties", sf::GOAL_KEYS),
        ("/$defs/goal/properties/grip/properties", sf::GRIP_KEYS),
        ("/$defs/goal/properties/region/properties", sf::REGION_KEYS),
        ("/$defs/limits/properties", sf::LIMITS_KEYS),
        ("/$defs/outputs/properties", sf::OUTPUTS_KEYS),
    ] {
        assert_eq!(keys(&s, pointer), sorted(reader), "{pointer}");
    }
}
