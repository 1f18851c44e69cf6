// File-format contracts, round trips, and old files that must keep loading.
//
// What belongs here: tests that read or write tactread's on-disk formats
// through the public API (recordings now; later model, lexicon and report
// files), files in tests/compat/ that every future build must still load, and
// cross-checks of our readers and writers against general-purpose reference
// implementations of the container formats (NumPy, the npyz crate).

mod common;

use common::cli::scratch;
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::path::{Path, PathBuf};
use tactread::recording::{
    FramesKind, Manifest, NpyColumns, Recording, RecordingStream, SaveOptions, SensorInfo,
    MANIFEST_FORMAT, MANIFEST_VERSION,
};
use tactread::{Error, Location};

fn compat(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/compat")
        .join(rel)
}

fn input_error(err: Error) -> (Location, String) {
    match err {
        Error::Input { at, message } => (at, message),
        other => panic!("expected Error::Input, got {other:?}"),
    }
}

/// The frames of the worked example in docs/recording-format.md, typed in
/// from the document.
fn tea_jar_values() -> (Vec<f64>, Vec<f64>, Array2<f32>) {
    let time = vec![0.00, 0.02, 0.04, 0.06, 0.08];
    let pos = vec![0.0, 0.4, 0.8, 1.2, 1.6];
    let frames = ndarray::arr2(&[
        [0.12f32, 0.10, 0.11, 0.09],
        [3.85, 0.14, 0.10, 0.12],
        [4.10, 3.92, 0.13, 0.11],
        [0.20, 4.05, 0.12, 0.10],
        [0.15, 0.18, 0.11, 3.70],
    ]);
    (time, pos, frames)
}

#[test]
fn manifest_new_saves_and_loads() {
    let dir = scratch("manifest-new");
    let rec = Recording {
        manifest: Manifest {
            text: Some("go".to_string()),
            ..Manifest::new(SensorInfo::new(2, 250.0))
        },
        time_s: vec![0.0, 0.004],
        position_mm: None,
        frames: ndarray::arr2(&[[1.0f32, 2.0], [3.0, 4.0]]),
    };
    rec.save(&dir.join("go.json"), FramesKind::Csv).unwrap();
    let back = Recording::load(&dir.join("go.json")).unwrap();
    assert_eq!(back.manifest.sensor.units, "arbitrary");
    assert_eq!(back.manifest.frames, "go.csv");
    assert_eq!(back.frames, rec.frames);
}

#[test]
fn version_1_csv_example_keeps_loading() {
    let rec = Recording::load(&compat("v1/tea-jar.json")).unwrap();
    let (time, pos, frames) = tea_jar_values();
    assert_eq!(rec.time_s, time);
    assert_eq!(rec.position_mm, Some(pos));
    assert_eq!(rec.frames, frames);
    let m = &rec.manifest;
    assert_eq!((m.format.as_str(), m.version), ("tactread-recording", 1));
    assert_eq!(m.sensor.name.as_deref(), Some("strip4"));
    assert_eq!(m.sensor.taxels, 4);
    assert_eq!(m.sensor.sample_rate_hz, 50.0);
    assert_eq!(m.sensor.units, "kPa");
    assert_eq!(m.sensor.positions_mm.as_ref().map(Vec::len), Some(4));
    assert_eq!(m.text.as_deref(), Some("tea"));
    assert_eq!(m.lang.as_deref(), Some("en"));
    assert_eq!(m.tags["speed_mm_s"], serde_json::json!(20.0));
    assert_eq!(m.npy_columns, None);
}

#[test]
fn version_1_npy_example_matches_the_csv() {
    // tea-jar-npy.npy was written by numpy 2.4.6 (tests/compat/make_npy_fixtures.py).
    let csv = Recording::load(&compat("v1/tea-jar.json")).unwrap();
    let npy = Recording::load(&compat("v1/tea-jar-npy.json")).unwrap();
    assert_eq!(npy.time_s, csv.time_s);
    assert_eq!(npy.position_mm, csv.position_mm);
    assert_eq!(npy.frames, csv.frames);
    assert_eq!(
        npy.manifest.npy_columns,
        Some(NpyColumns {
            time_s: true,
            position_mm: true
        })
    );
}

