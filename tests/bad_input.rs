//! Every row of docs/bad-input.md: one class of bad input, the error it
//! gets (the message exactly as printed) and the exit code. Through the
//! built binary where a command reads that kind of file (`tactread
//! inspect`, `cells`, `lexicon`, `simulate`, `decode`), else through the
//! library (row R38, and the library side of R28). Each test names its row
//! (`row_r07_...` is row R7); a change to a message changes the table too.
//!
//! Commands run in a scratch folder with relative paths, so messages read
//! as a user sees them (`scan.csv line 4, ...`).

mod common;

use common::cli::{scratch, tactread_in};
use std::path::Path;

use tactread::net::{GruConfig, Model, Network, SensorSummary, TrainingSummary};
use tactread::prep::{Grid, Prep};
use tactread::Error;

fn write(dir: &Path, name: &str, bytes: impl AsRef<[u8]>) {
    std::fs::write(dir.join(name), bytes).unwrap();
}

/// Run the binary in `dir`; returns (exit code, stderr).
fn run(dir: &Path, args: &[&str]) -> (i32, String) {
    let out = tactread_in(dir, args);
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(!stderr.contains("panicked"), "{args:?} panicked:\n{stderr}");
    (out.status.code().unwrap_or(-1), stderr)
}

/// Assert that `args` fails with exactly `message` (plus a newline) on
/// stderr and exit code `code`.
fn fails(dir: &Path, args: &[&str], code: i32, message: &str) {
    let (got_code, stderr) = run(dir, args);
    assert_eq!(stderr, format!("{message}\n"), "stderr of {args:?}");
    assert_eq!(got_code, code, "exit code of {args:?}");
}

/// A CSV manifest `<stem>.json` for frames `<stem>.csv` with `taxels`.
fn csv_manifest(dir: &Path, stem: &str, taxels: usize) {
    write(
        dir,
        &format!("{stem}.json"),
        format!(
            r#"{{"format": "tactread-recording", "version": 1, "frames": "{stem}.csv",
  "sensor": {{"taxels": {taxels}, "sample_rate_hz": 50.0}}}}"#
        ),
    );
}

/// An `.npy` manifest `<stem>.json` for frames `<stem>.npy`, with a time
/// column and `taxels` taxels.
fn npy_manifest(dir: &Path, stem: &str, taxels: usize) {
    write(
        dir,
        &format!("{stem}.json"),
        format!(
            r#"{{"format": "tactread-recording", "version": 1, "frames": "{stem}.npy",
  "sensor": {{"taxels": {taxels}, "sample_rate_hz": 50.0}},
  "npy_columns": {{"time_s": true, "position_mm": false}}}}"#
        ),
    );
}

/// An `.npy` file (format 1.0, little-endian float64, C order) of `rows`
/// rows of `cols` values, laid out as NumPy Enhancement Proposal 1
/// describes (magic, version, u16 header length, dict padded with spaces
/// and a newline to a multiple of 64 bytes; from memory).
fn npy(rows: usize, cols: usize, values: impl Fn(usize, usize) -> f64) -> Vec<u8> {
    let dict = format!("{{'descr': '<f8', 'fortran_order': False, 'shape': ({rows}, {cols}), }}");
    let unpadded = 10 + dict.len() + 1;
    let pad = (64 - unpadded % 64) % 64;
    let mut out = b"\x93NUMPY\x01\x00".to_vec();
    out.extend_from_slice(&((dict.len() + pad + 1) as u16).to_le_bytes());
    out.extend_from_slice(dict.as_bytes());
    out.resize(out.len() + pad, b' ');
    out.push(b'\n');
    for r in 0..rows {
        for c in 0..cols {
            out.extend_from_slice(&values(r, c).to_le_bytes());
        }
    }
    out
}

/// Four frames at 50 Hz: time, then taxels of 1.0.
fn good_npy(rows: usize, cols: usize) -> Vec<u8> {
    npy(
        rows,
        cols,
        |r, c| if c == 0 { r as f64 / 50.0 } else { 1.0 },
    )
}

// ---- Truncated files --------------------------------------------------

#[test]
fn row_r01_truncated_csv() {
    let d = scratch("r01");
    csv_manifest(&d, "scan", 2);
    write(
        &d,
        "scan.csv",
        "time_s,taxel_0,taxel_1\n0.00,0.5,1\n0.02,0.7",
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 3, field `taxel_1`: data row 2: missing value: the row has 2 \
         values, the header has 3 columns, and the file ends inside this row without a line \
         break: the file was cut short; copy it again from its source, or delete the unfinished \
         last line",
    );
}

