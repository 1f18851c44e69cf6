//! Fuzz target: the recording manifest parser and checker, through
//! [`tactread::recording::fuzzing::parse_manifest`] (what `Recording::load`
//! runs on the manifest's bytes).
//!
//! The input is a whole manifest file. A manifest that parses must satisfy
//! the checks the loader promises, and must round-trip through its JSON.
#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use tactread::recording::fuzzing::parse_manifest;

fuzz_target!(|data: &[u8]| {
    if let Ok(m) = parse_manifest(data, Path::new("fuzz.json")) {
        assert!(m.sensor.taxels >= 1);
        assert!(m.sensor.sample_rate_hz.is_finite() && m.sensor.sample_rate_hz > 0.0);
        if let Some(p) = &m.sensor.positions_mm {
            assert_eq!(p.len(), m.sensor.taxels);
        }
        // What we would write back reads back the same.
        let json = serde_json::to_vec(&m).expect("a checked manifest serialises");
        let again = parse_manifest(&json, Path::new("fuzz-again.json"))
            .expect("a checked manifest reads back");
        assert_eq!(again, m);
    }
});
