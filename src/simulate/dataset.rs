//! Simulated datasets: many lines of text, each simulated into one or more
//! recordings, written as a dataset folder (train, validation and test
//! splits plus `index.json`; see [`crate::recording::Dataset`]).
//!
//! Lines are shuffled with the dataset seed and cut into splits by line, so
//! every take of a line lands in the same split and no text is in two
//! splits. Recording `i` (in index order) is simulated with seed
//! [`recording_seed`]`(seed, i)` and its mean speed is drawn from that seed
//! too, so the bytes written do not depend on the number of threads.

use super::{recording_seed, Kinematics, Simulator};
use crate::braille::Cell;
use crate::error::{Error, Result};
use crate::recording::{
    DatasetEntry, DatasetIndex, FramesKind, SaveOptions, Split, DATASET_FORMAT, DATASET_INDEX,
};
use rand::seq::SliceRandom;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde_json::json;
use std::path::Path;

/// One line of text to simulate, already encoded.
#[derive(Debug, Clone, PartialEq)]
pub struct DatasetLine {
    /// Language pack of the text, e.g. `en`.
    pub lang: String,
    /// The text.
    pub text: String,
    /// Its cells (see [`super::encode_line`]).
    pub cells: Vec<Cell>,
}

/// What [`write_dataset`] makes.
#[derive(Debug, Clone, PartialEq)]
pub struct DatasetPlan {
    /// The lines, in any order (they are shuffled with `seed`).
    pub lines: Vec<DatasetLine>,
    /// Fractions of lines for train, validation and test; they need not
    /// sum to 1 (they are normalised). Default `[0.8, 0.1, 0.1]`.
    pub split: [f64; 3],
    /// Recordings per line, each with its own seed. Default 1.
    pub takes: usize,
    /// Each recording's mean speed is drawn uniformly from `[min, max]`
    /// mm/s. Default `[20, 20]`.
    pub speed_mm_s: [f64; 2],
    /// The dataset seed. Default 0.
    pub seed: u64,
    /// Kind of frames files. Default [`FramesKind::Csv`].
    pub frames: FramesKind,
    /// Written as the index's description.
    pub description: String,
    /// Replace an existing dataset in the folder. Default `false`.
    pub overwrite: bool,
}

impl DatasetPlan {
    /// A plan for `lines` with the defaults above.
    pub fn new(lines: Vec<DatasetLine>) -> DatasetPlan {
        DatasetPlan {
            lines,
            split: [0.8, 0.1, 0.1],
            takes: 1,
            speed_mm_s: [20.0, 20.0],
            seed: 0,
            frames: FramesKind::Csv,
            description: String::new(),
            overwrite: false,
        }
    }

    fn check(&self) -> Result<()> {
        if self.lines.is_empty() {
            return Err(Error::config(
                "lines",
                "no lines to simulate: give at least one",
            ));
        }
        let sum: f64 = self.split.iter().sum();
        if !(self.split.iter().all(|f| f.is_finite() && *f >= 0.0) && sum > 0.0) {
            return Err(Error::config(
                "split",
                format!(
                    "{:?}: give three fractions (train, validation, test), none negative, not all 0",
                    self.split
                ),
            ));
        }
        if !(1..=1000).contains(&self.takes) {
            return Err(Error::config(
                "takes",
                format!("is {}: give 1 to 1000 recordings per line", self.takes),
            ));
        }
        let [lo, hi] = self.speed_mm_s;
        if !(lo.is_finite() && hi.is_finite() && lo >= 0.1 && lo <= hi && hi <= 1000.0) {
            return Err(Error::config(
                "speed",
                format!("range {lo}..{hi} mm/s: give 0.1 <= min <= max <= 1000"),
            ));
        }
        Ok(())
    }
}

/// Split `n` items by `fractions` with the largest-remainder method, so the
/// counts sum to `n`.
pub(crate) fn split_counts(n: usize, fractions: [f64; 3]) -> [usize; 3] {
    let sum: f64 = fractions.iter().sum();
    let exact: Vec<f64> = fractions.iter().map(|f| f / sum * n as f64).collect();
    let mut counts = [0usize; 3];
    for k in 0..3 {
        counts[k] = exact[k].floor() as usize;
    }
    let mut order = [0usize, 1, 2];
    order.sort_by(|&a, &b| {
        let ra = exact[a] - exact[a].floor();
        let rb = exact[b] - exact[b].floor();
        rb.total_cmp(&ra).then(a.cmp(&b))
    });
    let mut left = n - counts.iter().sum::<usize>();
    for &k in order.iter().cycle() {
        if left == 0 {
            break;
        }
        counts[k] += 1;
        left -= 1;
    }
    counts
}