#[test]
fn row_r02_truncated_npy_data() {
    let d = scratch("r02");
    npy_manifest(&d, "scan", 2);
    let mut bytes = good_npy(4, 3);
    bytes.truncate(bytes.len() - 12);
    write(&d, "scan.npy", bytes);
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.npy: truncated: the header declares 4 rows x 3 columns (96 bytes of data) \
         but only 84 bytes follow (3 complete rows): the file was cut short; copy it again or \
         re-save it",
    );
}

#[test]
fn row_r03_truncated_npy_header() {
    let d = scratch("r03");
    npy_manifest(&d, "scan", 2);
    write(&d, "scan.npy", &good_npy(4, 3)[..40]);
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.npy: the file is cut short inside its header: copy it again from its source",
    );
}

#[test]
fn row_r04_truncated_manifest() {
    let d = scratch("r04");
    write(
        &d,
        "scan.json",
        r#"{"format": "tactread-recording", "version": 1, "frames": "scan.csv", "sensor": {"taxels": 2"#,
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.json line 1: column 91: EOF while parsing an object: fix the JSON syntax",
    );
}

#[test]
fn row_r05_truncated_code_table() {
    // Cut inside a line: the half line is refused. (A cut at a line end
    // leaves a shorter valid table; see the note under the table.)
    let d = scratch("r05");
    write(&d, "code.txt", "format tactread-code 1\nlanguag");
    fails(
        &d,
        &["cells", "--lang", "./code.txt", "tea"],
        1,
        "error: ./code.txt line 2, field `keyword`: unknown keyword `languag`: a line starts with \
         one of format, language, title, source, letter, digit, sign, indicator",
    );
}

#[test]
fn row_r06_truncated_lexicon() {
    let d = scratch("r06");
    write(&d, "words.txt", "tea\t3\njar\n");
    assert_eq!(
        run(&d, &["lexicon", "build", "words.txt", "--out", "w.lex"]).0,
        0
    );
    let bytes = std::fs::read(d.join("w.lex")).unwrap();
    // Inside the header, then inside the word map.
    write(&d, "head.lex", &bytes[..20]);
    fails(
        &d,
        &["lexicon", "info", "head.lex"],
        3,
        "error: head.lex: expected tactread-lexicon version 1, found a file that is not a \
         tactread lexicon: rebuild it from its word list with `tactread lexicon build WORDS \
         --out PATH`",
    );
    write(&d, "map.lex", &bytes[..bytes.len() - 3]);
    let (code, stderr) = run(&d, &["lexicon", "info", "map.lex"]);
    assert_eq!(code, 3, "{stderr}");
    assert!(
        stderr.starts_with(
            "error: map.lex: expected tactread-lexicon version 1, found a damaged word map"
        ),
        "{stderr}"
    );
}

#[test]
fn row_r07_truncated_model() {
    let d = scratch("r07");
    let text = model_json(3);
    write(&d, "model.json", &text[..text.len() / 2]);
    three_taxel_recording(&d);
    let (code, stderr) = run(&d, &["decode", "model.json", "scan.json"]);
    assert_eq!(code, 3, "{stderr}");
    assert!(
        stderr.starts_with(
            "error: model.json: expected tactread-model version 1, found a file that is not a \
             JSON object (EOF while parsing"
        ),
        "{stderr}"
    );
    assert!(
        stderr.ends_with(": train a model with this build's `tactread train`\n"),
        "{stderr}"
    );
}

#[test]
fn row_r08_truncated_sensor_file() {
    let d = scratch("r08");
    write(&d, "sensor.json", &sensor_json(|_| {})[..120]);
    let (code, stderr) = run(
        &d,
        &[
            "simulate",
            "tea",
            "--sensor",
            "./sensor.json",
            "--out",
            "x.json",
        ],
    );
    assert_eq!(code, 1, "{stderr}");
    assert!(
        stderr.starts_with("error: ./sensor.json line ") && stderr.contains("EOF while parsing"),
        "{stderr}"
    );
    assert!(
        stderr.ends_with(": see docs/sensor-format.md for the sensor file format\n"),
        "{stderr}"
    );
}

// ---- Invalid UTF-8 ----------------------------------------------------

#[test]
fn row_r09_invalid_utf8_in_csv() {
    let d = scratch("r09");
    csv_manifest(&d, "scan", 2);
    write(
        &d,
        "scan.csv",
        b"time_s,taxel_0,taxel_1\n0.00,0.5,1\n0.02,0.\xff7,2\n",
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 3, field `taxel_0`: invalid UTF-8 at byte 8 of the line: save the \
         file as UTF-8 (or plain ASCII) text",
    );
}

