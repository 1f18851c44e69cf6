//! Datasets: a folder of recordings with an index file that lists each
//! recording's split (train, validation, test), manifest and ground-truth
//! text. Written by `tactread simulate dataset`; read by training and
//! evaluation with [`Dataset::open`].
//!
//! The index is `index.json` in the dataset folder, tagged
//! `"format": "tactread-dataset"`, `"version": 1`. Manifest paths are
//! relative to the folder. The contract, with a worked example, is
//! `docs/dataset-format.md`.
//!
//! ```no_run
//! use tactread::recording::{Dataset, Split};
//! let ds = Dataset::open("demo-data".as_ref())?;
//! for entry in ds.split(Split::Train) {
//!     let rec = ds.load(entry)?;
//!     println!("{}: {} frames, text {:?}", entry.manifest, rec.frames.nrows(), entry.text);
//! }
//! # Ok::<(), tactread::Error>(())
//! ```

use super::Recording;
use crate::error::{Error, Location, Result};
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, HashSet};
use std::path::{Component, Path, PathBuf};

/// Format tag of dataset index files.
pub const DATASET_FORMAT: &str = "tactread-dataset";
/// Index version this build writes and reads.
pub const DATASET_VERSION: u32 = 1;
/// File name of the index inside a dataset folder.
pub const DATASET_INDEX: &str = "index.json";

/// The three splits of a dataset.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Split {
    /// Recordings to fit a model on.
    Train,
    /// Recordings to choose hyperparameters and stop training on.
    Validation,
    /// Held-out recordings to report results on.
    Test,
}

impl Split {
    /// All splits in their usual order.
    pub const ALL: [Split; 3] = [Split::Train, Split::Validation, Split::Test];

    /// The name as the index writes it: `train`, `validation` or `test`.
    pub fn name(self) -> &'static str {
        match self {
            Split::Train => "train",
            Split::Validation => "validation",
            Split::Test => "test",
        }
    }
}

impl std::fmt::Display for Split {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// One recording of a dataset.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DatasetEntry {
    /// The split it belongs to.
    pub split: Split,
    /// Path of its manifest, relative to the dataset folder, with `/`
    /// separators (e.g. `train/00012-en.json`).
    pub manifest: String,
    /// Language pack of the text, e.g. `en`.
    pub lang: String,
    /// Ground-truth text.
    pub text: String,
}

/// The content of `index.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DatasetIndex {
    /// Always [`DATASET_FORMAT`].
    pub format: String,
    /// Always [`DATASET_VERSION`] for files this build writes.
    pub version: u32,
    /// Free description, e.g. the command that made it.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub description: String,
    /// Machine-readable extras, e.g. `"seed": 7` from the simulator.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub tags: BTreeMap<String, serde_json::Value>,
    /// The recordings, in a fixed order.
    pub recordings: Vec<DatasetEntry>,
}

impl DatasetIndex {
    /// An empty index with the current format tag and version.
    pub fn new(description: impl Into<String>) -> DatasetIndex {
        DatasetIndex {
            format: DATASET_FORMAT.to_string(),
            version: DATASET_VERSION,
            description: description.into(),
            tags: BTreeMap::new(),
            recordings: Vec::new(),
        }
    }

    /// Write the index as `dir/index.json` atomically (temporary file in
    /// `dir`, then renamed), replacing an existing index. Checks the
    /// entries first (see [`Dataset::open`] for the rules; the manifests
    /// themselves must exist).
    pub fn write(&self, dir: &Path) -> Result<()> {
        let path = dir.join(DATASET_INDEX);
        self.check(dir, &path.display().to_string())
            .map_err(|e| Error::Output {
                path: path.clone(),
                reason: format!("the index would not read back: {e}"),
            })?;
        let json = serde_json::to_string_pretty(self).unwrap_or_default() + "\n";
        crate::fsutil::write_atomic(&path, json.as_bytes())
    }

