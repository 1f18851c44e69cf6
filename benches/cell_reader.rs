//! Benchmark of the braille code's reading state machine, the inner loop of
//! the beam decoder: whole-line decoding, and beam-style expansion (clone a
//! reader, push one of the 64 six-dot cells) from every position of a text.
//!
//! Data is made before timing; each timed run checks its result. Prints the
//! median of the runs in ns per cell (per expansion for the beam case).
//! Run with `cargo bench --bench cell_reader`; `-- --smoke` does one run.

use std::time::Instant;

use tactread::{Cell, CodeTable};

const SENTENCES: [&str; 4] = [
    "Welcome to the Glasshouse Path: 12 beds, 340 ferns and the NEW Orchid Room (Bed 7B).",
    "Please stay on the path; the moss is 3.5 cm deep and grows 1,200 years.",
    "“Do not touch the cactus!” says the gardener. Why? It bites.",
    "Room 12B is closed on Mondays - see the map/plan at Gate 4.",
];

fn median(mut xs: Vec<f64>) -> f64 {
    xs.sort_by(f64::total_cmp);
    xs[xs.len() / 2]
}

fn main() {
    let smoke = std::env::args().any(|a| a == "--smoke");
    let runs = if smoke { 1 } else { 21 };
    let en = CodeTable::builtin("en").expect("built-in en table");
    let text: String = SENTENCES
        .iter()
        .cycle()
        .take(120)
        .copied()
        .collect::<Vec<_>>()
        .join(" ");
    let cells = en.encode(&text).expect("sample text encodes");
    let n = cells.len();

    // Whole-line decoding.
    let mut times = Vec::new();
    for _ in 0..runs {
        let t = Instant::now();
        let d = en.decode(&cells);
        let el = t.elapsed().as_secs_f64();
        assert_eq!(d.text, text);
        times.push(el * 1e9 / n as f64);
    }
    println!(
        "decode_en_{n}_cells: median {:.1} ns/cell over {runs} runs",
        median(times)
    );

    // Beam-style expansion: at every position, clone the reader and push
    // each of the 64 six-dot cells.
    let candidates: Vec<Cell> = (0..64u8).map(Cell::from_mask).collect();
    let mut times = Vec::new();
    for _ in 0..runs {
        let t = Instant::now();
        let mut reader = en.reader();
        let mut out = String::with_capacity(16);
        let mut unreadable = 0usize;
        for &c in &cells {
            for &cand in &candidates {
                let mut hyp = reader.clone();
                out.clear();
                unreadable += hyp.push_into(cand, &mut out);
            }
            reader.push(c);
        }
        let el = t.elapsed().as_secs_f64();
        assert!(unreadable > 0 && unreadable < n * 64);
        times.push(el * 1e9 / (n * 64) as f64);
    }
    println!(
        "expand_en_{n}x64: median {:.1} ns per clone+push over {runs} runs",
        median(times)
    );
}