#[test]
fn row_r10_invalid_utf8_in_manifest() {
    let d = scratch("r10");
    write(
        &d,
        "scan.json",
        b"{\"format\": \"tactread-recording\",\n \"text\": \"caf\xe9\"}",
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.json line 2: column 14: invalid UTF-8 (byte offset 46): save the manifest as UTF-8",
    );
}

#[test]
fn row_r11_invalid_utf8_in_code_table() {
    let d = scratch("r11");
    write(
        &d,
        "code.txt",
        b"format tactread-code 1\nlanguage en\nletter \xe9 1\n",
    );
    fails(
        &d,
        &["cells", "--lang", "./code.txt", "tea"],
        1,
        "error: ./code.txt line 3: invalid UTF-8 at byte 8 of the line: save the file as UTF-8",
    );
}

#[test]
fn row_r12_invalid_utf8_in_word_list() {
    let d = scratch("r12");
    write(&d, "words.txt", b"tea\t3\nj\xffr\n");
    fails(
        &d,
        &["lexicon", "build", "words.txt", "--out", "w.lex"],
        1,
        "error: words.txt line 2: invalid UTF-8 at byte 2 of the line: save the file as UTF-8",
    );
}

#[test]
fn row_r13_invalid_utf8_in_sensor_file() {
    let d = scratch("r13");
    write(
        &d,
        "sensor.json",
        b"{\"format\": \"tactread-sensor\",\n\"name\": \"caf\xe9\"}",
    );
    fails(
        &d,
        &[
            "simulate",
            "tea",
            "--sensor",
            "./sensor.json",
            "--out",
            "x.json",
        ],
        1,
        "error: ./sensor.json line 2: invalid UTF-8 at byte 13 of the line: save the file as UTF-8",
    );
}

#[test]
fn row_r14_invalid_utf8_in_model() {
    let d = scratch("r14");
    let mut bytes = model_json(3).into_bytes();
    bytes[20] = 0xff;
    write(&d, "model.json", bytes);
    three_taxel_recording(&d);
    fails(
        &d,
        &["decode", "model.json", "scan.json"],
        1,
        "error: model.json line 1: invalid UTF-8 at byte 21 of the line: a model file is UTF-8 \
         JSON written by tactread: copy it again or train the model again",
    );
}

// ---- NaN and huge values ----------------------------------------------

#[test]
fn row_r15_nan_in_csv() {
    let d = scratch("r15");
    csv_manifest(&d, "scan", 2);
    write(
        &d,
        "scan.csv",
        "time_s,taxel_0,taxel_1\n0.00,0.5,1\n0.02,0.7,2\n0.04,NaN,2\n",
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 4, field `taxel_0`: data row 3: NaN is not allowed: every value \
         must be a finite number; fix the rig's output, drop the row, or fill the value from its \
         neighbours",
    );
}

#[test]
fn row_r16_infinite_in_csv() {
    let d = scratch("r16");
    csv_manifest(&d, "scan", 2);
    write(
        &d,
        "scan.csv",
        "time_s,taxel_0,taxel_1\n0.00,0.5,1\n0.02,0.7,inf\n",
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 3, field `taxel_1`: data row 2: an infinite value (+inf) is not \
         allowed: every value must be a finite number; fix the rig's output, drop the row, or \
         fill the value from its neighbours",
    );
}

#[test]
fn row_r17_huge_value_in_csv() {
    let d = scratch("r17");
    csv_manifest(&d, "scan", 2);
    write(
        &d,
        "scan.csv",
        "time_s,taxel_0,taxel_1\n0.00,0.5,1\n0.02,0.7,1e39\n",
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 3, field `taxel_1`: data row 2: `1e39` is too large for a taxel \
         value (32-bit float, largest about 3.4e38): check the units or scaling of this column",
    );
}

#[test]
fn row_r18_nan_in_npy() {
    let d = scratch("r18");
    npy_manifest(&d, "scan", 2);
    let bytes = npy(4, 3, |r, c| match (r, c) {
        (_, 0) => r as f64 / 50.0,
        (2, 1) => f64::NAN,
        _ => 1.0,
    });
    write(&d, "scan.npy", bytes);
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.npy line 3, field `taxel_0`: row 3: NaN is not allowed: every value must be \
         a finite number; fix the rig's output, drop the row, or fill the value from its \
         neighbours",
    );
}

