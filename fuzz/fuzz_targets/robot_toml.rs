//! Property: reading and building a robot from any TOML text returns a robot or a
//! `RobotFileError`, never panics. The path anchors relative mesh paths in `robots/`.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let path = Path::new(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../robots/fuzz_input.toml"
        ));
        let _ = clamber::robot_file::toml_format::load_str(text, path);
    }
});