#[test]
fn frames_path_finds_the_manifest_beside_it() {
    let by_manifest = Recording::load(&compat("v1/tea-jar.json")).unwrap();
    assert_eq!(
        Recording::load(&compat("v1/tea-jar.csv")).unwrap(),
        by_manifest
    );
    let by_npy = Recording::load(&compat("v1/tea-jar-npy.npy")).unwrap();
    assert_eq!(by_npy.frames, by_manifest.frames);

    let dir = scratch("frames-path");
    std::fs::copy(compat("v1/tea-jar.csv"), dir.join("lonely.csv")).unwrap();
    let (at, message) = input_error(Recording::load(&dir.join("lonely.csv")).unwrap_err());
    assert_eq!(at.file, dir.join("lonely.csv"));
    assert!(message.contains("no manifest beside"), "{message}");

    // A manifest beside the frames file that names another frames file.
    std::fs::copy(compat("v1/tea-jar.json"), dir.join("lonely.json")).unwrap();
    let (at, message) = input_error(Recording::load(&dir.join("lonely.csv")).unwrap_err());
    assert_eq!(at.field.as_deref(), Some("frames"));
    assert!(message.contains("not"), "{message}");
}

/// Row `r`, taxel `k` of the numpy fixtures: r + k/4 (exact in binary);
/// time r/100; position r/2. The formula is in make_npy_fixtures.py.
fn check_numpy_fixture(stem: &str, with_position: bool) {
    let rec = Recording::load(&compat(&format!("numpy-2.4.6/{stem}.json"))).unwrap();
    assert_eq!(rec.frames.dim(), (37, 3), "{stem}");
    for r in 0..37 {
        for k in 0..3 {
            assert_eq!(
                rec.frames[[r, k]],
                r as f32 + k as f32 / 4.0,
                "{stem} [{r}, {k}]"
            );
        }
        // numpy computes r / 100 in float64; the time-from-rate path does the
        // same division, so both are exact matches.
        assert_eq!(rec.time_s[r], r as f64 / 100.0, "{stem} time {r}");
        if with_position {
            assert_eq!(rec.position_mm.as_ref().unwrap()[r], r as f64 / 2.0);
        }
    }
    assert_eq!(rec.position_mm.is_some(), with_position, "{stem}");
}

#[test]
fn numpy_written_npy_files_load() {
    check_numpy_fixture("f4-c-taxels-only", false);
    check_numpy_fixture("f8-fortran-time-position", true);
    check_numpy_fixture("f8-bigendian-time", false);
}

/// A recording with awkward values: times far from zero, tiny and huge
/// taxel values, negative zero, subnormals.
fn awkward_recording(n: usize, taxels: usize, with_position: bool, seed: u64) -> Recording {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut t = 1.7e9;
    let time_s: Vec<f64> = (0..n)
        .map(|_| {
            t += rng.gen_range(1e-4..2e-3);
            t
        })
        .collect();
    let position_mm = with_position.then(|| (0..n).map(|_| rng.gen_range(-5.0..300.0)).collect());
    let specials = [
        0.0f32,
        -0.0,
        1e-40,
        f32::MIN_POSITIVE,
        f32::MAX,
        -f32::MAX,
        1e-7,
        0.1,
    ];
    let frames = Array2::from_shape_fn((n, taxels), |(i, k)| {
        if (i + k) % 7 == 0 {
            specials[(i + k) % specials.len()]
        } else {
            rng.gen_range(-1.0e4f32..1.0e4) * 10f32.powi(rng.gen_range(-8..8))
        }
    });
    Recording {
        manifest: Manifest {
            format: MANIFEST_FORMAT.to_string(),
            version: MANIFEST_VERSION,
            frames: String::new(),
            sensor: SensorInfo {
                name: Some("awkward".to_string()),
                taxels,
                positions_mm: Some((0..taxels).map(|k| [0.0, k as f64 * 1.25]).collect()),
                sample_rate_hz: 1000.0,
                units: "adc".to_string(),
            },
            npy_columns: None,
            text: Some("Zoë's 2 jars".to_string()),
            lang: Some("en".to_string()),
            notes: Some("round trip".to_string()),
            tags: [("k".to_string(), serde_json::json!([1, "two"]))].into(),
        },
        time_s,
        position_mm,
        frames,
    }
}