#[test]
fn row_r19_huge_value_in_npy() {
    let d = scratch("r19");
    npy_manifest(&d, "scan", 2);
    let bytes = npy(4, 3, |r, c| match (r, c) {
        (_, 0) => r as f64 / 50.0,
        (1, 2) => 1e300,
        _ => 1.0,
    });
    write(&d, "scan.npy", bytes);
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.npy line 2, field `taxel_1`: row 2: 1e300 is too large for a taxel value \
         (32-bit float, largest about 3.4e38): check the units or scaling of this column",
    );
}

#[test]
fn row_r20_huge_number_in_manifest() {
    let d = scratch("r20");
    write(
        &d,
        "scan.json",
        r#"{"format": "tactread-recording", "version": 1, "frames": "scan.csv",
"sensor": {"taxels": 2, "sample_rate_hz": 1e999}}"#,
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.json line 2: column 47: number out of range: fix the JSON syntax",
    );
}

#[test]
fn row_r21_huge_taxel_count_in_manifest() {
    let d = scratch("r21");
    write(
        &d,
        "scan.json",
        r#"{"format": "tactread-recording", "version": 1, "frames": "scan.csv",
"sensor": {"taxels": 99999999999, "sample_rate_hz": 50}}"#,
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.json, field `sensor.taxels`: 99999999999 is more than the 1048576 taxels \
         this build reads: check the value",
    );
}

#[test]
fn row_r22_huge_parameter_in_model() {
    // 1e39 does not fit a 32-bit float (it would read as +inf and make
    // every output NaN); the parameter reader refuses it.
    let d = scratch("r22");
    let mut v: serde_json::Value = serde_json::from_str(&model_json(3)).unwrap();
    v["network"]["head"]["b"]["data"][0] = serde_json::json!(1e39);
    write(&d, "model.json", v.to_string());
    three_taxel_recording(&d);
    let (code, stderr) = run(&d, &["decode", "model.json", "scan.json"]);
    assert_eq!(code, 3, "{stderr}");
    assert!(
        stderr.starts_with(
            "error: model.json: expected tactread-model version 1, found a damaged \
             tactread-model file (number out of range at line 1 column "
        ),
        "{stderr}"
    );
    assert!(
        stderr.ends_with("): train a model with this build's `tactread train`\n"),
        "{stderr}"
    );
}

// ---- Wrong taxel counts -----------------------------------------------

#[test]
fn row_r23_csv_has_fewer_taxel_columns() {
    let d = scratch("r23");
    csv_manifest(&d, "scan", 3);
    write(&d, "scan.csv", "time_s,taxel_0,taxel_1\n0.00,0.5,1\n");
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 1, field `taxel_2`: missing column: the header has 2 taxel columns \
         after `time_s` but the manifest declares 3 (sensor.taxels): add the missing columns or \
         fix sensor.taxels",
    );
}

#[test]
fn row_r24_csv_has_more_taxel_columns() {
    let d = scratch("r24");
    csv_manifest(&d, "scan", 1);
    write(&d, "scan.csv", "time_s,taxel_0,taxel_1\n0.00,0.5,1\n");
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 1, field `taxel_1`: extra column `taxel_1`: the header has 2 taxel \
         columns after `time_s` but the manifest declares 1 (sensor.taxels): remove the extra \
         columns or fix sensor.taxels",
    );
}

#[test]
fn row_r25_csv_row_with_too_few_values() {
    let d = scratch("r25");
    csv_manifest(&d, "scan", 2);
    write(
        &d,
        "scan.csv",
        "time_s,taxel_0,taxel_1\n0.00,0.5,1\n0.02,0.7\n0.04,0.1,0.2\n",
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 3, field `taxel_1`: data row 2: missing value: the row has 2 \
         values, the header has 3 columns: give every column a value, or drop the row",
    );
}

#[test]
fn row_r26_npy_column_count_differs() {
    let d = scratch("r26");
    npy_manifest(&d, "scan", 3);
    write(&d, "scan.npy", good_npy(4, 3));
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.npy, field `taxel_2`: missing column: the array has 3 columns but the \
         manifest expects 4: time_s + 3 taxels (sensor.taxels); fix npy_columns or \
         sensor.taxels, or save the right columns",
    );
}

#[test]
fn row_r27_manifest_positions_disagree_with_taxels() {
    let d = scratch("r27");
    write(
        &d,
        "scan.json",
        r#"{"format": "tactread-recording", "version": 1, "frames": "scan.csv",
"sensor": {"taxels": 3, "positions_mm": [[0, 0], [0, 1.5]], "sample_rate_hz": 50}}"#,
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.json, field `sensor.positions_mm`: lists 2 positions but sensor.taxels is \
         3: give one [x, y] pair per taxel, in column order",
    );
}

