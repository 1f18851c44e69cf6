//! `tactread lexicon`: compile word lists into lexicon files and look into
//! them.

use clap::{Args as ClapArgs, Subcommand};
use std::path::PathBuf;
use tactread::lexicon::{parse_word_list, Lexicon};
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
    }
}

fn build(a: BuildArgs) -> Result<()> {
    if a.out == a.words {
        return Err(Error::Output {
            path: a.out,
            reason: "it is the input word list: choose another --out".into(),
        });
    }
    if a.out.exists() && !a.force {
        return Err(Error::Output {
            path: a.out,
            reason: "the file exists: pass --force to overwrite it".into(),
        });
    }
    let text =
        std::fs::read_to_string(&a.words).map_err(|e| Error::io("cannot read", &a.words, e))?;
    let entries = parse_word_list(&text, &a.words)?;
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