/// Compare bit for bit, so that -0.0 and subnormals count.
fn assert_same_bits(a: &Recording, b: &Recording) {
    assert_eq!(a.frames.dim(), b.frames.dim());
    for (x, y) in a.frames.iter().zip(b.frames.iter()) {
        assert_eq!(x.to_bits(), y.to_bits(), "{x:e} vs {y:e}");
    }
    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    assert_eq!(bits(&a.time_s), bits(&b.time_s));
    assert_eq!(
        a.position_mm.as_deref().map(bits),
        b.position_mm.as_deref().map(bits)
    );
}

#[test]
fn csv_round_trip_is_exact() {
    let dir = scratch("csv-round-trip");
    for (i, with_position) in [true, false].into_iter().enumerate() {
        let rec = awkward_recording(300, 5, with_position, 7 + i as u64);
        let path = dir.join(format!("scan{i}.json"));
        rec.save(&path, FramesKind::Csv).unwrap();
        assert!(dir.join(format!("scan{i}.csv")).is_file());
        let back = Recording::load(&path).unwrap();
        assert_same_bits(&rec, &back);
        assert_eq!(back.manifest.frames, format!("scan{i}.csv"));
        let mut expected = rec.manifest.clone();
        expected.frames = back.manifest.frames.clone();
        assert_eq!(back.manifest, expected);
    }
}

#[test]
fn npy_round_trip_is_exact() {
    let dir = scratch("npy-round-trip");
    for (i, with_position) in [true, false].into_iter().enumerate() {
        let rec = awkward_recording(300, 5, with_position, 11 + i as u64);
        let path = dir.join(format!("scan{i}.json"));
        rec.save(&path, SaveOptions::new(FramesKind::Npy)).unwrap();
        let back = Recording::load(&path).unwrap();
        assert_same_bits(&rec, &back);
        assert_eq!(
            back.manifest.npy_columns,
            Some(NpyColumns {
                time_s: true,
                position_mm: with_position
            })
        );
    }
}

#[test]
fn save_refuses_to_overwrite_unless_asked_and_leaves_no_temp_files() {
    let dir = scratch("overwrite");
    let path = dir.join("scan.json");
    let rec = awkward_recording(10, 2, false, 3);
    rec.save(&path, FramesKind::Csv).unwrap();
    let before = std::fs::read(dir.join("scan.csv")).unwrap();
    let other = awkward_recording(12, 2, false, 4);
    match other.save(&path, FramesKind::Csv).unwrap_err() {
        Error::Output { path: p, reason } => {
            assert_eq!(p, dir.join("scan.csv"));
            assert!(reason.contains("exists"), "{reason}");
        }
        e => panic!("expected Error::Output, got {e:?}"),
    }
    assert_eq!(
        std::fs::read(dir.join("scan.csv")).unwrap(),
        before,
        "untouched"
    );
    // A different frames kind still refuses because the manifest exists.
    assert!(matches!(
        other.save(&path, FramesKind::Npy),
        Err(Error::Output { .. })
    ));
    other
        .save(&path, SaveOptions::new(FramesKind::Csv).overwrite(true))
        .unwrap();
    assert_eq!(Recording::load(&path).unwrap().frames.nrows(), 12);
    let mut names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["scan.csv", "scan.json"]);
}

#[test]
fn save_rejects_invalid_recordings() {
    let dir = scratch("save-invalid");
    let path = dir.join("scan.json");
    let mut rec = awkward_recording(10, 2, true, 5);
    rec.frames[[2, 1]] = f32::NAN;
    match rec.save(&path, FramesKind::Csv).unwrap_err() {
        Error::Output { reason, .. } => {
            assert!(reason.contains("data row 3"), "{reason}");
            assert!(reason.contains("taxel_1"), "{reason}");
        }
        e => panic!("expected Error::Output, got {e:?}"),
    }
    let mut rec = awkward_recording(10, 2, true, 5);
    rec.time_s.pop();
    assert!(matches!(
        rec.save(&path, FramesKind::Csv),
        Err(Error::Output { .. })
    ));
    let mut rec = awkward_recording(10, 2, true, 5);
    rec.time_s[4] = rec.time_s[3];
    assert!(matches!(
        rec.save(&path, FramesKind::Npy),
        Err(Error::Output { .. })
    ));
    let mut rec = awkward_recording(10, 2, true, 5);
    rec.manifest.sensor.taxels = 3;
    assert!(matches!(
        rec.save(&path, FramesKind::Csv),
        Err(Error::Output { .. })
    ));
    let rec = awkward_recording(10, 2, true, 5);
    assert!(matches!(
        rec.save(&dir.join("scan.csv"), FramesKind::Csv),
        Err(Error::Config { .. })
    ));
    assert_eq!(
        std::fs::read_dir(&dir).unwrap().count(),
        0,
        "nothing written"
    );
}