#[test]
fn row_r28_model_for_another_taxel_count() {
    let d = scratch("r28");
    write(&d, "model.json", model_json(3));
    csv_manifest(&d, "scan", 4);
    write(
        &d,
        "scan.csv",
        "time_s,taxel_0,taxel_1,taxel_2,taxel_3\n0.00,1,1,1,1\n0.02,1,1,1,1\n",
    );
    fails(
        &d,
        &["decode", "model.json", "scan.json"],
        3,
        "error: taxel count of scan.json: expected 3 (the model's sensor), got 4: use a model \
         trained on recordings of this sensor",
    );
    // The library says the same, and the network refuses such frames too,
    // rather than reading past them.
    let model = Model::from_json(&model_json(3), Path::new("model.json")).unwrap();
    let e = model.check_taxels(24, "scan.json").unwrap_err();
    assert!(matches!(e, Error::Mismatch { .. }), "{e:?}");
    assert_eq!(e.exit_code(), 3);
    assert_eq!(
        e.to_string(),
        "taxel count of scan.json: expected 3 (the model's sensor), got 24: use a model trained \
         on recordings of this sensor"
    );
    // The network refuses such frames too, rather than reading past them.
    let frames = ndarray::Array2::<f32>::zeros((5, 24));
    assert!(model.network.forward(&[frames.view()]).is_err());
}

// ---- Empty recordings -------------------------------------------------

#[test]
fn row_r29_empty_csv_file() {
    let d = scratch("r29");
    csv_manifest(&d, "scan", 2);
    write(&d, "scan.csv", "");
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv: file is empty: a CSV frames file starts with a header line such as \
         `time_s,taxel_0,taxel_1,...`",
    );
}

#[test]
fn row_r30_csv_header_without_rows() {
    let d = scratch("r30");
    csv_manifest(&d, "scan", 2);
    write(&d, "scan.csv", "time_s,taxel_0,taxel_1\n\n");
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv: no frames: the file has a header but no data rows; a recording needs \
         at least one frame",
    );
}

#[test]
fn row_r31_empty_npy_file() {
    let d = scratch("r31");
    npy_manifest(&d, "scan", 2);
    write(&d, "scan.npy", "");
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.npy: file is empty: an .npy frames file holds a 2-D float array (see \
         docs/recording-format.md)",
    );
}

#[test]
fn row_r32_npy_with_no_rows() {
    let d = scratch("r32");
    npy_manifest(&d, "scan", 2);
    write(&d, "scan.npy", good_npy(0, 3));
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.npy: no frames: the array has 0 rows; a recording needs at least one frame",
    );
}

#[test]
fn row_r33_empty_manifest() {
    let d = scratch("r33");
    write(&d, "scan.json", "  \n");
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.json: manifest is empty: write a JSON object with `format`, `version`, \
         `frames` and `sensor` (see docs/recording-format.md)",
    );
}

#[test]
fn row_r34_time_does_not_increase() {
    let d = scratch("r34");
    csv_manifest(&d, "scan", 1);
    write(&d, "scan.csv", "time_s,taxel_0\n0.0,1\n0.1,2\n0.1,3\n");
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.csv line 4, field `time_s`: data row 3: time_s must increase from row to \
         row: 0.1 s follows 0.1 s on the previous row; sort the rows by time and remove repeated \
         frames",
    );
}

// ---- Unknown language -------------------------------------------------

#[test]
fn row_r35_unknown_language_for_cells() {
    let d = scratch("r35");
    fails(
        &d,
        &["cells", "--lang", "xx", "tea"],
        2,
        "error: invalid --lang: unknown language `xx`: built in are en, de, fr, es; or give the \
         path of a code table file (see lexicons/README.md)",
    );
}

#[test]
fn row_r36_unknown_language_for_simulate() {
    let d = scratch("r36");
    fails(
        &d,
        &["simulate", "tea", "--lang", "xx", "--out", "x.json"],
        2,
        "error: invalid --lang: unknown language `xx`: built in are en, de, fr, es; or give the \
         path of a code table file (see lexicons/README.md)",
    );
}

