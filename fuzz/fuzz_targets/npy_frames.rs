//! Fuzz target: the `.npy` frames reader on arbitrary bytes, through
//! [`tactread::recording::fuzzing::read_npy_frames`] (the reader
//! `Recording::load` runs on an `.npy` frames file, over memory instead of a
//! file).
//!
//! The input is a whole `.npy` file. Each of the four column layouts
//! (`time_s` and `position_mm` present or not) is tried with the taxel count
//! the header's `shape` implies, found by a rough scan of the header text,
//! so that most inputs reach the data; chunks of 1 and 7 rows alternate to
//! cover chunk boundaries.
#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;
use tactread::recording::fuzzing::read_npy_frames;
use tactread::recording::NpyColumns;

/// The second number after `shape` in the first 4 KiB, if any (the
/// reader's own header parser is what is under test).
fn shape_cols(data: &[u8]) -> Option<usize> {
    let head = &data[..data.len().min(4096)];
    let at = head.windows(5).position(|w| w == b"shape")?;
    let rest = &head[at..];
    let mut numbers = rest
        .split(|b| !b.is_ascii_digit())
        .filter(|s| !s.is_empty())
        .take(2);
    numbers.next()?;
    std::str::from_utf8(numbers.next()?).ok()?.parse().ok()
}

fuzz_target!(|data: &[u8]| {
    let cols = shape_cols(data).unwrap_or(1).min(1 << 16);
    for (k, (time_s, position_mm)) in [(true, false), (false, false), (true, true), (false, true)]
        .into_iter()
        .enumerate()
    {
        let lead = usize::from(time_s) + usize::from(position_mm);
        let n_taxels = cols.saturating_sub(lead).max(1);
        let layout = NpyColumns {
            time_s,
            position_mm,
        };
        let chunk = if k % 2 == 0 { 7 } else { 1 };
        if let Ok(frames) =
            read_npy_frames(data, Path::new("fuzz.npy"), layout, n_taxels, 50.0, chunk)
        {
            // The reader's contract: shapes agree, values and times are
            // finite, time strictly increases.
            let n = frames.time_s.len();
            assert!(n > 0);
            assert_eq!(frames.frames.dim(), (n, n_taxels));
            assert!(frames.frames.iter().all(|v| v.is_finite()));
            assert!(frames.time_s.iter().all(|t| t.is_finite()));
            assert!(frames.time_s.windows(2).all(|w| w[0] < w[1]));
            match &frames.position_mm {
                Some(p) => assert!(position_mm && p.len() == n && p.iter().all(|v| v.is_finite())),
                None => assert!(!position_mm),
            }
        }
    }
});
