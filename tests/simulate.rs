//! Tests of the simulator (issue 3, item 7): page geometry against the
//! published braille standards, the physics (force, speed invariance by
//! position), determinism, error messages, and that simulated recordings
//! and datasets read back with the recording reader. CLI cases run the
//! built binary.

mod common;

use common::cli::{scratch, stderr, tactread_in};
use ndarray::Array2;
use std::path::Path;
use tactread::recording::{Dataset, Recording, Split};
use tactread::simulate::{
    encode_line, render_height_map, FaultLevel, PageGeometry, Preset, SensorSpec, SimConfig,
    Simulator,
};
use tactread::{Cell, CodeTable, Error};

// ---------------------------------------------------------------- helpers

/// Centroids `[x, y]` (mm) and extents `[width, height]` (mm, counting
/// samples above zero, each standing for one grid step) of the raised
/// regions of a height map, plus each
/// region's peak height.
fn dots_of(map: &tactread::simulate::HeightMap) -> Vec<([f64; 2], [f64; 2], f64)> {
    let h = &map.heights;
    let (ny, nx) = h.dim();
    let mut seen = Array2::<bool>::from_elem((ny, nx), false);
    let mut out = Vec::new();
    for r0 in 0..ny {
        for c0 in 0..nx {
            if seen[[r0, c0]] || h[[r0, c0]] <= 0.0 {
                continue;
            }
            // Flood fill one region, weighting the centroid by height.
            let mut stack = vec![(r0, c0)];
            seen[[r0, c0]] = true;
            let (mut sw, mut sx, mut sy, mut peak) = (0.0, 0.0, 0.0, 0.0f64);
            let (mut cmin, mut cmax, mut rmin, mut rmax) = (c0, c0, r0, r0);
            while let Some((r, c)) = stack.pop() {
                let w = h[[r, c]] as f64;
                let [x, y] = map.position_mm(r, c);
                sw += w;
                sx += w * x;
                sy += w * y;
                peak = peak.max(w);
                cmin = cmin.min(c);
                cmax = cmax.max(c);
                rmin = rmin.min(r);
                rmax = rmax.max(r);
                let neighbours = [
                    (r.wrapping_sub(1), c),
                    (r + 1, c),
                    (r, c.wrapping_sub(1)),
                    (r, c + 1),
                ];
                for (rr, cc) in neighbours {
                    if rr < ny && cc < nx && !seen[[rr, cc]] && h[[rr, cc]] > 0.0 {
                        seen[[rr, cc]] = true;
                        stack.push((rr, cc));
                    }
                }
            }
            let res = map.resolution_mm;
            out.push((
                [sx / sw, sy / sw],
                [
                    (cmax - cmin + 1) as f64 * res,
                    (rmax - rmin + 1) as f64 * res,
                ],
                peak,
            ));
        }
    }
    out
}

/// Linear interpolation of `values` (one per sample, at strictly
/// increasing `pos`) at `at`. A small local stand-in for resampling by
/// position, which the prep module will provide.
fn resample(pos: &[f64], values: &[f64], at: &[f64]) -> Vec<f64> {
    let mut k = 0;
    at.iter()
        .map(|&x| {
            while k + 2 < pos.len() && pos[k + 1] < x {
                k += 1;
            }
            let (x0, x1) = (pos[k], pos[k + 1]);
            let f = ((x - x0) / (x1 - x0)).clamp(0.0, 1.0);
            values[k] * (1.0 - f) + values[k + 1] * f
        })
        .collect()
}

fn full_cell() -> Cell {
    Cell::from_dots(&[1, 2, 3, 4, 5, 6]).unwrap()
}

// ------------------------------------------------------- page geometry