#[test]
fn row_r37_language_tag_in_manifest_is_not_a_tag() {
    let d = scratch("r37");
    write(
        &d,
        "scan.json",
        r#"{"format": "tactread-recording", "version": 1, "frames": "scan.csv", "lang": "en GB",
"sensor": {"taxels": 2, "sample_rate_hz": 50}}"#,
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        1,
        "error: scan.json, field `lang`: \"en GB\" is not a language tag: use a short code such \
         as \"en\", \"de\", \"fr\" or \"es\"",
    );
}

#[test]
fn row_r38_unknown_language_in_the_library() {
    let e = tactread::CodeTable::builtin("xx").unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert_eq!(
        e.to_string(),
        "invalid language: no built-in code table for `xx`: built in are en, de, fr, es; or load \
         a code table file"
    );
    let e = tactread::lexicon::Lexicon::builtin("xx").unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert_eq!(
        e.to_string(),
        "invalid language: no builtin lexicon for `xx`: choose one of en, de, fr, es, or build \
         one with `tactread lexicon build`"
    );
}

// ---- Code tables ------------------------------------------------------

#[test]
fn row_r39_code_table_bad_dot_number() {
    let d = scratch("r39");
    write(
        &d,
        "code.txt",
        "format tactread-code 1\nlanguage en\nindicator capital 6\nletter a 1\nletter b 19\n",
    );
    fails(
        &d,
        &["cells", "--lang", "./code.txt", "ab"],
        1,
        "error: ./code.txt line 5, field `dots`: `9` in `19` is not a dot number: dots are 1 to \
         6, written together (`1245`), cells joined by '-'",
    );
}

#[test]
fn row_r40_code_table_duplicate_character() {
    let d = scratch("r40");
    write(
        &d,
        "code.txt",
        "format tactread-code 1\nlanguage en\nindicator capital 6\nletter a 1\nletter a 12\n",
    );
    fails(
        &d,
        &["cells", "--lang", "./code.txt", "ab"],
        1,
        "error: ./code.txt line 5, field `character`: `a` is already defined on line 4: a \
         character has one sign; remove one of the lines",
    );
}

#[test]
fn row_r41_code_table_two_signs_one_pattern() {
    let d = scratch("r41");
    write(
        &d,
        "code.txt",
        "format tactread-code 1\nlanguage en\nindicator capital 6\nletter a 1\nletter b 1\n",
    );
    fails(
        &d,
        &["cells", "--lang", "./code.txt", "ab"],
        1,
        "error: ./code.txt line 5, field `dots`: dots 1 are already letter `a` (line 4) in text: \
         a reader could not tell letter `b` from it; give one of them other dots, or, if one of \
         them is read only at the start of a word, mark that one `opening`",
    );
}

#[test]
fn row_r42_code_table_of_another_format_version() {
    let d = scratch("r42");
    write(
        &d,
        "code.txt",
        "format tactread-code 2\nlanguage en\nletter a 1\n",
    );
    fails(
        &d,
        &["cells", "--lang", "./code.txt", "a"],
        1,
        "error: ./code.txt line 1, field `format`: format version 2, but this build reads \
         version 1: use a tactread release that reads version 2, or rewrite the table for \
         version 1",
    );
}

// ---- Other format versions, damaged files -----------------------------

#[test]
fn row_r43_manifest_of_a_newer_version() {
    let d = scratch("r43");
    write(
        &d,
        "scan.json",
        r#"{"format": "tactread-recording", "version": 2, "frames": "scan.csv",
"sensor": {"taxels": 2, "sample_rate_hz": 50}}"#,
    );
    fails(
        &d,
        &["inspect", "scan.json"],
        3,
        "error: scan.json: expected tactread-recording version 1 or older, found \
         tactread-recording version 2: the file was written by a newer tactread: upgrade \
         tactread to read it",
    );
}

#[test]
fn row_r44_lexicon_of_another_version() {
    let d = scratch("r44");
    write(&d, "words.txt", "tea\t3\njar\n");
    assert_eq!(
        run(&d, &["lexicon", "build", "words.txt", "--out", "w.lex"]).0,
        0
    );
    let mut bytes = std::fs::read(d.join("w.lex")).unwrap();
    bytes[16..20].copy_from_slice(&2u32.to_le_bytes());
    write(&d, "v2.lex", bytes);
    fails(
        &d,
        &["lexicon", "info", "v2.lex"],
        3,
        "error: v2.lex: expected tactread-lexicon version 1, found tactread-lexicon version 2: \
         rebuild it from its word list with `tactread lexicon build WORDS --out PATH`",
    );
}