/// Whether every entry of `dir` is a part a dataset write leaves: the index,
/// split folders holding only recordings named as [`write_dataset`] names
/// them (`00042-en.json` and its frames file), and temporaries of atomic
/// writes. A folder holding only such split folders is a dataset whose
/// writing was stopped before its index (written last).
fn only_dataset_parts(dir: &Path) -> bool {
    let temporary = |name: &str| name.starts_with('.') && name.contains(".tmp-");
    let ours = |name: &str| {
        let Some((stem, ext)) = name.rsplit_once('.') else {
            return false;
        };
        let Some((number, lang)) = stem.split_once('-') else {
            return false;
        };
        matches!(ext, "json" | "csv" | "npy")
            && number.len() >= 5
            && number.bytes().all(|b| b.is_ascii_digit())
            && !lang.is_empty()
            && lang.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-')
    };
    let entries_all = |d: &Path, ok: &dyn Fn(&std::fs::DirEntry) -> bool| {
        std::fs::read_dir(d).is_ok_and(|mut entries| entries.all(|e| e.as_ref().is_ok_and(ok)))
    };
    entries_all(dir, &|e| {
        let name = e.file_name().to_string_lossy().into_owned();
        if name == DATASET_INDEX || temporary(&name) {
            return true;
        }
        Split::ALL.iter().any(|s| s.name() == name)
            && entries_all(&e.path(), &|f| {
                let n = f.file_name().to_string_lossy().into_owned();
                ours(&n) || temporary(&n)
            })
    })
}

/// Check that `dir` may receive a dataset: missing or empty, or (with
/// `overwrite`) holding a tactread dataset, or an unfinished one (split
/// folders without an index, as a run stopped part-way leaves), whose
/// index, split folders and temporaries are then removed.
fn prepare_dir(dir: &Path, overwrite: bool) -> Result<()> {
    if !dir.exists() {
        return std::fs::create_dir_all(dir).map_err(|e| Error::io("cannot create", dir, e));
    }
    if !dir.is_dir() {
        return Err(Error::Output {
            path: dir.to_path_buf(),
            reason: "exists and is not a folder: give a folder for the dataset".into(),
        });
    }
    let mut entries = std::fs::read_dir(dir).map_err(|e| Error::io("cannot read", dir, e))?;
    if entries.next().is_none() {
        return Ok(());
    }
    let index = dir.join(DATASET_INDEX);
    let is_dataset = std::fs::read_to_string(&index)
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
        .is_some_and(|v| v.get("format").and_then(|f| f.as_str()) == Some(DATASET_FORMAT));
    let unfinished = !is_dataset && only_dataset_parts(dir);
    if !overwrite {
        return Err(Error::Output {
            path: dir.to_path_buf(),
            reason: if is_dataset {
                "holds a dataset already: pass --force to replace it, or choose another folder"
                    .into()
            } else if unfinished {
                "holds an unfinished dataset (split folders but no index.json: an earlier run \
                 stopped part-way): pass --force to replace it, or choose another folder"
                    .into()
            } else {
                "is not empty: choose an empty or new folder".into()
            },
        });
    }
    if !is_dataset && !unfinished {
        return Err(Error::Output {
            path: dir.to_path_buf(),
            reason: "is not empty and holds no tactread dataset (no index.json), so even --force does not replace it: choose an empty or new folder".into(),
        });
    }
    if index.exists() {
        std::fs::remove_file(&index).map_err(|e| Error::io("cannot remove", &index, e))?;
    }
    if unfinished {
        for e in std::fs::read_dir(dir).into_iter().flatten().flatten() {
            if e.file_name().to_string_lossy().starts_with('.') {
                let _ = std::fs::remove_file(e.path());
            }
        }
    }
    for split in Split::ALL {
        let sub = dir.join(split.name());
        if sub.is_dir() {
            std::fs::remove_dir_all(&sub).map_err(|e| Error::io("cannot remove", &sub, e))?;
        }
    }
    Ok(())
}