/// Dot centres, spacing, base diameter and height of the rendered page,
/// checked against the US Library of Congress "Specification 800: Braille
/// Books and Pamphlets" (NLS, 2008), section 3.2: dot base diameter 1.44 mm
/// (0.057 in), dot height 0.48 mm (0.019 in), dot-to-dot 2.34 mm (0.092 in),
/// cell-to-cell 6.2 mm (0.245 in), line-to-line 10.0 mm (0.400 in).
#[test]
fn height_map_dots_sit_at_nls800_spacing() {
    let g = PageGeometry::nls800();
    let lines = vec![
        vec![full_cell(), full_cell()],
        vec![full_cell(), full_cell()],
    ];
    let map = render_height_map(&lines, &g, 0.01).unwrap();
    let mut dots = dots_of(&map);
    assert_eq!(dots.len(), 24, "two lines of two full cells");
    // Sort by line, then by x, then by y.
    dots.sort_by(|a, b| {
        let la = (a.0[1] / 5.0).round() as i64;
        let lb = (b.0[1] / 5.0).round() as i64;
        la.cmp(&lb)
            .then(a.0[0].total_cmp(&b.0[0]))
            .then(a.0[1].total_cmp(&b.0[1]))
    });
    let tol = 0.01; // mm: one grid step
    let near = |got: f64, want: f64, what: &str| {
        assert!(
            (got - want).abs() <= tol,
            "{what}: {got:.4} mm, NLS 800 says {want} mm"
        );
    };
    for line in 0..2 {
        let d = &dots[line * 12..line * 12 + 12];
        // Within a cell: three dots down a column, 2.34 mm apart.
        for col in 0..4 {
            let c = &d[col * 3..col * 3 + 3];
            near(c[1].0[1] - c[0].0[1], 2.34, "dot spacing down a column");
            near(c[2].0[1] - c[1].0[1], 2.34, "dot spacing down a column");
            near(c[1].0[0] - c[0].0[0], 0.0, "column alignment");
        }
        // Across a cell: 2.34 mm; cell to cell: 6.2 mm.
        near(d[3].0[0] - d[0].0[0], 2.34, "dot spacing across a cell");
        near(d[6].0[0] - d[0].0[0], 6.2, "cell spacing");
        near(d[9].0[0] - d[3].0[0], 6.2, "cell spacing");
    }
    near(dots[12].0[1] - dots[0].0[1], 10.0, "line spacing");
    for (_, [w, h], peak) in &dots {
        assert!(
            (w - 1.44).abs() <= 2.0 * tol,
            "base diameter {w} mm, NLS 800 says 1.44"
        );
        assert!(
            (h - 1.44).abs() <= 2.0 * tol,
            "base diameter {h} mm, NLS 800 says 1.44"
        );
        assert!(
            (peak - 0.48).abs() < 0.001,
            "dot height {peak} mm, NLS 800 says 0.48"
        );
    }
}

/// The signage preset's rendered dots fall inside the ranges of the 2010 ADA
/// Standards for Accessible Design, Table 703.3.1: base diameter 1.5-1.6 mm,
/// height 0.6-0.9 mm, dot-to-dot 2.3-2.5 mm, cell-to-cell 6.1-7.6 mm.
#[test]
fn signage_dots_fall_in_ada_ranges() {
    let g = PageGeometry::signage();
    let map = render_height_map(&[vec![full_cell(), full_cell()]], &g, 0.01).unwrap();
    let mut dots = dots_of(&map);
    assert_eq!(dots.len(), 12);
    dots.sort_by(|a, b| a.0[0].total_cmp(&b.0[0]).then(a.0[1].total_cmp(&b.0[1])));
    let across = dots[3].0[0] - dots[0].0[0];
    let down = dots[1].0[1] - dots[0].0[1];
    let cell = dots[6].0[0] - dots[0].0[0];
    assert!((2.3..=2.5).contains(&across), "dot spacing {across}");
    assert!((2.3..=2.5).contains(&down), "dot spacing {down}");
    assert!((6.1..=7.6).contains(&cell), "cell spacing {cell}");
    for (_, [w, _], peak) in &dots {
        assert!((1.5 - 0.02..=1.6 + 0.02).contains(w), "base diameter {w}");
        assert!((0.6..=0.9).contains(peak), "height {peak}");
    }
}

/// Low dots: about 0.2 mm high, the EN ISO 17351 target for medicine
/// packaging (unverified: secondary sources).
#[test]
fn low_dots_are_low() {
    let g = PageGeometry::low_dots();
    let map = render_height_map(&[vec![full_cell()]], &g, 0.01).unwrap();
    let dots = dots_of(&map);
    assert_eq!(dots.len(), 6);
    assert!(dots.iter().all(|d| (d.2 - 0.2).abs() < 0.001));
}

// ------------------------------------------------------------- physics

fn line(text: &str, lang: &str) -> Vec<Cell> {
    encode_line(text, &CodeTable::builtin(lang).unwrap()).unwrap()
}

