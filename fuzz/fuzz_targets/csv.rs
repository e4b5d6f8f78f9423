//! Fuzz target: the two CSV readers of `calibrate` (`--csv` pairs and the `--stills` table).
//! Any bytes must give rows with finite numbers and the right signs, or an error whose
//! message names the file; never a panic, never unbounded memory.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("checks.csv");
    std::fs::write(&path, data).expect("write input");
    match twistmark::mechanics::read_pairs_csv(&path) {
        Ok(pairs) => {
            assert!(!pairs.is_empty(), "an accepted table has pairs");
            for p in &pairs {
                assert!(p.torque.nm().is_finite() && p.twist.rad().is_finite());
            }
        }
        Err(e) => {
            let m = e.to_string();
            assert!(
                m.contains("checks.csv"),
                "message does not name the file: {m}"
            );
        }
    }
    match twistmark::calibrate::read_stills_csv(&path, None) {
        Ok(plan) => {
            assert!(!plan.rows.is_empty(), "an accepted table has loaded rows");
            for r in &plan.rows {
                assert!(r.torque.nm().is_finite() && r.torque.nm() > 0.0);
                assert!(!r.image.is_empty());
            }
        }
        Err(e) => {
            let m = e.to_string();
            assert!(
                m.contains("checks.csv"),
                "message does not name the file: {m}"
            );
        }
    }
});
