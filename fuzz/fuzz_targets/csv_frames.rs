//! Fuzz target: the CSV frames reader ([`tactread::recording::CsvFrameReader`])
//! on arbitrary bytes.
//!
//! The input is a whole frames file. The taxel count the manifest would
//! declare is taken from the input's own header (its field count, less
//! `time_s` and `position_mm`), so most inputs reach the data rows; the
//! count one above and one below is tried too, for the header checks.
#![no_main]

use libfuzzer_sys::fuzz_target;
use tactread::recording::CsvFrameReader;

/// Taxel count the header of `data` implies (a rough count of its first
/// line's fields: the reader's own parsing is what is under test).
fn header_taxels(data: &[u8]) -> usize {
    let line = data.split(|&b| b == b'\n').next().unwrap_or(&[]);
    let fields = line.split(|&b| b == b',').count();
    let lead = if line.windows(11).any(|w| w == b"position_mm") {
        2
    } else {
        1
    };
    fields.saturating_sub(lead)
}

fn read_all(data: &[u8], n_taxels: usize) {
    let Ok(reader) = CsvFrameReader::new(data, "fuzz.csv", n_taxels) else {
        return;
    };
    assert_eq!(reader.n_taxels(), n_taxels);
    let mut last_time = f64::NEG_INFINITY;
    for (i, frame) in reader.enumerate() {
        let Ok(frame) = frame else { break };
        // The reader's contract: every frame has n_taxels finite values,
        // rows count from 1, and time is finite and strictly increasing.
        assert_eq!(frame.row, i + 1);
        assert_eq!(frame.values.len(), n_taxels);
        assert!(frame.values.iter().all(|v| v.is_finite()));
        assert!(frame.time_s.is_finite() && frame.time_s > last_time);
        assert!(frame.position_mm.is_none_or(f64::is_finite));
        last_time = frame.time_s;
    }
}

fuzz_target!(|data: &[u8]| {
    let n = header_taxels(data);
    read_all(data, n);
    read_all(data, n + 1);
    if n > 0 {
        read_all(data, n - 1);
    }
});