#[test]
fn row_r45_damaged_lexicon() {
    let d = scratch("r45");
    write(&d, "words.txt", "tea\t3\njar\n");
    assert_eq!(
        run(&d, &["lexicon", "build", "words.txt", "--out", "w.lex"]).0,
        0
    );
    let mut bytes = std::fs::read(d.join("w.lex")).unwrap();
    bytes[40] ^= 0xff;
    write(&d, "bad.lex", bytes);
    let (code, stderr) = run(&d, &["lexicon", "info", "bad.lex"]);
    assert_eq!(code, 3, "{stderr}");
    assert!(
        stderr.starts_with(
            "error: bad.lex: expected tactread-lexicon version 1, found a damaged word map (FST \
             verification failed: expected checksum of "
        ),
        "{stderr}"
    );
    assert!(
        stderr.ends_with(
            "): rebuild it from its word list with `tactread lexicon build WORDS --out PATH`\n"
        ),
        "{stderr}"
    );
}

#[test]
fn row_r46_model_of_another_version() {
    let d = scratch("r46");
    let mut v: serde_json::Value = serde_json::from_str(&model_json(3)).unwrap();
    v["version"] = 2.into();
    write(&d, "model.json", v.to_string());
    three_taxel_recording(&d);
    fails(
        &d,
        &["decode", "model.json", "scan.json"],
        3,
        "error: model.json: expected tactread-model version 1, found tactread-model version 2: \
         train a model with this build's `tactread train`",
    );
}

#[test]
fn row_r47_sensor_file_of_another_version() {
    let d = scratch("r47");
    write(&d, "sensor.json", sensor_json(|s| s["version"] = 2.into()));
    fails(
        &d,
        &[
            "simulate",
            "tea",
            "--sensor",
            "./sensor.json",
            "--out",
            "x.json",
        ],
        3,
        "error: ./sensor.json: expected tactread-sensor version 1, found version 2: rewrite the \
         file per docs/sensor-format.md for this version",
    );
}

#[test]
fn row_r48_word_list_count_not_a_number() {
    let d = scratch("r48");
    write(&d, "words.txt", "tea\tthree\n");
    fails(
        &d,
        &["lexicon", "build", "words.txt", "--out", "w.lex"],
        1,
        "error: words.txt line 1, field `count`: \"three\" is not a whole number: the count \
         after the tab must be an integer such as 42",
    );
}

// ---- Sensor files -----------------------------------------------------

#[test]
fn row_r49_sensor_file_with_overlapping_taxels() {
    let d = scratch("r49");
    write(
        &d,
        "sensor.json",
        sensor_json(|s| {
            s["layout"] = serde_json::json!({
                "kind": "positions",
                "positions_mm": [[0, 0], [1.5, 0], [1.5, 0.0004], [3, 0]]
            })
        }),
    );
    fails(
        &d,
        &[
            "simulate",
            "tea",
            "--sensor",
            "./sensor.json",
            "--out",
            "x.json",
        ],
        1,
        "error: ./sensor.json, field `layout`: taxels 1 and 2 sit at the same place [1.5, 0.0]: \
         move one",
    );
}

// ---- Invalid UTF-8 in the other files tactread reads -------------------

#[test]
fn row_r50_invalid_utf8_in_dataset_index() {
    let d = scratch("r50");
    std::fs::create_dir_all(d.join("data")).unwrap();
    write(&d, "data/index.json", b"{\"format\": \"\xff\"}\n");
    fails(
        &d,
        &["train", "--data", "data", "--out", "m.json"],
        1,
        "error: data/index.json line 1: invalid UTF-8 at byte 13 of the line: a dataset index \
         is UTF-8 JSON (see docs/dataset-format.md): save it as UTF-8",
    );
}

#[test]
fn row_r51_invalid_utf8_in_metrics_file() {
    let d = scratch("r51");
    write(
        &d,
        "a.json",
        b"{\"format\": \"tactread-metrics\",\n\"label\": \"caf\xe9\"}\n",
    );
    write(&d, "b.json", "{}");
    fails(
        &d,
        &["compare", "a.json", "b.json"],
        1,
        "error: a.json line 2: invalid UTF-8 at byte 14 of the line: a metrics file is UTF-8 \
         JSON written by `tactread evaluate --json`: write it again",
    );
}

