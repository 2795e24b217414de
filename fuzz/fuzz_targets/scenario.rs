//! Property: reading any scenario text returns a scenario or a `ScenarioFileError`, never
//! panics. The text is read as if it were a file in `scenarios/`, so the seed corpus's
//! `robot = "../robots/..."` lines load the shipped robot files.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let path = Path::new(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../scenarios/fuzz_input.scenario.toml"
        ));
        let _ = clamber::scenario_file::parse_scenario(text, path);
    }
});
