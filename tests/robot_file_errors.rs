//! Robot TOML files: every bad file in `tests/data/bad/` gives a typed error naming the
//! file, the line and column (1-based) and the key at fault; good files load with the
//! expected structure.
//!
//! The expected positions were worked out from the fixture text itself (the line and
//! character column of the offending value, key or table header), not copied from the
//! loader's output.

use std::path::{Path, PathBuf};

use clamber::model::{JointKind, ModelError};
use clamber::robot_file::{load_robot, RobotFileError};

fn data(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data")
        .join(rel)
}

fn load_bad(name: &str) -> RobotFileError {
    let path = data(&format!("bad/{name}"));
    match load_robot(&path) {
        Ok(r) => panic!("{name}: loaded robot `{}`, expected an error", r.name()),
        Err(e) => {
            let msg = e.to_string();
            assert!(
                msg.contains(&path.display().to_string()),
                "{name}: message does not name the file: {msg}"
            );
            e
        }
    }
}

/// The error is at `line:column`, the message shows that position, and it names `field`:
/// in the `field` member for model and mesh errors, in backticks in the message for
/// syntax errors (that variant has no field member).
fn assert_at(e: &RobotFileError, line: usize, column: usize, field: &str) {
    assert_eq!(e.position(), Some((line, column)), "wrong position in: {e}");
    let msg = e.to_string();
    assert!(
        msg.contains(&format!(":{line}:{column}: ")),
        "position not shown in: {msg}"
    );
    match e {
        RobotFileError::Model { field: f, .. } | RobotFileError::Mesh { field: f, .. } => {
            assert_eq!(f, field, "wrong field in: {e}")
        }
        RobotFileError::Syntax { message, .. } => {
            assert!(
                message.contains(&format!("`{field}`")),
                "field `{field}` not named in: {e}"
            )
        }
        other => panic!("unexpected error kind: {other}"),
    }
}

fn model_source(e: &RobotFileError) -> &ModelError {
    match e {
        RobotFileError::Model { source, .. } => source,
        other => panic!("expected a model error, got: {other}"),
    }
}

fn syntax_message(e: &RobotFileError) -> &str {
    match e {
        RobotFileError::Syntax { message, .. } => message,
        other => panic!("expected a syntax error, got: {other}"),
    }
}

#[test]
fn missing_parent_link() {
    let e = load_bad("missing_parent_link.toml");
    assert!(
        matches!(model_source(&e), ModelError::UnknownLink { link, role: "parent", .. } if link == "l9"),
        "{e}"
    );
    assert_at(&e, 22, 10, "parent");
}

#[test]
fn cycle() {
    let e = load_bad("cycle.toml");
    assert!(
        matches!(model_source(&e), ModelError::Cycle { joint, .. } if joint == "ba"),
        "{e}"
    );
    assert_at(&e, 22, 10, "parent");
}

#[test]
fn duplicate_link_name() {
    let e = load_bad("duplicate_link.toml");
    assert!(
        matches!(model_source(&e), ModelError::DuplicateName { what: "link", name, first: 1, .. } if name == "arm"),
        "{e}"
    );
    // The second `name = "arm"` is indented by two spaces.
    assert_at(&e, 10, 10, "name");
}

#[test]
fn duplicate_joint_name() {
    let e = load_bad("duplicate_joint.toml");
    assert!(
        matches!(model_source(&e), ModelError::DuplicateName { what: "joint", name, .. } if name == "j1"),
        "{e}"
    );
    assert_at(&e, 19, 10, "name");
}

#[test]
fn lower_limit_above_upper() {
    let e = load_bad("limits_reversed.toml");
    assert!(
        matches!(model_source(&e), ModelError::LimitsReversed { lower, upper, .. } if *lower == 0.5 && *upper == 0.1),
        "{e}"
    );
    assert_at(&e, 17, 9, "lower");
}

#[test]
fn nan_value() {
    let e = load_bad("nan_value.toml");
    assert!(
        matches!(model_source(&e), ModelError::NotFinite { field: "xyz", value, .. } if value.is_nan()),
        "{e}"
    );
    // Points at the `nan` element itself, not at the start of the array.
    assert_at(&e, 15, 13, "xyz");
}