/// Simulate `plan` with `sim` into the folder `dir` and write its index
/// last. `progress` is called once per recording written, from any thread.
/// Runs on the current rayon thread pool (install another to limit
/// threads).
///
/// Refuses a folder that is not empty unless `plan.overwrite` is set and
/// the folder holds a tactread dataset (then its index and split folders
/// are replaced).
pub fn write_dataset(
    sim: &Simulator,
    plan: &DatasetPlan,
    dir: &Path,
    progress: &(dyn Fn() + Sync),
) -> Result<DatasetIndex> {
    plan.check()?;
    let mut order: Vec<usize> = (0..plan.lines.len()).collect();
    order.shuffle(&mut ChaCha8Rng::seed_from_u64(plan.seed));
    let counts = split_counts(order.len(), plan.split);
    let mut jobs = Vec::with_capacity(order.len() * plan.takes);
    let mut next = 0;
    for (split, &count) in Split::ALL.iter().zip(&counts) {
        for &line in &order[next..next + count] {
            for _ in 0..plan.takes {
                jobs.push((*split, line));
            }
        }
        next += count;
    }
    prepare_dir(dir, plan.overwrite)?;
    for (split, &count) in Split::ALL.iter().zip(&counts) {
        if count > 0 {
            let sub = dir.join(split.name());
            std::fs::create_dir_all(&sub).map_err(|e| Error::io("cannot create", &sub, e))?;
        }
    }
    let base: Kinematics = sim.config().kinematics.clone();
    let entries: Vec<DatasetEntry> = jobs
        .par_iter()
        .enumerate()
        .map(|(i, &(split, line))| {
            let l = &plan.lines[line];
            let seed = recording_seed(plan.seed, i as u64);
            let [lo, hi] = plan.speed_mm_s;
            let mut kin = base.clone();
            kin.speed_mm_s = lo + (hi - lo) * ChaCha8Rng::seed_from_u64(seed).gen::<f64>();
            let mut rec = sim.simulate_with(&l.cells, &kin, seed)?;
            rec.manifest.text = Some(l.text.clone());
            rec.manifest.lang = Some(l.lang.clone());
            let manifest = format!("{}/{i:05}-{}.json", split.name(), l.lang);
            rec.save(
                &dir.join(&manifest),
                SaveOptions::new(plan.frames).overwrite(true),
            )?;
            progress();
            Ok(DatasetEntry {
                split,
                manifest,
                lang: l.lang.clone(),
                text: l.text.clone(),
            })
        })
        .collect::<Result<_>>()?;
    let cfg = sim.config();
    let mut index = DatasetIndex::new(plan.description.clone());
    index.recordings = entries;
    for (k, v) in [
        (
            "simulator",
            json!(concat!("tactread ", env!("CARGO_PKG_VERSION"))),
        ),
        ("seed", json!(plan.seed)),
        ("preset", json!(cfg.preset.name())),
        ("sensor", json!(cfg.sensor.name)),
        ("page", json!(cfg.page.name)),
        ("speed_mm_s", json!(plan.speed_mm_s)),
        ("takes", json!(plan.takes)),
        ("split", json!(plan.split)),
        ("lines", json!(plan.lines.len())),
    ] {
        index.tags.insert(k.to_string(), v);
    }
    index.write(dir)?;
    Ok(index)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_unfinished_dataset_is_told_from_a_users_folder() {
        let dir = crate::testutil::test_dir("unfinished");
        std::fs::create_dir_all(dir.join("train")).unwrap();
        for name in ["00000-en.json", "00000-en.csv", ".00001-en.csv.tmp-77-0"] {
            std::fs::write(dir.join("train").join(name), "x").unwrap();
        }
        assert!(only_dataset_parts(&dir));
        std::fs::write(dir.join("train/notes.txt"), "mine").unwrap();
        assert!(
            !only_dataset_parts(&dir),
            "a file of the user's in a split folder"
        );
        std::fs::remove_file(dir.join("train/notes.txt")).unwrap();
        std::fs::write(dir.join("readme.md"), "mine").unwrap();
        assert!(
            !only_dataset_parts(&dir),
            "a file of the user's beside the splits"
        );
    }

    #[test]
    fn split_counts_sum_and_follow_fractions() {
        assert_eq!(split_counts(10, [0.8, 0.1, 0.1]), [8, 1, 1]);
        assert_eq!(split_counts(7, [0.8, 0.1, 0.1]), [5, 1, 1]);
        assert_eq!(split_counts(3, [1.0, 1.0, 1.0]), [1, 1, 1]);
        assert_eq!(split_counts(5, [0.0, 0.0, 1.0]), [0, 0, 5]);
        for n in 0..50 {
            assert_eq!(split_counts(n, [0.7, 0.2, 0.1]).iter().sum::<usize>(), n);
        }
    }
}
