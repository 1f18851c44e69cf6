//! `tactread demo`: read the demo test set (demo-data/) with the embedded
//! default model, print the figures with and without the lexicon and a few
//! lines beside the ground truth, and write the HTML report.

use clap::Args as ClapArgs;
use std::path::{Path, PathBuf};
use std::time::Instant;
use tactread::braille::CodeTable;
use tactread::decode::{BeamParams, Decoder};
use tactread::fsutil::OutputGuard;
use tactread::lexicon::{Lexicon, RescoreWeights};
use tactread::metrics::{evaluate, EvalRecording, EvalSettings, Hypothesis, Metric, Reference};
use tactread::recording::{Dataset, Split};
use tactread::report::{place_truth, write_html_report, RecordingView};
use tactread::{Error, Result};

/// Printed before the figures.
const CAUTION: &str =
    "caution: machine-read braille can be wrong. Verify it wherever a misreading \
could hurt (medicine labels, dosages, safety signage), and follow your local accessibility codes.";

/// Options of `tactread demo`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Folder for the HTML report (default `tactread-demo` in the current folder).
    #[arg(long, value_name = "DIR", default_value = "tactread-demo")]
    out: PathBuf,
    /// Overwrite an existing report in the folder.
    #[arg(long)]
    force: bool,
    /// Read only the first N test recordings (default: all).
    #[arg(long, value_name = "N")]
    limit: Option<usize>,
    /// The demo dataset folder (default: demo-data/ of the source tree).
    #[arg(long, value_name = "DIR")]
    data: Option<PathBuf>,
}

/// Run the demo.
pub fn run(args: Args) -> Result<()> {
    let start = Instant::now();
    let data = args
        .data
        .clone()
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data"));
    if !data.join("index.json").is_file() {
        return Err(Error::config(
            "demo data",
            format!(
                "{} has no index.json: run the demo from a tactread source tree, \
                 or pass --data DIR (a dataset folder from `tactread simulate dataset`)",
                data.display()
            ),
        ));
    }
    let report = args.out.join("report.html");
    let model = super::load_model(Path::new(super::DEFAULT_MODEL_WORD))?;
    let ds = Dataset::open(&data)?;
    OutputGuard::new(args.force)
        .input(data.join(tactread::recording::DATASET_INDEX))
        .inputs(ds.entries().iter().map(|e| ds.manifest_path(e)))
        .file(&report, "--out")?;
    let mut entries: Vec<_> = ds.split(Split::Test).cloned().collect();
    if let Some(n) = args.limit {
        entries.truncate(n);
    }
    if entries.is_empty() {
        return Err(Error::config(
            "demo data",
            format!("{} has no test recordings", data.display()),
        ));
    }
    println!(
        "tactread demo: reading {} test recordings of {} with the default model ({})",
        entries.len(),
        data.display(),
        if model.training.languages.is_empty() {
            model.lang.clone()
        } else {
            model.training.languages.join(", ")
        }
    );

    let mut evals = Vec::new();
    let mut recs = Vec::new();
    for e in &entries {
        let name = ds.manifest_path(e).display().to_string();
        let rec = ds.load(e)?;
        let table = CodeTable::builtin(&e.lang)?;
        let lexicon = Lexicon::builtin(&e.lang)?;
        let decoder = Decoder::new(&table, BeamParams::default())?
            .with_lexicon(&lexicon, RescoreWeights::default())?;
        let d = tactread::pipeline::read_recording(&model, &decoder, &rec, &name)?;
        let (truth_cells, _) = table.encode_lossy(&e.text);
        let beam_cells: Vec<_> = d.reading.cells.iter().map(|c| c.cell).collect();
        let (lex_cells, _) = table.encode_lossy(&d.text);
        let without = Hypothesis {
            text: d.reading.text.clone(),
            cells: beam_cells.clone(),
            dot_probabilities: Some(
                d.reading
                    .cells
                    .iter()
                    .map(|c| {
                        let mut p = [0f32; 6];
                        for (k, v) in c.dot_probs.iter().take(6).enumerate() {
                            p[k] = *v as f32;
                        }
                        p
                    })
                    .collect(),
            ),
            alternatives: None,
        };
        let with = Hypothesis {
            text: d.text.clone(),
            cells: lex_cells,
            ..Hypothesis::default()
        };
        let mut tags = std::collections::BTreeMap::new();
        if let Some(v) = rec.manifest.tags.get("speed_mm_s").and_then(|v| v.as_f64()) {
            tags.insert("speed_mm_s".to_string(), v);
        }
        evals.push(EvalRecording {
            id: e.manifest.clone(),
            reference: Reference {
                text: e.text.clone(),
                cells: truth_cells.clone(),
            },
            without_lexicon: without,
            with_lexicon: Some(with),
            tags,
        });
        recs.push((rec, truth_cells, beam_cells));
    }
    let eval = evaluate(
        "default model on demo-data test",
        &evals,
        &EvalSettings::default(),
    )?;

    println!();
    println!("{CAUTION}");
    println!();
    println!(
        "{:<22} {:>16} {:>16}",
        "figure", "without lexicon", "with lexicon"
    );
    for m in [
        Metric::DotAccuracy,
        Metric::CharAccuracy,
        Metric::WordAccuracy,
    ] {
        let fig = |s: Option<&tactread::metrics::SystemMetrics>| {
            s.and_then(|s| s.headline.get(&m))
                .map(|e| format!("{:.1}%", 100.0 * e.value))
                .unwrap_or_else(|| "n/a".into())
        };
        println!(
            "{:<22} {:>16} {:>16}",
            m.label(),
            fig(Some(&eval.without_lexicon)),
            fig(eval.with_lexicon.as_ref())
        );
    }
    println!();
    for r in evals.iter().take(4) {
        println!("{}", r.id);
        println!("  truth: {}", r.reference.text);
        println!(
            "  read:  {}",
            r.with_lexicon.as_ref().map_or("", |h| h.text.as_str())
        );
        println!("  (before lexicon: {})", r.without_lexicon.text);
    }

    let views: Vec<RecordingView> = recs
        .iter()
        .zip(&evals)
        .map(|((rec, truth, read), ev)| RecordingView {
            title: format!("{}: {}", ev.id, ev.reference.text),
            recording: rec,
            truth: place_truth(rec, truth),
            decoded: Some(place_truth(rec, read)),
        })
        .collect();
    std::fs::create_dir_all(&args.out)
        .map_err(|e| Error::io("cannot create the report folder", &args.out, e))?;
    write_html_report(&report, &eval, &views)?;
    println!();
    println!(
        "wrote the report to {} ({:.1} s)",
        report.display(),
        start.elapsed().as_secs_f64()
    );
    Ok(())
}
