//! Integration tests of `tactread::report`: the HTML page is one
//! self-contained file (no scripts, no external resources) with every plot
//! and the caution, and the recording view draws what it is given.
//!
//! The ignored test `write_demo_report` writes a report of a synthetic test
//! set for scripts/screenshot_report.sh, which checks the page in a real
//! headless browser.

mod common;

use common::{synthetic_set, toy_recording};
use tactread::metrics::{evaluate, EvalSettings, Evaluation};
use tactread::report::{html_report, place_evenly, place_truth, write_html_report, RecordingView};
use tactread::Cell;

fn demo_evaluation() -> Evaluation {
    let settings = EvalSettings {
        resamples: 300,
        ..EvalSettings::default()
    };
    evaluate(
        "synthetic shelf labels (baseline reader)",
        &synthetic_set(48, 5, 1.0),
        &settings,
    )
    .unwrap()
}

fn demo_views(rec: &tactread::recording::Recording) -> Vec<RecordingView<'_>> {
    let text = rec.manifest.text.clone().unwrap_or_default();
    let truth_cells = common::cells_of(&text);
    let truth = place_truth(rec, &truth_cells);
    // A decoding with one misread cell (dot 3 added to the second) and the
    // last cell missed, placed a little off the truth as a decoder would.
    let mut read = truth_cells.clone();
    if read.len() > 2 {
        read[1] = Cell::from_mask(read[1].mask() | 0b100);
        read.pop();
    }
    let decoded = place_evenly(&read, truth[0].at + 0.4, 6.15);
    vec![RecordingView {
        title: format!("lift-panel-07: \u{201c}{text}\u{201d}"),
        recording: rec,
        truth,
        decoded: Some(decoded),
    }]
}

#[test]
fn report_page_is_self_contained_with_every_plot_and_the_caution() {
    let e = demo_evaluation();
    let rec = toy_recording("level two");
    let page = html_report(&e, &demo_views(&rec)).unwrap();
    assert!(page.starts_with("<!DOCTYPE html>"));
    // The caution.
    assert!(page.contains("machine-read"));
    assert!(page.contains("medicine labels, dosage"));
    assert!(page.contains("local accessibility codes"));
    // Offline: no scripts, no links to anything, no fetched resources.
    for banned in ["<script", " src=", " href=", "url(", "@import", "<link"] {
        assert!(!page.contains(banned), "page contains {banned}");
    }
    let http: Vec<&str> = page
        .match_indices("http")
        .map(|(i, _)| &page[i..(i + 26).min(page.len())])
        .collect();
    assert!(
        http.iter()
            .all(|s| s.starts_with("http://www.w3.org/2000/svg")),
        "{http:?}"
    );
    // Every plot: headline intervals, reliability, per-dot, two confusion
    // maps (with and without lexicon), speed breakdown, recording view.
    assert_eq!(page.matches("<svg").count(), 7);
    assert_eq!(page.matches("</svg>").count(), 7);
    for id in [
        "headline",
        "calibration",
        "dots",
        "confusions",
        "breakdown",
        "recordings",
        "views",
    ] {
        assert!(
            page.contains(&format!("<section id=\"{id}\">")),
            "section {id}"
        );
    }
    assert!(page.contains("sliding speed, mm/s"));
    // Headline figures appear with their intervals.
    let ca = e.without_lexicon.headline[&tactread::metrics::Metric::CharAccuracy];
    assert!(page.contains(&format!("{:.1}%", ca.value * 100.0)));
    assert!(page.contains(&format!("[{:.1}, {:.1}]", ca.low * 100.0, ca.high * 100.0)));
}

#[test]
fn report_is_written_atomically() {
    let dir = common::cli::test_dir("report-test");
    let e = demo_evaluation();
    let p = dir.join("report.html");
    write_html_report(&p, &e, &[]).unwrap();
    let page = std::fs::read_to_string(&p).unwrap();
    assert!(page.ends_with("</html>\n"));
    assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 1);
}

/// Writes `$TACTREAD_DEMO_REPORT` (default target/report-demo/report.html)
/// and the metrics JSON beside it. Run by scripts/screenshot_report.sh.
#[test]
#[ignore]
fn write_demo_report() {
    let out = std::env::var("TACTREAD_DEMO_REPORT").unwrap_or_else(|_| {
        concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/target/report-demo/report.html"
        )
        .to_string()
    });
    let out = std::path::PathBuf::from(out);
    if let Some(d) = out.parent() {
        std::fs::create_dir_all(d).unwrap();
    }
    let e = demo_evaluation();
    let rec = toy_recording("level two");
    write_html_report(&out, &e, &demo_views(&rec)).unwrap();
    e.save(out.with_extension("json")).unwrap();
    println!("wrote {}", out.display());
}