#[test]
fn stream_chunks_match_the_whole_load() {
    let dir = scratch("stream");
    let rec = awkward_recording(1000, 3, true, 9);
    for kind in [FramesKind::Csv, FramesKind::Npy] {
        let path = dir.join(format!("scan-{}.json", kind.extension()));
        rec.save(&path, kind).unwrap();
        let mut stream = RecordingStream::open(&path).unwrap();
        assert_eq!(stream.kind(), kind);
        assert_eq!(
            stream.total_frames(),
            (kind == FramesKind::Npy).then_some(1000)
        );
        let mut next = 0;
        while let Some(chunk) = stream.next_chunk(64).unwrap() {
            assert!(chunk.len() <= 64);
            assert_eq!(chunk.start, next);
            for i in 0..chunk.len() {
                assert_eq!(chunk.time_s[i].to_bits(), rec.time_s[next + i].to_bits());
                assert_eq!(chunk.frames.row(i), rec.frames.row(next + i));
            }
            next += chunk.len();
        }
        assert_eq!(next, 1000);
        assert!(stream.next_chunk(64).unwrap().is_none());
    }
}

#[test]
fn fortran_order_streams_in_chunks() {
    // Chunks of 5 over the 37-row Fortran-order fixture cross every column run.
    let path = compat("numpy-2.4.6/f8-fortran-time-position.json");
    let whole = Recording::load(&path).unwrap();
    let mut stream = RecordingStream::open(&path).unwrap();
    let mut rows = Vec::new();
    while let Some(chunk) = stream.next_chunk(5).unwrap() {
        rows.extend(chunk.frames.rows().into_iter().map(|r| r.to_vec()));
    }
    let expected: Vec<Vec<f32>> = whole
        .frames
        .rows()
        .into_iter()
        .map(|r| r.to_vec())
        .collect();
    assert_eq!(rows, expected);
}

/// Write a manifest for `frames` with `taxels` taxels beside it.
fn manifest_for(
    dir: &Path,
    stem: &str,
    frames: &str,
    taxels: usize,
    npy: Option<(bool, bool)>,
) -> PathBuf {
    let npy_columns = npy.map_or(String::new(), |(t, p)| {
        format!("\"npy_columns\": {{\"time_s\": {t}, \"position_mm\": {p}}},")
    });
    let text = format!(
        "{{\"format\": \"tactread-recording\", \"version\": 1, \"frames\": \"{frames}\", \
         {npy_columns} \"sensor\": {{\"taxels\": {taxels}, \"sample_rate_hz\": 100}}}}"
    );
    let path = dir.join(format!("{stem}.json"));
    std::fs::write(&path, text).unwrap();
    path
}

#[test]
fn time_must_increase_across_chunk_boundaries() {
    let dir = scratch("chunk-boundary");
    let mut csv = String::from("time_s,a\n");
    for i in 0..10 {
        let t = if i == 6 { 4 } else { i };
        csv.push_str(&format!("{t},1\n"));
    }
    std::fs::write(dir.join("b.csv"), csv).unwrap();
    let path = manifest_for(&dir, "b", "b.csv", 1, None);
    let mut stream = RecordingStream::open(&path).unwrap();
    assert_eq!(stream.next_chunk(3).unwrap().unwrap().len(), 3);
    assert_eq!(stream.next_chunk(3).unwrap().unwrap().len(), 3);
    let (at, message) = input_error(stream.next_chunk(3).unwrap_err());
    assert_eq!(at.line, Some(8), "file line of data row 7");
    assert!(
        message.starts_with("data row 7: time_s must increase"),
        "{message}"
    );
    assert!(
        stream.next_chunk(3).unwrap().is_none(),
        "the stream ends after an error"
    );
}

