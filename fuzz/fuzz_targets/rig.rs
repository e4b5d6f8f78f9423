//! Fuzz target: the rig parser. Any text must give a rig that survives its own round trip,
//! or an error whose message names the file; never a panic.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match twistmark::Rig::from_json_str(text, Path::new("fuzz.rig.json")) {
        Ok(rig) => {
            // A rig that parsed must survive its own round trip and the frame check.
            let again = twistmark::Rig::from_json_str(&rig.to_json_pretty(), Path::new("again"))
                .expect("a parsed rig re-parses");
            assert_eq!(again, rig);
            let _ = rig.check_frame(Path::new("fuzz.rig.json"), 1280, 720);
            let _ = rig.check_frame(Path::new("fuzz.rig.json"), 1, 1);
        }
        Err(e) => {
            // The message may hold a newline echoed from the input (a field name with "\n" in
            // it, found by this target); the binary prints every error on one line
            // (src/main.rs), which tests/it/bad_input.rs checks.
            let m = e.to_string();
            assert!(
                m.contains("fuzz.rig.json"),
                "message does not name the file: {m}"
            );
        }
    }
});