    /// Check tag, version and entries; `origin` names the index in errors.
    fn check(&self, dir: &Path, origin: &str) -> Result<()> {
        let at = |field: String| Location::file(origin).field(field);
        if self.format != DATASET_FORMAT {
            return Err(Error::input(
                at("format".into()),
                format!(
                    "is {:?}, expected {DATASET_FORMAT:?}: this is not a tactread dataset index",
                    self.format
                ),
            ));
        }
        if self.version != DATASET_VERSION {
            return Err(Error::Format {
                path: origin.into(),
                expected: format!("{DATASET_FORMAT} version {DATASET_VERSION}"),
                found: format!("version {}", self.version),
                hint: "make the dataset again with this build (tactread simulate dataset)".into(),
            });
        }
        let mut seen = HashSet::new();
        for (i, e) in self.recordings.iter().enumerate() {
            let field = |name: &str| at(format!("recordings[{i}].{name}"));
            let rel = Path::new(&e.manifest);
            let safe = !e.manifest.is_empty()
                && rel.components().all(|c| matches!(c, Component::Normal(_)));
            if !safe {
                return Err(Error::input(
                    field("manifest"),
                    format!(
                        "{:?} is not a path inside the dataset folder: give it relative to the folder, without `..`",
                        e.manifest
                    ),
                ));
            }
            if !seen.insert(e.manifest.as_str()) {
                return Err(Error::input(
                    field("manifest"),
                    format!("{:?} is listed twice: list each recording once", e.manifest),
                ));
            }
            if !dir.join(rel).is_file() {
                return Err(Error::input(
                    field("manifest"),
                    format!(
                        "{} does not exist: restore the file or remove the entry",
                        dir.join(rel).display()
                    ),
                ));
            }
            if e.lang.trim().is_empty() {
                return Err(Error::input(
                    field("lang"),
                    "is empty: give the language pack of the text, e.g. \"en\"",
                ));
            }
        }
        Ok(())
    }
}

/// A dataset folder opened for reading.
#[derive(Debug, Clone, PartialEq)]
pub struct Dataset {
    dir: PathBuf,
    index: DatasetIndex,
}

impl Dataset {
    /// Read and check `dir/index.json`: the format tag and version, that
    /// every manifest path is relative, inside the folder, listed once and
    /// exists, and that every entry names its language. Recordings are not
    /// read until [`Dataset::load`].
    pub fn open(dir: &Path) -> Result<Dataset> {
        let path = dir.join(DATASET_INDEX);
        let text = crate::fsutil::read_utf8(
            &path,
            "a dataset index is UTF-8 JSON (see docs/dataset-format.md): save it as UTF-8",
        )?;
        let origin = path.display().to_string();
        // Tag and version first, so another format gets a clear error.
        #[derive(Deserialize)]
        struct Probe {
            format: Option<serde_json::Value>,
            version: Option<serde_json::Value>,
        }
        let json_err = |e: serde_json::Error| {
            Error::input(
                Location::file(&path).line(e.line()),
                format!("{e}: see docs/dataset-format.md for the index format"),
            )
        };
        let probe: Probe = serde_json::from_str(&text).map_err(json_err)?;
        if probe.format.as_ref().and_then(|v| v.as_str()) != Some(DATASET_FORMAT) {
            return Err(Error::input(
                Location::file(&path).field("format"),
                format!(
                    "is {}, expected {DATASET_FORMAT:?}: this is not a tactread dataset index",
                    probe
                        .format
                        .map_or("missing".to_string(), |v| v.to_string())
                ),
            ));
        }
        if probe.version.as_ref().and_then(|v| v.as_u64()) != Some(DATASET_VERSION as u64) {
            return Err(Error::Format {
                path: path.clone(),
                expected: format!("{DATASET_FORMAT} version {DATASET_VERSION}"),
                found: format!(
                    "version {}",
                    probe
                        .version
                        .map_or("missing".to_string(), |v| v.to_string())
                ),
                hint: "make the dataset again with this build (tactread simulate dataset)".into(),
            });
        }
        let index: DatasetIndex = serde_json::from_str(&text).map_err(json_err)?;
        index.check(dir, &origin)?;
        Ok(Dataset {
            dir: dir.to_path_buf(),
            index,
        })
    }