#[test]
fn truncated_and_padded_npy_files_are_errors() {
    let dir = scratch("npy-damage");
    let good = std::fs::read(compat("v1/tea-jar-npy.npy")).unwrap();
    let cases: [(&str, Vec<u8>, &str); 5] = [
        ("cut-data", good[..good.len() - 20].to_vec(), "truncated"),
        (
            "cut-header",
            good[..40].to_vec(),
            "cut short inside its header",
        ),
        (
            "padded",
            [good.clone(), vec![0; 8]].concat(),
            "8 bytes follow",
        ),
        ("empty", Vec::new(), "file is empty"),
        (
            "csv-renamed",
            b"time_s,a\n0,1\n".to_vec(),
            "not an .npy file",
        ),
    ];
    for (stem, bytes, needle) in cases {
        std::fs::write(dir.join(format!("{stem}.npy")), bytes).unwrap();
        let path = manifest_for(&dir, stem, &format!("{stem}.npy"), 4, Some((true, true)));
        let (at, message) = input_error(Recording::load(&path).unwrap_err());
        assert_eq!(at.file, dir.join(format!("{stem}.npy")), "{stem}");
        assert!(message.contains(needle), "{stem}: {message}");
    }
    // Right file, wrong layout: the manifest promises no position column.
    std::fs::copy(compat("v1/tea-jar-npy.npy"), dir.join("layout.npy")).unwrap();
    let path = manifest_for(&dir, "layout", "layout.npy", 4, Some((true, false)));
    let (at, message) = input_error(Recording::load(&path).unwrap_err());
    assert_eq!(at.field.as_deref(), Some("column 6"));
    assert!(message.contains("extra column"), "{message}");
}

#[test]
fn nan_in_an_npy_row_names_row_and_column() {
    let dir = scratch("npy-nan");
    let rec = awkward_recording(6, 2, false, 1);
    rec.save(&dir.join("ok.json"), FramesKind::Npy).unwrap();
    // Patch row 3 (0-based 2), taxel_1 (column 2 after time_s) to NaN.
    let mut bytes = std::fs::read(dir.join("ok.npy")).unwrap();
    let data = bytes.len() - 6 * 3 * 8;
    let at = data + (2 * 3 + 2) * 8;
    bytes[at..at + 8].copy_from_slice(&f64::NAN.to_le_bytes());
    std::fs::write(dir.join("ok.npy"), bytes).unwrap();
    let (loc, message) = input_error(Recording::load(&dir.join("ok.json")).unwrap_err());
    assert_eq!(loc.line, Some(3));
    assert_eq!(loc.field.as_deref(), Some("taxel_1"));
    assert!(message.starts_with("row 3: NaN"), "{message}");
    assert_eq!(rec.frames.nrows(), 6);
}

#[test]
fn newer_manifest_version_is_a_format_error() {
    let dir = scratch("newer");
    let text = std::fs::read_to_string(compat("v1/tea-jar.json"))
        .unwrap()
        .replace("\"version\": 1", "\"version\": 2");
    std::fs::write(dir.join("tea-jar.json"), text).unwrap();
    std::fs::copy(compat("v1/tea-jar.csv"), dir.join("tea-jar.csv")).unwrap();
    let err = Recording::load(&dir.join("tea-jar.json")).unwrap_err();
    assert!(matches!(err, Error::Format { .. }), "{err:?}");
    assert_eq!(err.exit_code(), 3);
    assert!(err.to_string().contains("upgrade tactread"), "{err}");
}

// Cross-checks against the npyz crate, a general-purpose .npy library.

#[test]
fn npyz_reads_our_npy_files() {
    let dir = scratch("npyz-reads");
    let rec = awkward_recording(20, 3, true, 21);
    rec.save(&dir.join("s.json"), FramesKind::Npy).unwrap();
    let file = std::fs::File::open(dir.join("s.npy")).unwrap();
    let npy = npyz::NpyFile::new(std::io::BufReader::new(file)).unwrap();
    assert_eq!(npy.shape(), &[20, 5]);
    assert_eq!(npy.order(), npyz::Order::C);
    let data: Vec<f64> = npy.into_vec().unwrap();
    for i in 0..20 {
        assert_eq!(data[i * 5].to_bits(), rec.time_s[i].to_bits());
        assert_eq!(data[i * 5 + 1], rec.position_mm.as_ref().unwrap()[i]);
        for k in 0..3 {
            assert_eq!(data[i * 5 + 2 + k], f64::from(rec.frames[[i, k]]));
        }
    }
}

