//! Property: importing any URDF text returns a robot or a `RobotFileError`, never panics.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let path = Path::new(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../robots/fuzz_input.urdf"
        ));
        let _ = clamber::robot_file::urdf::load_str(text, path);
    }
});
