//! `tactread evaluate MODEL DATA`: read a test set with a trained model and
//! score it. DATA is a dataset folder (its `index.json`; the test split by
//! default) or recording manifests with ground-truth `text`. Recordings
//! are decoded in parallel; the figures come from
//! [`tactread::metrics::evaluate`], with and without the lexicon; the
//! headline table goes to standard output, the metrics file to `--json`
//! and the HTML page (with a few recording views) to `--report`.

use super::decode::{load_lexicon, CAUTION};
use clap::{Args as ClapArgs, ValueEnum};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::path::PathBuf;
use tactread::braille::CodeTable;
use tactread::decode::{BeamParams, Decoded, Decoder};
use tactread::fsutil::OutputGuard;
use tactread::lexicon::{Lexicon, RescoreWeights};
use tactread::metrics::{
    evaluate, EvalRecording, EvalSettings, Evaluation, Hypothesis, Metric, Reference,
};
use tactread::net::Model;
use tactread::pipeline::{place_decoded, read_recording};
use tactread::recording::{Dataset, Recording, RecordingStream, Split};
use tactread::report::{place_truth, write_html_report, RecordingView};
use tactread::{Error, Result};

/// Recording views drawn in the report (the first ones of the set).
const REPORT_VIEWS: usize = 3;

/// Options of `tactread evaluate`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// The model file (from `tactread train`), or `default` for the
    /// embedded default model (hex24 fingertip; en, de, fr, es; a file called
    /// `default` is read as `./default`).
    model: PathBuf,
    /// A dataset folder (with index.json), or recording manifests.
    #[arg(required = true)]
    data: Vec<PathBuf>,
    /// Split of a dataset folder to read (default test).
    #[arg(long, value_enum, default_value_t = SplitArg::Test)]
    split: SplitArg,
    /// Language pack: code table and builtin lexicon (default: the model's
    /// training language).
    #[arg(long)]
    lang: Option<String>,
    /// Beam width (default 16).
    #[arg(long, default_value_t = 16)]
    beam: usize,
    /// Lexicon file for word rescoring, or `none` to score the beam's
    /// reading only (default: the language's builtin lexicon).
    #[arg(long)]
    lexicon: Option<String>,
    /// Write the metrics file (JSON) here.
    #[arg(long)]
    json: Option<PathBuf>,
    /// Write the HTML report here.
    #[arg(long)]
    report: Option<PathBuf>,
    /// Bootstrap resamples for the confidence intervals (default 1000).
    #[arg(long, default_value_t = 1000)]
    resamples: usize,
    /// Worker threads (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    /// Overwrite existing output files.
    #[arg(long)]
    force: bool,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
enum SplitArg {
    Train,
    Validation,
    Test,
}

impl SplitArg {
    fn split(self) -> Split {
        match self {
            SplitArg::Train => Split::Train,
            SplitArg::Validation => Split::Validation,
            SplitArg::Test => Split::Test,
        }
    }
}

/// One recording to read: its id and where its manifest is.
struct Item {
    id: String,
    path: PathBuf,
    /// The recording's language, when the dataset index gives it.
    lang: Option<String>,
}

fn items(args: &Args) -> Result<Vec<Item>> {
    let first = &args.data[0];
    if args.data.len() == 1 && first.is_dir() {
        let ds = Dataset::open(first)?;
        let split = args.split.split();
        let items: Vec<Item> = ds
            .split(split)
            .map(|e| Item {
                id: e.manifest.clone(),
                path: ds.manifest_path(e),
                lang: Some(e.lang.clone()),
            })
            .collect();
        if items.is_empty() {
            return Err(Error::config(
                "--split",
                format!(
                    "dataset {} has no `{}` recordings: choose another split with --split",
                    first.display(),
                    split.name()
                ),
            ));
        }
        return Ok(items);
    }
    args.data
        .iter()
        .map(|p| {
            if p.is_dir() {
                return Err(Error::config(
                    "DATA",
                    format!(
                        "{} is a folder: give one dataset folder alone, or recording manifests",
                        p.display()
                    ),
                ));
            }
            if !p.exists() {
                return Err(Error::config(
                    "DATA",
                    format!(
                        "{} does not exist: give a dataset folder (with index.json) or recording manifests",
                        p.display()
                    ),
                ));
            }
            Ok(Item {
                id: p.display().to_string(),
                path: p.clone(),
                lang: None,
            })
        })
        .collect()
}

