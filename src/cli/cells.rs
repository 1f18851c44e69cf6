//! `tactread cells`: write text as braille cells, or read cells back as text,
//! with a language pack's code table.
//!
//! Input is the command-line argument, or standard input line by line when
//! there is none; each input line gives one output line. Cells are printed as
//! Unicode braille patterns, or with `--dots` as dot numbers joined by `-`
//! (`0` is the empty cell between words), e.g. `6-1235-135-135-134-0-3456-1-12-6-12`.

use std::io::{BufRead, Write};

use clap::Args as ClapArgs;
use tactread::{cells_to_unicode, Cell, CodeTable, Error, Location, Result};

/// Options of `tactread cells`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Language pack (en, de, fr, es) or the path of a code table file.
    #[arg(long, default_value = "en", value_name = "LANG|FILE")]
    lang: String,

    /// Read braille and print text (default: read text and print braille).
    #[arg(long)]
    to_text: bool,

    /// Cells as dot numbers joined by '-', "0" for the empty cell
    /// (printed; or read, with --to-text) instead of Unicode braille.
    #[arg(long)]
    dots: bool,

    /// Drop characters the code cannot write (listed on stderr) instead of
    /// failing.
    #[arg(long, conflicts_with = "to_text")]
    lossy: bool,

    /// Text to write (or braille to read). Several arguments are joined by
    /// spaces. Without any, standard input is read line by line.
    input: Vec<String>,
}

/// Run `tactread cells`.
pub fn run(args: Args) -> Result<()> {
    let table = CodeTable::resolve(&args.lang)?;
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    if args.input.is_empty() {
        let stdin = std::io::stdin();
        for (i, line) in stdin.lock().lines().enumerate() {
            let line = line.map_err(|e| Error::io("cannot read", "<stdin>", e))?;
            let result = convert(&table, &args, &line, "<stdin>", i + 1)?;
            write_line(&mut out, &result)?;
        }
    } else {
        let joined = args.input.join(" ");
        for (i, line) in joined.lines().enumerate() {
            let result = convert(&table, &args, line, "<argument>", i + 1)?;
            write_line(&mut out, &result)?;
        }
    }
    out.flush()
        .map_err(|e| Error::io("cannot write", "<stdout>", e))
}

fn write_line(out: &mut impl Write, text: &str) -> Result<()> {
    writeln!(out, "{text}").map_err(|e| Error::io("cannot write", "<stdout>", e))
}

/// One input line to one output line.
fn convert(table: &CodeTable, args: &Args, line: &str, source: &str, no: usize) -> Result<String> {
    let line = line.strip_suffix('\r').unwrap_or(line);
    if args.to_text {
        let cells = if args.dots {
            parse_dots(line, source, no)?
        } else {
            parse_unicode(line, source, no)?
        };
        let decoded = table.decode(&cells);
        if !decoded.unreadable.is_empty() {
            let list: Vec<String> = decoded
                .unreadable
                .iter()
                .map(|i| (i + 1).to_string())
                .collect();
            eprintln!(
                "warning: {source} line {no}: cell(s) {} have no reading in `{}` where they stand; kept as braille patterns in the text",
                list.join(", "),
                table.lang()
            );
        }
        return Ok(decoded.text);
    }
    let cells = if args.lossy {
        let (cells, skipped) = table.encode_lossy(line);
        for (i, ch) in skipped {
            eprintln!(
                "warning: {source} line {no}: dropped {:?} (character {}), which the `{}` code table cannot write there",
                ch,
                i + 1,
                table.lang()
            );
        }
        cells
    } else {
        table
            .encode(line)
            .map_err(|e| Error::input(Location::file(source).line(no), e.to_string()))?
    };
    Ok(if args.dots {
        let parts: Vec<String> = cells.iter().map(|c| c.dot_string()).collect();
        parts.join("-")
    } else {
        cells_to_unicode(&cells)
    })
}

/// Unicode braille patterns; a plain space also reads as the empty cell.
fn parse_unicode(line: &str, source: &str, no: usize) -> Result<Vec<Cell>> {
    line.chars()
        .enumerate()
        .map(|(k, ch)| match (ch, Cell::from_char(ch)) {
            (_, Some(cell)) => Ok(cell),
            (' ', None) => Ok(Cell::EMPTY),
            _ => Err(Error::input(
                Location::file(source)
                    .line(no)
                    .field(format!("character {}", k + 1)),
                format!(
                    "{ch:?} is not a braille pattern: give Unicode braille (U+2800..U+28FF, spaces between words allowed), or dot numbers with --dots"
                ),
            )),
        })
        .collect()
}

/// Dot numbers such as `6-1235-0-3456`: cells joined by '-' or whitespace,
/// `0` the empty cell.
fn parse_dots(line: &str, source: &str, no: usize) -> Result<Vec<Cell>> {
    let mut cells = Vec::new();
    for (k, token) in line
        .split(|c: char| c == '-' || c.is_whitespace())
        .filter(|t| !t.is_empty())
        .enumerate()
    {
        let bad = |why: &str| {
            Error::input(
                Location::file(source)
                    .line(no)
                    .field(format!("cell {}", k + 1)),
                format!("`{token}` {why}: write each cell's dots 1-8 in increasing order (e.g. 1245), `0` for the empty cell, cells joined by '-'"),
            )
        };
        if token == "0" {
            cells.push(Cell::EMPTY);
            continue;
        }
        let mut dots = Vec::new();
        for c in token.chars() {
            match c.to_digit(10) {
                Some(d @ 1..=8) if dots.last().is_none_or(|&l| l < d as u8) => dots.push(d as u8),
                Some(1..=8) => return Err(bad("repeats a dot or is out of order")),
                _ => return Err(bad("is not a cell of dot numbers")),
            }
        }
        cells.push(Cell::from_dots(&dots).ok_or_else(|| bad("is not a cell of dot numbers"))?);
    }
    Ok(cells)
}