#[test]
fn infinite_value() {
    let e = load_bad("inf_value.toml");
    assert!(
        matches!(model_source(&e), ModelError::NotFinite { field: "radius", value, .. } if *value == f64::INFINITY),
        "{e}"
    );
    assert_at(&e, 9, 10, "radius");
}

#[test]
fn unknown_joint_type() {
    let e = load_bad("unknown_joint_type.toml");
    let m = syntax_message(&e);
    for word in [
        "\"hinge\"",
        "`revolute`",
        "`prismatic`",
        "`fixed`",
        "`floating`",
    ] {
        assert!(m.contains(word), "{word} missing from: {m}");
    }
    assert_at(&e, 12, 8, "type");
}

#[test]
fn zero_axis() {
    let e = load_bad("zero_axis.toml");
    assert!(
        matches!(model_source(&e), ModelError::ZeroAxis { joint, .. } if joint == "j1"),
        "{e}"
    );
    assert_at(&e, 15, 8, "axis");
}

#[test]
fn missing_mesh_file() {
    let e = load_bad("missing_mesh.toml");
    match &e {
        RobotFileError::Mesh { mesh, message, .. } => {
            // Resolved against the robot file's directory.
            assert_eq!(mesh, &data("bad/meshes/no_such_palm.stl"));
            assert!(message.contains("not found"), "{message}");
        }
        other => panic!("expected a mesh error, got: {other}"),
    }
    assert_at(&e, 9, 8, "file");
}

#[test]
fn malformed_toml() {
    let e = load_bad("syntax_error.toml");
    let m = syntax_message(&e);
    assert!(m.contains("unclosed array"), "{m}");
    // The parser notices at the end of line 10 (`xyz = [0.0, 0.0` is 15 characters).
    assert_eq!(e.position(), Some((10, 16)), "{e}");
}

#[test]
fn unknown_key_with_suggestion() {
    let e = load_bad("unknown_key.toml");
    let m = syntax_message(&e);
    assert!(m.contains("unknown key `radus` in [[link.shape]]"), "{m}");
    assert!(
        m.contains("`radius`, `length`, `size`"),
        "expected keys not listed: {m}"
    );
    assert!(m.ends_with("did you mean `radius`?"), "{m}");
    assert_at(&e, 9, 1, "radus");
}

#[test]
fn wrong_type() {
    let e = load_bad("wrong_type.toml");
    let m = syntax_message(&e);
    assert!(
        m.contains("`radius` expected a number, found a string"),
        "{m}"
    );
    assert_at(&e, 9, 10, "radius");
}

#[test]
fn axis_on_fixed_joint() {
    let e = load_bad("axis_on_fixed.toml");
    assert!(
        syntax_message(&e).contains("`axis` is not allowed on a fixed joint"),
        "{e}"
    );
    assert_at(&e, 15, 8, "axis");
}

#[test]
fn missing_required_field() {
    let e = load_bad("missing_required.toml");
    let m = syntax_message(&e);
    assert!(
        m.contains("joint `j1`: missing required key `child`"),
        "{m}"
    );
    // Points at the (indented) `[[joint]]` header of the table that lacks the key.
    assert_at(&e, 10, 3, "child");
}

#[test]
fn two_root_links() {
    let e = load_bad("two_roots.toml");
    assert!(
        matches!(model_source(&e), ModelError::ManyRoots { count: 2, names, .. } if names.contains("island")),
        "{e}"
    );
    assert_at(&e, 10, 8, "name");
}

#[test]
fn effector_on_unknown_link() {
    let e = load_bad("effector_unknown_link.toml");
    assert!(
        matches!(model_source(&e), ModelError::UnknownEffectorLink { effector, link, .. } if effector == "hand" && link == "palm"),
        "{e}"
    );
    assert_at(&e, 10, 8, "link");
}

#[test]
fn nonpositive_velocity() {
    let e = load_bad("nonpositive_velocity.toml");
    assert!(
        matches!(
            model_source(&e),
            ModelError::NotPositive {
                field: "velocity",
                ..
            }
        ),
        "{e}"
    );
    assert_at(&e, 16, 12, "velocity");
}

#[test]
fn floating_velocity_must_be_a_pair() {
    let e = load_bad("floating_scalar_velocity.toml");
    assert!(
        syntax_message(&e).contains("`velocity` expected an array of 2 numbers, found a number"),
        "{e}"
    );
    assert_at(&e, 15, 12, "velocity");
}

