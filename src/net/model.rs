//! The model file: one self-describing JSON document holding everything
//! needed to read a recording: the format tag and version, the
//! architecture, the fitted preprocessing, the sensor's taxel count, the
//! language of the training text, a training summary and the parameters.
//!
//! ```text
//! { "format": "tactread-model", "version": 1,
//!   "architecture": { "kind": "gru-ctc", "gru": { "inputs": 24, "hidden": 128, ... },
//!                     "classes": 65, "head": "blank+6dots" },
//!   "sensor": { "taxels": 24, "name": "..." }, "lang": "en",
//!   "prep": { ... }, "training": { ... }, "network": { ... } }
//! ```
//!
//! Loading checks the tag and version first (an [`Error::Format`] names
//! what was found) and then every shape, so a damaged or foreign file is a
//! clear error, never a panic. Files are written atomically.

use super::gru::GruConfig;
use super::head::N_CLASSES;
use super::network::Network;
use crate::fsutil::write_atomic;
use crate::prep::Prep;
use crate::{Error, Result};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Format tag of model files.
pub const MODEL_FORMAT: &str = "tactread-model";
/// Model file version this build writes and reads.
pub const MODEL_VERSION: u32 = 1;
const KIND: &str = "gru-ctc";
const HEAD: &str = "blank+6dots";

/// What the network is.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Architecture {
    /// Always `gru-ctc`.
    pub kind: String,
    /// The GRU stack's shape.
    pub gru: GruConfig,
    /// Output classes: 64 six-dot patterns and the blank (65).
    pub classes: usize,
    /// Always `blank+6dots` (the factorised head).
    pub head: String,
}

/// The sensor the model was trained for.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SensorSummary {
    /// Taxels per frame.
    pub taxels: usize,
    /// The sensor's name in the training manifests, when they give one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub name: Option<String>,
}

/// How the model was trained (informative; not needed to run it).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct TrainingSummary {
    /// The dataset folder.
    pub data: String,
    /// Training and validation recordings.
    pub train_recordings: usize,
    /// Validation recordings.
    pub validation_recordings: usize,
    /// Epochs run.
    pub epochs: usize,
    /// Epoch (1-based) whose parameters are stored.
    pub best_epoch: usize,
    /// Validation dot accuracy of the stored parameters (greedy decoding).
    pub validation_dot_accuracy: f64,
    /// Validation character accuracy of the stored parameters.
    pub validation_char_accuracy: f64,
    /// Mean training loss per cell in the best epoch.
    pub train_loss: f64,
    /// Wall-clock training time in seconds.
    pub seconds: f64,
    /// Random seed.
    pub seed: u64,
    /// Threads (also the number of gradient shards).
    pub threads: usize,
    /// Languages of the training texts when there were several (the
    /// model's `lang` is then the most common one); empty for one language.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub languages: Vec<String>,
    /// The other options, as given.
    #[serde(default)]
    pub options: serde_json::Map<String, serde_json::Value>,
    /// The model this one was fine-tuned from (`tactread train --init`);
    /// absent (and not written) for a model trained from scratch, so model
    /// files written before the field existed still load.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fine_tuned_from: Option<FineTunedFrom>,
}

/// Where a fine-tuned model started (see [`TrainingSummary::fine_tuned_from`]).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct FineTunedFrom {
    /// The starting model as it was named (a path, or `default` for the
    /// embedded default model).
    pub model: String,
    /// The dataset the starting model was trained on (its summary's `data`).
    pub data: String,
    /// Epochs the starting model had been trained.
    pub epochs: usize,
    /// Whether the preprocessing's baseline and scale were re-estimated on
    /// the new data (else the starting model's were kept).
    pub refit_prep: bool,
}

/// A trained model: network, preprocessing and metadata.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Model {
    /// Always [`MODEL_FORMAT`].
    pub format: String,
    /// Always [`MODEL_VERSION`].
    pub version: u32,
    /// The network's shape.
    pub architecture: Architecture,
    /// The sensor it reads.
    pub sensor: SensorSummary,
    /// Language pack of the training text, e.g. `en`.
    pub lang: String,
    /// The fitted preprocessing.
    pub prep: Prep,
    /// How it was trained.
    pub training: TrainingSummary,
    /// The parameters.
    pub network: Network,
}

#[derive(Deserialize)]
struct Header {
    format: Option<serde_json::Value>,
    version: Option<serde_json::Value>,
}

impl Model {
    /// Assembles a model (tags filled in).
    pub fn new(
        network: Network,
        prep: Prep,
        sensor: SensorSummary,
        lang: impl Into<String>,
        training: TrainingSummary,
    ) -> Model {
        Model {
            format: MODEL_FORMAT.into(),
            version: MODEL_VERSION,
            architecture: Architecture {
                kind: KIND.into(),
                gru: network.config(),
                classes: N_CLASSES,
                head: HEAD.into(),
            },
            sensor,
            lang: lang.into(),
            prep,
            training,
            network,
        }
    }

    /// Reads and validates a model file.
    pub fn load(path: &Path) -> Result<Model> {
        let text = crate::text_file::read_utf8(
            path,
            "a model file is UTF-8 JSON written by tactread: copy it again or train the model again",
        )?;
        Model::from_json(&text, path)
    }