#[test]
fn signal_rises_with_normal_force() {
    let cells = line("Seals at Tarnholm", "en");
    let mut means = Vec::new();
    let mut peaks = Vec::new();
    let mut blank = Vec::new();
    for force in [0.2, 0.4, 0.6, 0.8, 1.0, 1.2] {
        let mut cfg = SimConfig::new(Preset::Clean);
        cfg.kinematics.force_n = force;
        let sim = Simulator::new(cfg).unwrap();
        // Taxel 11 of hex24 sits 0.6 mm from the sensor's middle.
        assert_eq!(sim.config().sensor.taxel_positions()[11], [0.0, -0.6]);
        let rec = sim.simulate(&cells, 1).unwrap();
        means.push(rec.frames.mean().unwrap());
        peaks.push(rec.frames.iter().cloned().fold(0.0f32, f32::max));
        // The first frame is on blank paper, before the first dot.
        blank.push(rec.frames[[0, 11]]);
    }
    for k in 1..means.len() {
        assert!(means[k] > means[k - 1], "mean signal by force: {means:?}");
        assert!(peaks[k] > peaks[k - 1], "peak signal by force: {peaks:?}");
        assert!(
            blank[k] > blank[k - 1],
            "blank-paper signal by force: {blank:?}"
        );
    }
    // Equal force steps are equal indentation steps; the saturating contact
    // model p = p_max (1 - exp(-k d)) turns them into shrinking pressure steps.
    let steps: Vec<f32> = blank.windows(2).map(|w| w[1] - w[0]).collect();
    assert!(steps.windows(2).all(|w| w[1] < w[0]), "steps {steps:?}");
}

/// Same text at 10 and 40 mm/s with an encoder: resampled onto a common
/// position grid the signals agree within the sensor's white noise, and a
/// 0.5 mm shift would not (so the check can fail).
#[test]
fn signal_by_position_does_not_depend_on_speed() {
    let cells = line("Dunlin Flats 2.5 km", "en");
    let mut sensor = SensorSpec::builtin("hex24").unwrap();
    sensor.faults.drift_kpa = 0.0; // drift depends on time, not position
    let noise_kpa = sensor.faults.noise_kpa;
    let adc = sensor.adc.clone().unwrap();
    let noise_counts = noise_kpa / adc.full_scale_kpa * adc.max_count();
    let record = |speed: f64| {
        let mut cfg = SimConfig::new(Preset::Clean);
        cfg.sensor = sensor.clone();
        cfg.faults = FaultLevel {
            scale: 1.0,
            ..Preset::Clean.fault_level()
        };
        cfg.kinematics.speed_mm_s = speed;
        Simulator::new(cfg).unwrap().simulate(&cells, 3).unwrap()
    };
    let slow = record(10.0);
    let fast = record(40.0);
    assert!(slow.frames.nrows() > 3 * fast.frames.nrows());
    let ps = slow.position_mm.clone().unwrap();
    let pf = fast.position_mm.clone().unwrap();
    let lo = ps[0].max(pf[0]);
    let hi = ps[ps.len() - 1].min(pf[pf.len() - 1]) - 0.6;
    let grid: Vec<f64> = (0..((hi - lo) / 0.05) as usize)
        .map(|k| lo + k as f64 * 0.05)
        .collect();
    let shifted: Vec<f64> = grid.iter().map(|x| x + 0.5).collect();
    let (mut sq, mut sq_shift, mut n) = (0.0, 0.0, 0usize);
    let mut range = 0.0f64;
    for t in 0..slow.frames.ncols() {
        let vs: Vec<f64> = slow.frames.column(t).iter().map(|&v| v as f64).collect();
        let vf: Vec<f64> = fast.frames.column(t).iter().map(|&v| v as f64).collect();
        let a = resample(&ps, &vs, &grid);
        let b = resample(&pf, &vf, &grid);
        let c = resample(&pf, &vf, &shifted);
        let (mn, mx) = a
            .iter()
            .fold((f64::MAX, f64::MIN), |m, &v| (m.0.min(v), m.1.max(v)));
        range = range.max(mx - mn);
        for k in 0..grid.len() {
            sq += (a[k] - b[k]).powi(2);
            sq_shift += (a[k] - c[k]).powi(2);
            n += 1;
        }
    }
    let rms = (sq / n as f64).sqrt();
    let rms_shift = (sq_shift / n as f64).sqrt();
    // Two independent noisy readings differ by sqrt(2) sigma (at most,
    // interpolation averages a little); allow 25 % for ADC rounding.
    let bound = 1.25 * 2f64.sqrt() * noise_counts;
    assert!(
        range > 20.0 * noise_counts,
        "dots should stand well out of the noise: {range}"
    );
    assert!(
        rms < bound,
        "rms difference {rms:.2} counts, noise bound {bound:.2}"
    );
    assert!(
        rms > 0.3 * noise_counts,
        "noise should be present: rms {rms:.2}"
    );
    assert!(
        rms_shift > 3.0 * bound,
        "a 0.5 mm shift gives only {rms_shift:.2}"
    );
}