#[test]
fn box_needs_three_sizes() {
    let e = load_bad("box_two_sizes.toml");
    assert!(
        syntax_message(&e)
            .contains("`size` expected an array of 3 numbers, found an array of 2 items"),
        "{e}"
    );
    assert_at(&e, 9, 8, "size");
}

#[test]
fn ignored_pair_with_unknown_link() {
    let e = load_bad("ignore_unknown_link.toml");
    assert!(
        matches!(model_source(&e), ModelError::UnknownPairLink { link, .. } if link == "ghost"),
        "{e}"
    );
    // The second name of the pair: `ignore = [["base", "ghost"]]`.
    assert_at(&e, 6, 20, "ignore");
}

#[test]
fn link_written_as_single_table() {
    let e = load_bad("link_not_array.toml");
    let m = syntax_message(&e);
    assert!(
        m.contains("`link` expected an array of tables, written [[link]], found a single table"),
        "{m}"
    );
}

#[test]
fn two_parents() {
    let e = load_bad("two_parents.toml");
    assert!(
        matches!(model_source(&e), ModelError::TwoParents { link, .. } if link == "l2"),
        "{e}"
    );
    assert_at(&e, 28, 9, "child");
}

#[test]
fn key_not_taken_by_shape_type() {
    let e = load_bad("shape_key_wrong_type.toml");
    assert!(
        syntax_message(&e)
            .contains("`length` is not allowed on a sphere shape (it takes `radius`)"),
        "{e}"
    );
    assert_at(&e, 10, 10, "length");
}

#[test]
fn missing_robot_table() {
    let e = load_bad("no_robot_table.toml");
    assert!(
        syntax_message(&e).contains("missing required table [robot]"),
        "{e}"
    );
    assert_eq!(e.position(), Some((1, 1)));
}

#[test]
fn every_bad_file_is_an_error_without_panicking() {
    let dir = data("bad");
    let mut count = 0;
    let entries = std::fs::read_dir(&dir).expect("tests/data/bad exists");
    for entry in entries {
        let path = entry.expect("directory entry").path();
        if path.extension().and_then(|e| e.to_str()) != Some("toml") {
            continue;
        }
        count += 1;
        let result = std::panic::catch_unwind(|| {
            load_robot(&path).map_err(|e| (e.to_string(), e.position()))
        });
        match result {
            Ok(Ok(_)) => panic!("{} loaded without error", path.display()),
            Ok(Err((msg, position))) => {
                assert!(msg.contains(&path.display().to_string()), "{msg}");
                assert!(
                    position.is_some(),
                    "no position for {}: {msg}",
                    path.display()
                );
            }
            Err(_) => panic!("{} made the loader panic", path.display()),
        }
    }
    assert!(
        count >= 17,
        "only {count} bad files found in {}",
        dir.display()
    );
}

#[test]
fn three_link_robot_loads() {
    let r = load_robot(&data("toml/three_link.toml")).expect("three_link.toml loads");
    assert_eq!(r.name(), "tri");
    assert_eq!((r.nq(), r.nv()), (3, 3));
    let links: Vec<&str> = r.links().iter().map(|l| l.name.as_str()).collect();
    assert_eq!(links, ["base", "l1", "l2", "l3"]);
    let joints: Vec<&str> = r.joints().iter().map(|j| j.name.as_str()).collect();
    assert_eq!(joints, ["j1", "j2", "j3"]);
    assert_eq!(r.effectors().len(), 1);
    let tip = r.effector("tip").expect("effector tip");
    assert_eq!(tip.link, 3);
    assert!((tip.grip.translation.vector.x - 0.2).abs() < 1e-15);
    // One shape per link, of the written types.
    let types: Vec<&str> = r
        .links()
        .iter()
        .map(|l| l.shapes[0].geometry.type_name())
        .collect();
    assert_eq!(types, ["cylinder", "capsule", "box", "sphere"]);
    // j1 has all four limits, j2 only position limits, j3 none.
    let l1 = r.joints()[0].limits[0];
    assert_eq!(
        (l1.lower, l1.upper, l1.velocity, l1.acceleration),
        (-2.5, 2.5, 2.0, 5.0)
    );
    let l2 = r.joints()[1].limits[0];
    assert_eq!((l2.lower, l2.upper), (-2.5, 2.5));
    assert!(l2.velocity.is_infinite() && l2.acceleration.is_infinite());
    let l3 = r.joints()[2].limits[0];
    assert!(l3.lower == f64::NEG_INFINITY && l3.upper == f64::INFINITY);
    // The axis [0, 0, 2] is normalized.
    match &r.joints()[1].kind {
        JointKind::Revolute { axis } => assert!((axis.z - 1.0).abs() < 1e-15),
        other => panic!("j2 is {other:?}"),
    }
    // Adjacent pairs (3) plus the extra base-l3 pair.
    assert_eq!(r.ignored_pairs().len(), 4);
    assert!(r.is_ignored_pair(0, 3));
}

