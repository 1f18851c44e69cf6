//! `tactread lexicon`: compile word lists into lexicon files and look into
//! them.

use clap::{Args as ClapArgs, Subcommand};
use std::path::PathBuf;
use tactread::fsutil::{write_atomic, OutputGuard};
use tactread::lexicon::{read_word_list, Lexicon};
use tactread::{Error, Result};

/// Options of `tactread lexicon`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Compile a word list (one word per line, optionally a tab and a count)
    /// into a lexicon file.
    Build(BuildArgs),
    /// Print what a lexicon file holds; with --near, the words close to a
    /// query.
    Info(InfoArgs),
    /// Tune the word-rescoring weights on recordings whose manifests hold
    /// their text (grid search maximising word accuracy).
    Tune(TuneArgs),
}

#[derive(Debug, ClapArgs)]
struct TuneArgs {
    /// The model file.
    model: PathBuf,
    /// Validation recordings (manifests with a `text`).
    #[arg(required = true)]
    recordings: Vec<PathBuf>,
    /// Language pack (default: the model's).
    #[arg(long)]
    lang: Option<String>,
    /// Lexicon file (default: the language's builtin lexicon).
    #[arg(long)]
    lexicon: Option<PathBuf>,
    /// Beam width (default 16).
    #[arg(long, default_value_t = 16)]
    beam: usize,
    /// Where to write the weights (JSON, for `tactread decode --weights`).
    #[arg(long)]
    out: PathBuf,
    /// Overwrite an existing output file.
    #[arg(long)]
    force: bool,
}

#[derive(Debug, ClapArgs)]
struct BuildArgs {
    /// The word list.
    words: PathBuf,
    /// The lexicon file to write.
    #[arg(long)]
    out: PathBuf,
    /// Language the words are in (recorded in the file, e.g. `en`).
    #[arg(long, default_value = "")]
    lang: String,
    /// Overwrite an existing output file.
    #[arg(long)]
    force: bool,
}

#[derive(Debug, ClapArgs)]
struct InfoArgs {
    /// The lexicon file.
    lexicon: PathBuf,
    /// Also list the words within --edits edits of this word.
    #[arg(long)]
    near: Option<String>,
    /// Edit distance for --near (default 1).
    #[arg(long, default_value_t = 1)]
    edits: u32,
}

/// Run `tactread lexicon`.
pub fn run(args: Args) -> Result<()> {
    match args.command {
        Command::Build(a) => build(a),
        Command::Info(a) => info(a),
        Command::Tune(a) => tune(a),
    }
}

fn build(a: BuildArgs) -> Result<()> {
    OutputGuard::new(a.force)
        .input(&a.words)
        .file(&a.out, "--out")?;
    let entries = read_word_list(&a.words)?;
    if entries.is_empty() {
        return Err(Error::input(
            tactread::Location::file(&a.words),
            "holds no word: write one word per line, optionally a tab and a count",
        ));
    }
    let lexicon = Lexicon::from_entries(&entries, &a.lang)?;
    lexicon.save(&a.out)?;
    println!(
        "{}: {} words (from {} lines), total count {}{}",
        a.out.display(),
        lexicon.len(),
        entries.len(),
        lexicon.total(),
        if a.lang.is_empty() {
            String::new()
        } else {
            format!(", language {}", a.lang)
        }
    );
    Ok(())
}

fn info(a: InfoArgs) -> Result<()> {
    let lexicon = Lexicon::load(&a.lexicon)?;
    println!(
        "{}: {} words, total count {}, language {}",
        a.lexicon.display(),
        lexicon.len(),
        lexicon.total(),
        if lexicon.lang().is_empty() {
            "any"
        } else {
            lexicon.lang()
        }
    );
    if let Some(q) = a.near {
        for n in lexicon.near(&q, a.edits) {
            println!("{}\t{}\t{} edit(s)", n.word, n.count, n.edits);
        }
    }
    Ok(())
}

fn tune(a: TuneArgs) -> Result<()> {
    use tactread::braille::CodeTable;
    use tactread::decode::BeamParams;
    use tactread::lexicon::{RescoreWeights, TuneItem, WeightGrid};
    use tactread::net::Model;
    use tactread::recording::Recording;
    let mut guard = OutputGuard::new(a.force);
    guard.input(&a.model).inputs(&a.recordings);
    if let Some(lexicon) = &a.lexicon {
        guard.input(lexicon);
    }
    guard.file(&a.out, "--out")?;
    let model = Model::load(&a.model)?;
    let lang = a.lang.clone().unwrap_or_else(|| model.lang.clone());
    let table = CodeTable::builtin(&lang)?;
    let lexicon = match &a.lexicon {
        Some(p) => Lexicon::load(p)?,
        None => Lexicon::builtin(&lang)?,
    };
    let mut outputs = Vec::new();
    for path in &a.recordings {
        let name = path.display().to_string();
        let rec = Recording::load(path)?;
        // The frames file is an input too (an odd --out could name it).
        let dir = path.parent().unwrap_or(std::path::Path::new(""));
        guard.input(dir.join(&rec.manifest.frames));
        guard.file(&a.out, "--out")?;
        let truth = rec.manifest.text.clone().ok_or_else(|| {
            Error::input(
                tactread::Location::file(path).field("text"),
                "the manifest gives no text: tuning needs recordings whose text is known",
            )
        })?;
        outputs.push((tactread::pipeline::log_probs(&model, &rec, &name)?, truth));
    }
    let items: Vec<TuneItem> = outputs
        .iter()
        .map(|(lp, truth)| TuneItem {
            log_probs: lp.view(),
            truth,
        })
        .collect();
    let beam = BeamParams {
        beam_width: a.beam,
        ..BeamParams::default()
    };
    let tuned = tactread::lexicon::tune(
        &items,
        &table,
        &lexicon,
        &beam,
        &RescoreWeights::default(),
        &WeightGrid::default(),
    )?;
    let json = serde_json::to_string_pretty(&tuned.weights).unwrap_or_default();
    write_atomic(&a.out, format!("{json}\n").as_bytes())?;
    println!(
        "{}: word accuracy {:.1}% with these weights, {:.1}% without the lexicon ({} recordings, {} grid points)",
        a.out.display(),
        100.0 * tuned.word_accuracy,
        100.0 * tuned.raw_word_accuracy,
        items.len(),
        tuned.tried
    );
    Ok(())
}