#[test]
fn same_seed_same_recording_other_seed_other() {
    let sim = Simulator::new(SimConfig::new(Preset::Hard)).unwrap();
    let table = CodeTable::builtin("de").unwrap();
    let a = sim.simulate_text("Fähre nach Tarnholm", &table, 9).unwrap();
    let b = sim.simulate_text("Fähre nach Tarnholm", &table, 9).unwrap();
    let c = sim
        .simulate_text("Fähre nach Tarnholm", &table, 10)
        .unwrap();
    assert_eq!(a, b);
    assert_ne!(a.frames, c.frames);
    assert_eq!(a.manifest.text.as_deref(), Some("Fähre nach Tarnholm"));
    assert_eq!(a.manifest.lang.as_deref(), Some("de"));
}

#[test]
fn empty_and_unencodable_text_are_named() {
    let table = CodeTable::builtin("en").unwrap();
    let sim = Simulator::new(SimConfig::default()).unwrap();
    for empty in ["", "   "] {
        let err = sim.simulate_text(empty, &table, 0).unwrap_err();
        assert!(
            matches!(&err, Error::Config { name, .. } if name == "text"),
            "{err}"
        );
        assert!(err.to_string().contains("empty"), "{err}");
    }
    match sim.simulate_text("Gull ß rock", &table, 0).unwrap_err() {
        Error::Unencodable {
            ch, position, lang, ..
        } => {
            assert_eq!((ch, position, lang.as_str()), ('ß', 6, "en"));
        }
        other => panic!("expected Unencodable, got {other}"),
    }
}

#[test]
fn recording_saves_and_loads_back() {
    let dir = scratch("save");
    let sim = Simulator::new(SimConfig::default()).unwrap();
    let table = CodeTable::builtin("fr").unwrap();
    let rec = sim.simulate_text("Bac à 9 h 15", &table, 4).unwrap();
    for kind in [
        tactread::recording::FramesKind::Csv,
        tactread::recording::FramesKind::Npy,
    ] {
        let path = dir.join(format!("bac-{}.json", kind.extension()));
        rec.save(&path, kind).unwrap();
        let back = Recording::load(&path).unwrap();
        assert_eq!(back.frames, rec.frames);
        assert_eq!(back.position_mm, rec.position_mm);
        assert_eq!(back.manifest.text, rec.manifest.text);
        assert_eq!(back.manifest.tags, rec.manifest.tags);
    }
}

// ------------------------------------------------------------------ CLI

#[test]
fn cli_same_seed_same_bytes() {
    let dir = scratch("bytes");
    for (name, seed) in [("a", "5"), ("b", "5"), ("c", "6")] {
        let o = tactread_in(
            &dir,
            &[
                "simulate",
                "Hide 3 overlooks Saltmere",
                "--preset",
                "hard",
                "--seed",
                seed,
                "--out",
                &format!("{name}.json"),
            ],
        );
        assert!(o.status.success(), "{}", stderr(&o));
    }
    let read = |f: &str| std::fs::read(dir.join(f)).unwrap();
    assert_eq!(read("a.csv"), read("b.csv"));
    assert_ne!(read("a.csv"), read("c.csv"));
    // The manifests differ only in the frames file name.
    let a = String::from_utf8(read("a.json"))
        .unwrap()
        .replace("a.csv", "x.csv");
    let b = String::from_utf8(read("b.json"))
        .unwrap()
        .replace("b.csv", "x.csv");
    assert_eq!(a, b);
}