#[test]
fn floating_and_passive_robot_loads() {
    let r = load_robot(&data("toml/floating_passive.toml")).expect("floating_passive.toml loads");
    // floating 7 + prismatic 1 + revolute 1 + fixed 0.
    assert_eq!((r.nq(), r.nv()), (9, 8));
    assert_eq!(r.passive_dof(), 1);
    let float = &r.joints()[r.joint_id("float").expect("float")];
    assert!(matches!(float.kind, JointKind::Floating));
    assert_eq!(float.limits.len(), 6);
    let lin: Vec<(f64, f64, f64, f64)> = float.limits[..3]
        .iter()
        .map(|l| (l.lower, l.upper, l.velocity, l.acceleration))
        .collect();
    assert_eq!(
        lin,
        [
            (-5.0, 5.0, 0.5, 1.0),
            (-4.0, 4.0, 0.5, 1.0),
            (0.0, 3.0, 0.5, 1.0)
        ]
    );
    for l in &float.limits[3..] {
        assert!(
            l.lower == f64::NEG_INFINITY && l.upper == f64::INFINITY,
            "rotation is unbounded"
        );
        assert_eq!((l.velocity, l.acceleration), (1.5, 3.0));
    }
    assert!(r.joints()[r.joint_id("hinge").expect("hinge")].passive);
    assert!(!r.joints()[r.joint_id("slide").expect("slide")].passive);
    // ignore_adjacent = false and no extra pairs.
    assert!(r.ignored_pairs().is_empty());
}

/// The complete example in `docs/robot-format.md` is a valid robot file.
#[test]
fn documented_example_loads() {
    let doc_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/robot-format.md");
    let doc = std::fs::read_to_string(&doc_path).expect("docs/robot-format.md");
    let start = doc.find("## Complete example").expect("example section");
    let block = doc[start..]
        .split("```toml\n")
        .nth(1)
        .and_then(|b| b.split("```").next())
        .expect("toml block");
    let r = clamber::robot_file::toml_format::load_str(block, &doc_path)
        .expect("documented example loads");
    assert_eq!(r.name(), "pointer");
    assert_eq!(
        (r.nq(), r.nv(), r.links().len(), r.effectors().len()),
        (3, 3, 4, 1)
    );
}

#[test]
fn duplicate_key_is_named() {
    let e = load_bad("duplicate_key.toml");
    assert!(
        syntax_message(&e).starts_with("duplicate key `radius`"),
        "{e}"
    );
    assert_at(&e, 10, 1, "radius");
}

mod no_panic {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig { cases: 400, ..ProptestConfig::default() })]
        /// Random edits of a good file (a character replaced by TOML punctuation, a digit,
        /// a letter, `nan` or `inf`, or the text cut short) load or fail, never panic.
        #[test]
        fn edited_files_never_panic(pos in 0usize..2000, pick in 0usize..14, cut in proptest::bool::ANY) {
            let path = data("toml/three_link.toml");
            let good = std::fs::read_to_string(&path).expect("fixture");
            let chars: Vec<char> = good.chars().collect();
            let at = pos % chars.len();
            let repl = ["[", "]", "\"", "=", ",", ".", "\n", "0", "-", "x", "nan", "inf", "{", "#"][pick];
            let text: String = if cut {
                chars[..at].iter().collect()
            } else {
                chars[..at].iter().collect::<String>() + repl + &chars[at + 1..].iter().collect::<String>()
            };
            let result = std::panic::catch_unwind(|| {
                clamber::robot_file::toml_format::load_str(&text, &path).map(|_| ()).map_err(|e| e.position())
            });
            prop_assert!(result.is_ok(), "panic on edited text:\n{text}");
            if let Ok(Err(position)) = result {
                prop_assert!(position.is_some());
            }
        }
    }
}
