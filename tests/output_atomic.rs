//! `write_atomic`: an existing file is replaced whole, a failed write leaves the target as
//! it was and no partial file, and no temporary files are left behind.

use std::path::Path;

use clamber::output::{write_atomic, OutputError, TEMP_SUFFIX};

fn entries(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .expect("read dir")
        .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn new_file_is_written_and_nothing_else() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("route.json");
    write_atomic(&path, b"{\"a\": 1}\n").expect("write");
    assert_eq!(std::fs::read(&path).expect("read"), b"{\"a\": 1}\n");
    assert_eq!(entries(dir.path()), ["route.json"]);
}

#[test]
fn existing_file_is_replaced_whole() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("traj.csv");
    // A long old file and a short new one: no tail of the old may survive.
    let old = vec![b'x'; 100_000];
    std::fs::write(&path, &old).expect("old file");
    write_atomic(&path, b"t,q1\n0,0\n").expect("write");
    assert_eq!(std::fs::read(&path).expect("read"), b"t,q1\n0,0\n");
    assert_eq!(entries(dir.path()), ["traj.csv"]);
    // And a longer one again.
    let long: Vec<u8> = (0..50_000u32).flat_map(|i| i.to_le_bytes()).collect();
    write_atomic(&path, &long).expect("write");
    assert_eq!(std::fs::read(&path).expect("read"), long);
}

#[test]
fn missing_directory_fails_and_creates_nothing() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("no_such_dir").join("route.json");
    let e = write_atomic(&path, b"data").expect_err("no directory");
    assert!(matches!(e, OutputError::Io { .. }), "{e:?}");
    assert!(e.to_string().contains("route.json"), "{e}");
    assert!(!path.exists());
    assert!(entries(dir.path()).is_empty());
}

#[test]
fn failed_rename_keeps_the_old_target_and_leaves_no_temporary_file() {
    // The target is a non-empty directory: the final rename fails after the temporary file
    // was written in full, which is the latest point a write can fail.
    let dir = tempfile::tempdir().expect("temp dir");
    let target = dir.path().join("route.json");
    std::fs::create_dir(&target).expect("dir in the way");
    std::fs::write(target.join("keep"), b"old").expect("file inside");
    let e = write_atomic(&target, b"new content").expect_err("cannot replace a directory");
    assert!(e.to_string().contains("renaming"), "{e}");
    assert!(target.is_dir());
    assert_eq!(std::fs::read(target.join("keep")).expect("read"), b"old");
    let left: Vec<String> = entries(dir.path())
        .into_iter()
        .filter(|n| n.ends_with(TEMP_SUFFIX))
        .collect();
    assert!(left.is_empty(), "temporary files left: {left:?}");
    assert_eq!(entries(dir.path()), ["route.json"]);
}

#[test]
fn path_without_file_name_is_rejected() {
    let e = write_atomic(Path::new("/"), b"x").expect_err("no file name");
    assert!(matches!(e, OutputError::NoFileName { .. }), "{e:?}");
}

#[test]
fn path_through_dot_directory_works() {
    // A path through `.`: the temporary file still goes in the target's directory.
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join(".").join("summary.txt");
    write_atomic(&path, b"ok\n").expect("write");
    assert_eq!(
        std::fs::read(dir.path().join("summary.txt")).expect("read"),
        b"ok\n"
    );
    assert_eq!(entries(dir.path()), ["summary.txt"]);
}
