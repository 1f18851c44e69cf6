//! Fuzz target: reading a simulator sensor file
//! ([`tactread::simulate::SensorSpec::from_json`], what `SensorSpec::load`
//! runs on a file's text).
//!
//! The input is a whole sensor file. One that loads must give one position
//! per taxel, all finite and no two in the same place, and must read back
//! from its own JSON.
#![no_main]

use libfuzzer_sys::fuzz_target;
use tactread::simulate::SensorSpec;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(spec) = SensorSpec::from_json(text, "fuzz-sensor.json") else {
        return;
    };
    let n = spec.taxel_count();
    let pos = spec.taxel_positions();
    assert_eq!(pos.len(), n);
    assert!(n >= 1);
    assert!(pos.iter().all(|p| p[0].is_finite() && p[1].is_finite()));
    let again = SensorSpec::from_json(&spec.to_json(), "fuzz-again.json");
    assert!(again.is_ok(), "a loaded sensor reads back: {again:?}");
});