#[test]
fn row_r52_invalid_utf8_in_checkpoint() {
    let d = scratch("r52");
    let (code, err) = run(
        &d,
        &[
            "simulate", "dataset", "--lines", "4", "--preset", "clean", "--lang", "en", "--jobs",
            "1", "--out", "data",
        ],
    );
    assert_eq!(code, 0, "{err}");
    write(&d, "m.json.ckpt", b"{\"format\": \"\xff\"}");
    // The checkpoint is read once the data are loaded, so the error is the
    // line after the one reporting the loaded recordings.
    let (code, err) = run(
        &d,
        &[
            "train", "--data", "data", "--out", "m.json", "--resume", "--hidden", "4", "--layers",
            "1",
        ],
    );
    assert_eq!(
        err.lines().last(),
        Some(
            "error: m.json.ckpt line 1: invalid UTF-8 at byte 13 of the line: a checkpoint is \
             UTF-8 JSON written by tactread: start again without --resume"
        ),
        "{err}"
    );
    assert_eq!(err.lines().count(), 2, "{err}");
    assert_eq!(code, 1);
}

#[test]
fn row_r53_invalid_utf8_in_weights_file() {
    let d = scratch("r53");
    three_taxel_recording(&d);
    write(&d, "model.json", model_json(3));
    write(&d, "w.json", b"{\n  \"lm_weight\": 1.0, \xff\n}\n");
    fails(
        &d,
        &["decode", "model.json", "scan.json", "--weights", "w.json"],
        1,
        "error: w.json line 2: invalid UTF-8 at byte 21 of the line: a weights file is UTF-8 \
         JSON written by `tactread lexicon tune`: write it again",
    );
}

#[test]
fn row_r54_invalid_utf8_in_simulator_text_file() {
    let d = scratch("r54");
    write(&d, "line.txt", b"caf\xe9 at 9\n");
    fails(
        &d,
        &["simulate", "--text-file", "line.txt", "--out", "x.json"],
        1,
        "error: line.txt line 1: invalid UTF-8 at byte 4 of the line: save the file as UTF-8",
    );
}

// ---- Outputs ------------------------------------------------------------

#[test]
fn row_r55_output_exists() {
    let d = scratch("r55");
    write(&d, "words.txt", "tea\n");
    write(&d, "w.lex", "keep me");
    fails(
        &d,
        &["lexicon", "build", "words.txt", "--out", "w.lex"],
        4,
        "error: refusing to write w.lex: the file exists: pass --force to replace it, or choose \
         another --out",
    );
    assert_eq!(std::fs::read(d.join("w.lex")).unwrap(), b"keep me");
}

#[test]
fn row_r56_output_is_an_input() {
    let d = scratch("r56");
    write(&d, "words.txt", "tea\n");
    fails(
        &d,
        &[
            "lexicon",
            "build",
            "words.txt",
            "--out",
            "./words.txt",
            "--force",
        ],
        4,
        "error: refusing to write ./words.txt: it is words.txt, an input of this command: choose \
         another --out (--force never writes over an input)",
    );
    assert_eq!(std::fs::read(d.join("words.txt")).unwrap(), b"tea\n");
}

#[test]
fn row_r57_resume_without_a_checkpoint() {
    let d = scratch("r57");
    fails(
        &d,
        &["train", "--data", "data", "--out", "m.json", "--resume"],
        2,
        "error: invalid --resume: m.json.ckpt does not exist, so there is no interrupted run of \
         m.json to continue: check --out, or start the run without --resume",
    );
}

// ---- Helpers for model and sensor files --------------------------------

/// A valid two-frame recording `scan.json` of 3 taxels, for the model rows.
fn three_taxel_recording(dir: &Path) {
    csv_manifest(dir, "scan", 3);
    write(
        dir,
        "scan.csv",
        "time_s,taxel_0,taxel_1,taxel_2\n0.00,1,1,1\n0.02,1,1,1\n",
    );
}

/// A small model file's JSON: a one-layer GRU of 4 units over `taxels`
/// taxels (seeded, untrained).
fn model_json(taxels: usize) -> String {
    let cfg = GruConfig {
        inputs: taxels,
        hidden: 4,
        layers: 1,
        bidirectional: false,
    };
    let prep = Prep {
        taxels,
        grid: Grid::Position { step_mm: 0.5 },
        decimate: 1,
        baseline: vec![0.0; taxels],
        scale: vec![1.0; taxels],
    };
    let net = Network::new(cfg, 1).unwrap();
    let summary = SensorSummary {
        taxels,
        name: Some("strip3".into()),
    };
    Model::new(net, prep, summary, "en", TrainingSummary::default()).to_json()
}

/// The built-in `pad4x3` sensor file, edited by `edit`.
fn sensor_json(edit: impl Fn(&mut serde_json::Value)) -> String {
    let text = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/sensors/pad4x3.json"))
        .unwrap();
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    edit(&mut v);
    serde_json::to_string_pretty(&v).unwrap()
}