    /// The dataset folder.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The index as read.
    pub fn index(&self) -> &DatasetIndex {
        &self.index
    }

    /// All recordings, in index order.
    pub fn entries(&self) -> &[DatasetEntry] {
        &self.index.recordings
    }

    /// The recordings of one split, in index order.
    pub fn split(&self, split: Split) -> impl Iterator<Item = &DatasetEntry> + '_ {
        self.index
            .recordings
            .iter()
            .filter(move |e| e.split == split)
    }

    /// Number of recordings in `split`.
    pub fn count(&self, split: Split) -> usize {
        self.split(split).count()
    }

    /// Path of an entry's manifest.
    pub fn manifest_path(&self, entry: &DatasetEntry) -> PathBuf {
        self.dir.join(&entry.manifest)
    }

    /// Load an entry's recording whole (see [`Recording::load`]).
    pub fn load(&self, entry: &DatasetEntry) -> Result<Recording> {
        Recording::load(&self.manifest_path(entry))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn temp_dir(name: &str) -> crate::testutil::TestDir {
        let d = crate::testutil::test_dir(&format!("ds-{name}"));
        std::fs::create_dir_all(d.join("train")).unwrap();
        d
    }

    fn entry(split: Split, manifest: &str) -> DatasetEntry {
        DatasetEntry {
            split,
            manifest: manifest.into(),
            lang: "en".into(),
            text: "Ferry at 9.15".into(),
        }
    }

    #[test]
    fn writes_and_reads_back() {
        let d = temp_dir("rw");
        std::fs::write(d.join("train/a.json"), "{}").unwrap();
        std::fs::write(d.join("b.json"), "{}").unwrap();
        let mut idx = DatasetIndex::new("test");
        idx.recordings.push(entry(Split::Train, "train/a.json"));
        idx.recordings.push(entry(Split::Test, "b.json"));
        idx.write(&d).unwrap();
        let ds = Dataset::open(&d).unwrap();
        assert_eq!(ds.index(), &idx);
        assert_eq!(ds.count(Split::Train), 1);
        assert_eq!(ds.count(Split::Validation), 0);
        assert_eq!(ds.split(Split::Test).next().unwrap().manifest, "b.json");
    }

    #[test]
    fn bad_indexes_name_the_field() {
        let d = temp_dir("bad");
        let write = |s: &str| std::fs::write(d.join(DATASET_INDEX), s).unwrap();
        let msg = |d: &Path| Dataset::open(d).unwrap_err().to_string();

        write(
            r#"{"format": "tactread-dataset", "version": 1, "recordings": [{"split": "train", "manifest": "../x.json", "lang": "en", "text": ""}]}"#,
        );
        let m = msg(&d);
        assert!(
            m.contains("recordings[0].manifest") && m.contains(".."),
            "{m}"
        );

        write(
            r#"{"format": "tactread-dataset", "version": 1, "recordings": [{"split": "train", "manifest": "gone.json", "lang": "en", "text": ""}]}"#,
        );
        assert!(msg(&d).contains("does not exist"));

        write("{\"format\": \"tactread-dataset\", \"version\": 1,\n \"recordings\": [{\"split\": \"dev\", \"manifest\": \"a.json\", \"lang\": \"en\", \"text\": \"\"}]}");
        let m = msg(&d);
        assert!(m.contains("line 2") && m.contains("dev"), "{m}");

        write(r#"{"format": "tactread-dataset", "version": 9, "recordings": []}"#);
        assert!(matches!(Dataset::open(&d), Err(Error::Format { .. })));

        write(r#"{"format": "tactread-recording", "version": 1}"#);
        assert!(msg(&d).contains("not a tactread dataset index"));
    }
}