    /// Parses and validates a model from JSON text; `path` names it in errors.
    pub fn from_json(text: &str, path: &Path) -> Result<Model> {
        let expected = format!("{MODEL_FORMAT} version {MODEL_VERSION}");
        let hint = "train a model with this build's `tactread train`".to_string();
        let format_err = |found: String| Error::Format {
            path: path.to_path_buf(),
            expected: expected.clone(),
            found,
            hint: hint.clone(),
        };
        let header: Header = serde_json::from_str(text)
            .map_err(|e| format_err(format!("a file that is not a JSON object ({e})")))?;
        match (&header.format, &header.version) {
            (Some(serde_json::Value::String(f)), Some(v)) if f == MODEL_FORMAT => {
                if v.as_u64() != Some(MODEL_VERSION as u64) {
                    return Err(format_err(format!("{MODEL_FORMAT} version {v}")));
                }
            }
            (Some(f), _) => return Err(format_err(format!("format {f}"))),
            (None, _) => return Err(format_err("no \"format\" field".into())),
        }
        let model: Model = serde_json::from_str(text)
            .map_err(|e| format_err(format!("a damaged {MODEL_FORMAT} file ({e})")))?;
        model.check(path)?;
        Ok(model)
    }

    fn check(&self, path: &Path) -> Result<()> {
        let bad = |what: String| Error::Format {
            path: path.to_path_buf(),
            expected: format!("a consistent {MODEL_FORMAT} version {MODEL_VERSION} file"),
            found: what,
            hint: "the file is damaged or was edited by hand; train the model again".into(),
        };
        if self.architecture.kind != KIND
            || self.architecture.head != HEAD
            || self.architecture.classes != N_CLASSES
        {
            return Err(bad(format!(
                "architecture {} / {} / {} classes (this build reads {KIND} / {HEAD} / {N_CLASSES})",
                self.architecture.kind, self.architecture.head, self.architecture.classes
            )));
        }
        self.architecture
            .gru
            .check()
            .map_err(|e| bad(e.to_string()))?;
        if self.architecture.gru != self.network.config() {
            return Err(bad("architecture and parameters of different shapes".into()));
        }
        self.network.check_shapes().map_err(bad)?;
        self.prep.check_shapes().map_err(bad)?;
        if self.prep.taxels != self.sensor.taxels
            || self.network.config().inputs != self.prep.taxels
        {
            return Err(bad(format!(
                "sensor taxels {}, preprocessing taxels {}, network inputs {}",
                self.sensor.taxels,
                self.prep.taxels,
                self.network.config().inputs
            )));
        }
        Ok(())
    }

    /// Checks that a recording of `taxels` taxels (named `name`) can be
    /// read by this model.
    pub fn check_taxels(&self, taxels: usize, name: &str) -> Result<()> {
        if taxels != self.sensor.taxels {
            return Err(Error::Mismatch {
                what: format!("taxel count of {name}"),
                expected: format!("{} (the model's sensor)", self.sensor.taxels),
                got: taxels.to_string(),
                hint: "use a model trained on recordings of this sensor".into(),
            });
        }
        Ok(())
    }

    /// The model as JSON text.
    pub fn to_json(&self) -> String {
        serde_json::to_string(self).expect("a model always serialises")
    }

    /// Writes the model to `path` atomically (temporary file in the same
    /// folder, then renamed over `path`).
    pub fn save(&self, path: &Path) -> Result<()> {
        write_atomic(path, self.to_json().as_bytes())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prep::Grid;

    fn model() -> Model {
        let cfg = GruConfig {
            inputs: 3,
            hidden: 4,
            layers: 1,
            bidirectional: false,
        };
        let net = Network::new(cfg, 1).unwrap();
        let prep = Prep {
            taxels: 3,
            grid: Grid::Position { step_mm: 0.5 },
            decimate: 1,
            baseline: vec![0.0; 3],
            scale: vec![1.0; 3],
        };
        Model::new(
            net,
            prep,
            SensorSummary {
                taxels: 3,
                name: None,
            },
            "en",
            TrainingSummary::default(),
        )
    }

    #[test]
    fn round_trips_exactly_through_a_file() {
        let dir = crate::testutil::test_dir("model-test");
        let path = dir.join("m.json");
        let m = model();
        m.save(&path).unwrap();
        let back = Model::load(&path).unwrap();
        assert_eq!(back, m);
    }

    #[test]
    fn files_without_the_fine_tuning_field_still_load() {
        // models/default.json was written before `fine_tuned_from` existed.
        let text = include_str!("../../models/default.json");
        assert!(!text.contains("fine_tuned_from"));
        let m = Model::from_json(text, Path::new("models/default.json")).unwrap();
        assert!(m.training.fine_tuned_from.is_none());
        // And a model trained from scratch does not write it.
        assert!(!model().to_json().contains("fine_tuned_from"));
    }

    #[test]
    fn foreign_and_damaged_files_are_format_errors() {
        let p = Path::new("m.json");
        let cases = [
            "not json".to_string(),
            r#"{"format": "tactread-lexicon", "version": 1}"#.to_string(),
            r#"{"version": 1}"#.to_string(),
            m_with(|v| v["version"] = 2.into()),
            m_with(|v| v["network"]["head"]["b"]["dim"] = serde_json::json!([6])),
            m_with(|v| v["sensor"]["taxels"] = 5.into()),
            m_with(|v| v["architecture"]["gru"]["hidden"] = 5.into()),
            m_with(|v| v["prep"]["scale"] = serde_json::json!([1.0, 0.0, 1.0])),
        ];
        for c in &cases {
            match Model::from_json(c, p) {
                Err(Error::Format { .. }) => {}
                other => panic!("{c:.80}: expected a format error, got {other:?}"),
            }
        }
        let m = model();
        assert!(matches!(
            m.check_taxels(24, "scan.json"),
            Err(Error::Mismatch { .. })
        ));
        assert!(m.check_taxels(3, "scan.json").is_ok());
    }

    fn m_with(edit: impl Fn(&mut serde_json::Value)) -> String {
        let mut v: serde_json::Value = serde_json::from_str(&model().to_json()).unwrap();
        edit(&mut v);
        v.to_string()
    }
}