#[test]
fn cli_errors_name_the_problem() {
    let dir = scratch("errors");
    let o = tactread_in(&dir, &["simulate", "Gull ß rock", "--out", "x.json"]);
    assert_eq!(o.status.code(), Some(1));
    let e = stderr(&o);
    assert!(
        e.contains("'ß'") && e.contains("U+00DF") && e.contains("character 6"),
        "{e}"
    );

    let o = tactread_in(&dir, &["simulate", "", "--out", "x.json"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("text") && stderr(&o).contains("empty"),
        "{}",
        stderr(&o)
    );

    std::fs::write(dir.join("lines.txt"), "Ferry at 9.15\n\nGull ß rock\n").unwrap();
    let o = tactread_in(
        &dir,
        &[
            "simulate",
            "dataset",
            "--text-file",
            "lines.txt",
            "--out",
            "ds",
        ],
    );
    assert_eq!(o.status.code(), Some(1));
    let e = stderr(&o);
    assert!(e.contains("lines.txt line 3") && e.contains("'ß'"), "{e}");
    assert!(!dir.join("ds").exists(), "nothing written on bad input");

    let o = tactread_in(
        &dir,
        &["simulate", "Ferry", "--sensor", "nosuch", "--out", "x.json"],
    );
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("hex24"), "{}", stderr(&o));

    // Refuses to overwrite without --force.
    let args = ["simulate", "Ferry", "--rate", "100", "--out", "x.json"];
    assert!(tactread_in(&dir, &args).status.success());
    let o = tactread_in(&dir, &args);
    assert_eq!(o.status.code(), Some(4));
    assert!(stderr(&o).contains("--force"), "{}", stderr(&o));
    let mut forced = args.to_vec();
    forced.push("--force");
    assert!(tactread_in(&dir, &forced).status.success());
}

