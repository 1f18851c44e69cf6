//! Fuzz target: reading a model file ([`tactread::net::Model::from_json`],
//! what `Model::load` runs on a file's text) and then running it.
//!
//! The input is a whole model file. One that loads is checked for the
//! shapes the loader promises, run on a few frames of zeros and of ones
//! (forward pass and streaming step), and must read back from its own JSON.
#![no_main]

use libfuzzer_sys::fuzz_target;
use ndarray::Array2;
use std::path::Path;
use tactread::net::Model;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let Ok(model) = Model::from_json(text, Path::new("fuzz-model.json")) else {
        return;
    };
    let taxels = model.sensor.taxels;
    assert_eq!(model.network.config().inputs, taxels);
    assert!(model.check_taxels(taxels, "fuzz").is_ok());
    assert!(model.check_taxels(taxels + 1, "fuzz").is_err());
    for fill in [0.0f32, 1.0] {
        let x = Array2::from_elem((3, taxels), fill);
        if let Ok(out) = model.network.forward(&[x.view()]) {
            assert_eq!(out.len(), 1);
            assert_eq!(out[0].nrows(), 3);
        }
        if let Ok(mut state) = model.network.zero_state() {
            let _ = model
                .network
                .step(&mut state, x.row(0).as_slice().unwrap_or(&[]));
        }
    }
    let again = Model::from_json(&model.to_json(), Path::new("fuzz-again.json"));
    assert!(again.is_ok(), "a loaded model reads back: {again:?}");
});