#[test]
fn we_read_npyz_written_files() {
    use npyz::WriterBuilder;
    let dir = scratch("npyz-writes");
    let (rows, cols) = (9u64, 4u64);
    let values: Vec<f32> = (0..rows * cols).map(|i| i as f32 * 0.5 - 3.0).collect();
    let mut out = Vec::new();
    let mut w = npyz::WriteOptions::new()
        .default_dtype()
        .shape(&[rows, cols])
        .order(npyz::Order::Fortran)
        .writer(&mut out)
        .begin_nd()
        .unwrap();
    w.extend(values.iter().copied()).unwrap();
    w.finish().unwrap();
    std::fs::write(dir.join("z.npy"), out).unwrap();
    let path = manifest_for(&dir, "z", "z.npy", 4, Some((false, false)));
    let rec = Recording::load(&path).unwrap();
    // Fortran order: element (r, c) is at index c * rows + r of the stream.
    for r in 0..rows as usize {
        for c in 0..cols as usize {
            assert_eq!(rec.frames[[r, c]], values[c * rows as usize + r]);
        }
        assert_eq!(rec.time_s[r], r as f64 / 100.0);
    }
}

/// Run by hand with `cargo test --test formats -- --ignored` on a machine
/// with numpy: numpy itself loads what we write.
#[test]
#[ignore]
fn numpy_reads_our_npy_files() {
    let dir = scratch("numpy-reads");
    let rec = awkward_recording(50, 3, true, 31);
    rec.save(&dir.join("s.json"), FramesKind::Npy).unwrap();
    let script = "import sys, numpy as np\n\
                  a = np.load(sys.argv[1])\n\
                  assert a.dtype == np.float64 and a.shape == (50, 5), (a.dtype, a.shape)\n\
                  print(repr(a[:, 0].tolist()))\n\
                  print(repr(a[:, 2:].astype(np.float32).ravel().tolist()))\n";
    let out = std::process::Command::new("python3")
        .args(["-c", script])
        .arg(dir.join("s.npy"))
        .output()
        .expect("python3 must be installed for this test");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    let mut lines = text.lines();
    let parse = |l: &str| -> Vec<f64> {
        l.trim_matches(['[', ']'])
            .split(", ")
            .map(|x| x.parse().unwrap())
            .collect()
    };
    let times = parse(lines.next().unwrap());
    assert_eq!(times, rec.time_s);
    let taxels = parse(lines.next().unwrap());
    let ours: Vec<f64> = rec.frames.iter().map(|&v| f64::from(v)).collect();
    assert_eq!(taxels, ours);
}

/// The worked example of docs/model-format.md: the JSON there loads as a
/// model, and one raw frame goes through preprocessing, the GRU and the
/// head to the numbers the document works out by hand (the GRU and head
/// equations are those of Cho et al. 2014 and the factorised head; the
/// arithmetic was done by hand with a calculator).
#[test]
fn model_format_worked_example_loads_and_computes_as_documented() {
    let doc =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/model-format.md"))
            .unwrap();
    let section = &doc[doc.find("## A worked example").unwrap()..];
    let start = section.find("```json\n").unwrap() + "```json\n".len();
    let end = start + section[start..].find("```").unwrap();
    let model = tactread::net::Model::from_json(&section[start..end], Path::new("model-format.md"))
        .unwrap();

    let mut manifest = Manifest::new(SensorInfo::new(2, 40.0));
    manifest.frames = "x.csv".into();
    let rec = Recording {
        manifest,
        time_s: vec![0.0],
        position_mm: None,
        frames: Array2::from_shape_vec((1, 2), vec![210.0, 192.0]).unwrap(),
    };
    let x = model.prep.apply(&rec, "example").unwrap();
    assert_eq!(x.dim(), (1, 2));
    approx::assert_relative_eq!(x[[0, 0]], 1.0, epsilon = 1e-6);
    approx::assert_relative_eq!(x[[0, 1]], 1.0, epsilon = 1e-6);

    let z = model.network.logits_one(x.view()).unwrap();
    approx::assert_relative_eq!(z[[0, 0]], 0.2377, epsilon = 1e-4);
    for k in 1..7 {
        approx::assert_relative_eq!(z[[0, k]], -0.2377, epsilon = 1e-4);
    }
    let lp = tactread::net::pattern_log_probs(z.view());
    approx::assert_relative_eq!(lp[[0, tactread::net::BLANK]].exp(), 0.559, epsilon = 1e-3);
    approx::assert_relative_eq!(lp[[0, 0]].exp(), 0.0135, epsilon = 1e-4);
}