/// Check `--json` and `--report` against the inputs known so far.
fn check_outputs(args: &Args, guard: &mut OutputGuard) -> Result<()> {
    for (path, flag) in [(&args.json, "--json"), (&args.report, "--report")] {
        if let Some(p) = path {
            guard.file(p, flag)?;
        }
    }
    Ok(())
}

/// Per-character ranked alternatives of the beam's best reading, or None
/// when its characters do not spell its text one for one.
fn alternatives(d: &Decoded) -> Option<Vec<Vec<char>>> {
    let r = &d.reading;
    let mut out = Vec::new();
    for c in &r.chars {
        let mut chars = c.text.chars();
        let first = chars.next()?;
        let mut list = vec![first];
        for (t, _) in &c.alternatives {
            if let Some(a) = t.chars().next() {
                if !list.contains(&a) {
                    list.push(a);
                }
            }
        }
        out.push(list);
        out.extend(chars.map(|ch| vec![ch]));
    }
    (out.len() == r.text.chars().count()).then_some(out)
}

struct Read {
    rec: Recording,
    eval: EvalRecording,
    decoded: Decoded,
}

/// Run `tactread evaluate`.
pub fn run(args: Args) -> Result<()> {
    let items = items(&args)?;
    let mut guard = OutputGuard::new(args.force);
    guard.input(&args.model);
    if let [dir] = args.data.as_slice() {
        if dir.is_dir() {
            guard.input(dir.join(tactread::recording::DATASET_INDEX));
        }
    }
    if let Some(lexicon) = args.lexicon.as_deref().filter(|l| *l != "none") {
        guard.input(lexicon);
    }
    guard.inputs(items.iter().map(|i| &i.path));
    check_outputs(&args, &mut guard)?;
    let model = super::load_model(&args.model)?;
    // Each recording is read in its own language (from the dataset index or
    // its manifest, else the model's), unless --lang names one for all.
    let item_langs: Vec<String> = items
        .iter()
        .map(|it| match (&args.lang, &it.lang) {
            (Some(l), _) | (None, Some(l)) => Ok(l.clone()),
            (None, None) => Ok(RecordingStream::open(&it.path)?
                .manifest()
                .lang
                .clone()
                .unwrap_or_else(|| model.lang.clone())),
        })
        .collect::<Result<_>>()?;
    let mut packs: BTreeMap<String, (CodeTable, Option<Lexicon>)> = BTreeMap::new();
    for lang in &item_langs {
        if !packs.contains_key(lang) {
            let table = CodeTable::builtin(lang)?;
            let lexicon = load_lexicon(args.lexicon.as_deref(), lang)?;
            packs.insert(lang.clone(), (table, lexicon));
        }
    }
    let beam = BeamParams {
        beam_width: args.beam,
        n_best: 3.min(args.beam.max(1)),
        ..BeamParams::default()
    };
    let mut decoders: BTreeMap<&str, (&CodeTable, Decoder<'_, CodeTable>)> = BTreeMap::new();
    for (lang, (table, lexicon)) in &packs {
        let mut decoder = Decoder::new(table, beam.clone())?;
        if let Some(lex) = lexicon {
            decoder = decoder.with_lexicon(lex, RescoreWeights::default())?;
        }
        decoders.insert(lang.as_str(), (table, decoder));
    }
    if packs.len() > 1 {
        eprintln!(
            "reading {} recordings in {} languages: {}",
            items.len(),
            packs.len(),
            packs.keys().cloned().collect::<Vec<_>>().join(", ")
        );
    }
    let settings = EvalSettings {
        resamples: args.resamples,
        breakdown_tag: Some("speed_mm_s".into()),
        ..EvalSettings::default()
    };
    settings.check()?;

    let bar = ProgressBar::new(items.len() as u64);
    bar.set_style(
        ProgressStyle::with_template("reading {pos}/{len} recordings [{bar:30}] {eta} left")
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> "),
    );
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(args.threads.unwrap_or(0))
        .build()
        .map_err(|e| Error::config("--threads", format!("cannot start worker threads: {e}")))?;
    let with_lex = args.lexicon.as_deref() != Some("none");
    let reads: Vec<Read> = pool.install(|| {
        items
            .par_iter()
            .zip(&item_langs)
            .map(|(item, lang)| {
                let (table, decoder) = &decoders[lang.as_str()];
                let r = read_one(item, &model, decoder, table, with_lex);
                bar.inc(1);
                r
            })
            .collect::<Result<Vec<_>>>()
    })?;
    bar.finish_and_clear();
    for (item, r) in items.iter().zip(&reads) {
        let dir = item.path.parent().unwrap_or(std::path::Path::new(""));
        guard.input(dir.join(&r.rec.manifest.frames));
    }
    check_outputs(&args, &mut guard)?;

    // Alternatives go in for all recordings or none (the metrics need one or the other).
    let mut evals: Vec<EvalRecording> = reads.iter().map(|r| r.eval.clone()).collect();
    if evals
        .iter()
        .any(|e| e.without_lexicon.alternatives.is_none())
    {
        for e in &mut evals {
            e.without_lexicon.alternatives = None;
        }
    }
    let label = args.model.display().to_string();
    let evaluation = evaluate(&label, &evals, &settings)?;

    print!("{}", headline(&evaluation, evals.len()));
    println!("{CAUTION}");

    if let Some(p) = &args.json {
        evaluation.save(p)?;
        println!("wrote {}", p.display());
    }
    if let Some(p) = &args.report {
        let views: Vec<RecordingView> = reads
            .iter()
            .take(REPORT_VIEWS)
            .map(|r| RecordingView {
                title: format!("{}: \u{201c}{}\u{201d}", r.eval.id, r.eval.reference.text),
                recording: &r.rec,
                truth: place_truth(&r.rec, &r.eval.reference.cells),
                decoded: Some(place_decoded(&model, &r.rec, &r.decoded)),
            })
            .collect();
        write_html_report(p, &evaluation, &views)?;
        println!("wrote {}", p.display());
    }
    Ok(())
}

fn read_one(
    item: &Item,
    model: &Model,
    decoder: &Decoder<'_, CodeTable>,
    table: &CodeTable,
    with_lex: bool,
) -> Result<Read> {
    let name = item.path.display().to_string();
    let rec = Recording::load(&item.path)?;
    let text = rec.manifest.text.clone().unwrap_or_default();
    if text.is_empty() {
        return Err(Error::input(
            tactread::Location::file(&item.path).field("text"),
            "no ground-truth text: evaluation needs the text each recording holds",
        ));
    }
    let ref_cells = table.encode(&text).map_err(|e| {
        Error::input(
            tactread::Location::file(&item.path).field("text"),
            format!(
                "the ground truth cannot be written with the `{}` code table ({e}): check the \
                 recording's `lang` field, or pass --lang to read it in another language",
                table.lang()
            ),
        )
    })?;
    let decoded = read_recording(model, decoder, &rec, &name)?;
    let r = &decoded.reading;
    let without = Hypothesis {
        text: r.text.clone(),
        cells: r.cells.iter().map(|c| c.cell).collect(),
        dot_probabilities: Some(
            r.cells
                .iter()
                .map(|c| c.dot_probs.map(|p| p as f32))
                .collect(),
        ),
        alternatives: alternatives(&decoded),
    };
    let with_lexicon = with_lex.then(|| Hypothesis {
        text: decoded.text.clone(),
        // Rescoring changes words, not cells: the rescored text written in
        // cells, else (text the table cannot write) the beam's cells.
        cells: table
            .encode(&decoded.text)
            .unwrap_or_else(|_| without.cells.clone()),
        dot_probabilities: None,
        alternatives: None,
    });
    let tags: BTreeMap<String, f64> = rec
        .manifest
        .tags
        .get("speed_mm_s")
        .and_then(|v| v.as_f64())
        .filter(|v| v.is_finite())
        .map(|v| ("speed_mm_s".to_string(), v))
        .into_iter()
        .collect();
    let eval = EvalRecording {
        id: item.id.clone(),
        reference: Reference {
            text,
            cells: ref_cells,
        },
        without_lexicon: without,
        with_lexicon,
        tags,
    };
    Ok(Read { rec, eval, decoded })
}

fn headline(e: &Evaluation, n: usize) -> String {
    let rows = Metric::ALL;
    let pct = (e.settings.confidence * 100.0).round();
    let mut s = format!(
        "{n} recordings; figures with {pct}% bootstrap intervals over recordings\n{:<28} {:>26} {:>26}\n",
        "", "without lexicon", "with lexicon"
    );
    let cell = |sys: Option<&tactread::metrics::SystemMetrics>, m: Metric| -> String {
        match sys.and_then(|s| s.headline.get(&m)) {
            Some(est) => format!("{:.3} [{:.3}, {:.3}]", est.value, est.low, est.high),
            None => "-".into(),
        }
    };
    for m in rows {
        s.push_str(&format!(
            "{:<28} {:>26} {:>26}\n",
            m.label(),
            cell(Some(&e.without_lexicon), m),
            cell(e.with_lexicon.as_ref(), m)
        ));
    }
    s
}