#[test]
fn cli_sensor_by_name_anywhere_and_by_path() {
    let dir = scratch("sensor");
    let mut s = SensorSpec::builtin("pad4x3").unwrap();
    s.name = "mypad".into();
    s.faults.dead_taxels = vec![5];
    std::fs::write(dir.join("mypad.json"), s.to_json()).unwrap();
    let o = tactread_in(
        &dir,
        &[
            "simulate",
            "Tarn",
            "--sensor",
            "mypad.json",
            "--out",
            "p.json",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let rec = Recording::load(&dir.join("p.json")).unwrap();
    assert_eq!(rec.manifest.sensor.name.as_deref(), Some("mypad"));
    assert_eq!(rec.frames.ncols(), 12);
    assert!(
        rec.frames.column(5).iter().all(|&v| v == 0.0),
        "dead taxel 5 reads 0"
    );
    let o = tactread_in(
        &dir,
        &[
            "simulate",
            "Tarn",
            "--sensor",
            "skin16",
            "--out",
            "s.json",
            "--no-position",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let rec = Recording::load(&dir.join("s.json")).unwrap();
    assert_eq!(rec.frames.ncols(), 256);
    assert!(rec.position_mm.is_none());
}

/// A simulated dataset reads back with Dataset::open and Recording::load,
/// splits hold disjoint texts, and a parallel run writes the same bytes as
/// a serial one.
#[test]
fn cli_dataset_reads_back_and_is_parallel_safe() {
    let dir = scratch("dataset");
    let common = [
        "simulate",
        "dataset",
        "--lines",
        "10",
        "--lang",
        "en,es",
        "--takes",
        "2",
        "--split",
        "0.6,0.2,0.2",
        "--rate",
        "100",
        "--speed",
        "8..40",
        "--seed",
        "7",
    ];
    for (out, jobs) in [("serial", "1"), ("parallel", "2")] {
        let mut args = common.to_vec();
        args.extend(["--out", out, "--jobs", jobs]);
        let o = tactread_in(&dir, &args);
        assert!(o.status.success(), "{}", stderr(&o));
    }
    let ds = Dataset::open(&dir.join("serial")).unwrap();
    assert_eq!(ds.entries().len(), 20);
    assert_eq!(
        [
            ds.count(Split::Train),
            ds.count(Split::Validation),
            ds.count(Split::Test)
        ],
        [12, 4, 4]
    );
    let mut texts = std::collections::HashMap::new();
    for e in ds.entries() {
        let rec = ds.load(e).unwrap();
        assert_eq!(rec.manifest.text.as_deref(), Some(e.text.as_str()));
        assert_eq!(rec.manifest.lang.as_deref(), Some(e.lang.as_str()));
        assert_eq!(rec.frames.ncols(), 24);
        assert!(rec.position_mm.is_some());
        let speed = rec.manifest.tags["speed_mm_s"].as_f64().unwrap();
        assert!((8.0..=40.0).contains(&speed));
        assert_eq!(
            *texts.entry(e.text.clone()).or_insert(e.split),
            e.split,
            "text in two splits"
        );
        let parallel = std::fs::read(dir.join("parallel").join(&e.manifest)).unwrap();
        assert_eq!(
            std::fs::read(ds.manifest_path(e)).unwrap(),
            parallel,
            "{}",
            e.manifest
        );
        let frames = e.manifest.replace(".json", ".csv");
        assert_eq!(
            std::fs::read(dir.join("serial").join(&frames)).unwrap(),
            std::fs::read(dir.join("parallel").join(&frames)).unwrap()
        );
    }
    assert!(ds.entries().iter().any(|e| e.lang == "es"));
    // A second run refuses, then --force replaces.
    let mut args = common.to_vec();
    args.extend(["--out", "serial"]);
    let o = tactread_in(&dir, &args);
    assert_eq!(o.status.code(), Some(4), "{}", stderr(&o));
    args.push("--force");
    assert!(tactread_in(&dir, &args).status.success());
    assert_eq!(
        Dataset::open(&dir.join("serial")).unwrap().entries().len(),
        20
    );
}

/// demo-data/ is exactly what the command in demo-data/README.md writes.
#[test]
fn demo_data_matches_its_command() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let readme = std::fs::read_to_string(root.join("demo-data/README.md")).unwrap();
    assert!(readme.contains(
        "simulate dataset --lines 16 --lang all --split 0.5,0.25,0.25 \\\n    --rate 100 --speed 15..25 --seed 2024 --out demo-data --force"
    ));
    let dir = scratch("demo");
    let o = tactread_in(
        &dir,
        &[
            "simulate",
            "dataset",
            "--lines",
            "16",
            "--lang",
            "all",
            "--split",
            "0.5,0.25,0.25",
            "--rate",
            "100",
            "--speed",
            "15..25",
            "--seed",
            "2024",
            "--out",
            "demo-data",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let ours = Dataset::open(&root.join("demo-data")).unwrap();
    let fresh = Dataset::open(&dir.join("demo-data")).unwrap();
    assert_eq!(ours.index(), fresh.index());
    let stale = "differs from what the command writes now: if the change is intended, rerun the command in demo-data/README.md";
    for e in ours.entries() {
        let rec = ours.load(e).unwrap();
        let now = fresh.load(e).unwrap();
        assert_eq!(rec.manifest.text.as_deref(), Some(e.text.as_str()));
        assert_eq!(rec.time_s, now.time_s, "{}: time {stale}", e.manifest);
        // Other platforms' maths libraries may differ in the last bit, which
        // can move a value across an ADC step: allow one count.
        let worst = (&rec.frames - &now.frames)
            .iter()
            .fold(0f32, |m, d| m.max(d.abs()));
        assert!(
            worst <= 1.0,
            "{}: frames {stale} (by {worst} counts)",
            e.manifest
        );
        // On the platform that made it, the files are identical byte for byte.
        if cfg!(all(target_os = "linux", target_arch = "x86_64")) {
            for file in [e.manifest.clone(), e.manifest.replace(".json", ".csv")] {
                assert!(
                    std::fs::read(root.join("demo-data").join(&file)).unwrap()
                        == std::fs::read(dir.join("demo-data").join(&file)).unwrap(),
                    "demo-data/{file} {stale}"
                );
            }
        }
    }
}

/// The word "dataset" can be embossed as the help says.
#[test]
fn cli_text_dataset_after_double_dash() {
    let dir = scratch("word");
    let o = tactread_in(
        &dir,
        &[
            "simulate", "--rate", "100", "--out", "x.json", "--", "dataset",
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let rec = Recording::load(&dir.join("x.json")).unwrap();
    assert_eq!(rec.manifest.text.as_deref(), Some("dataset"));
}
