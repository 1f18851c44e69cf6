//! Writing a recording: [`Recording::save`] checks the recording, then
//! writes the frames file and the manifest atomically (each to a temporary
//! file in the same folder, flushed to disk, then renamed into place; the
//! manifest last, so a manifest never points at a half-written frames file)
//! and refuses to overwrite existing files unless told to.

use super::manifest::{check_manifest, extension_lower, to_json};
use super::values::{self, TimeCheck, POSITION, TIME};
use super::{csv_frames, npy_frames, NpyColumns, Recording, MANIFEST_FORMAT, MANIFEST_VERSION};
use crate::fsutil::{sync_folder, write_temp};
use crate::{Error, Result};
use std::io::Write;
use std::path::Path;

/// The two kinds of frames file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum FramesKind {
    /// CSV with a header line: readable anywhere, about 10 bytes per value.
    Csv,
    /// `.npy` array (written as float64, 8 bytes per value): for long
    /// recordings.
    Npy,
}

impl FramesKind {
    /// The file extension, without the dot: `csv` or `npy`.
    pub fn extension(self) -> &'static str {
        match self {
            FramesKind::Csv => "csv",
            FramesKind::Npy => "npy",
        }
    }
}

/// How [`Recording::save`] writes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SaveOptions {
    /// Kind of frames file. Default [`FramesKind::Csv`].
    pub kind: FramesKind,
    /// Replace existing files. Default `false`: saving over an existing
    /// manifest or frames file is an [`Error::Output`].
    pub overwrite: bool,
}

impl Default for SaveOptions {
    fn default() -> Self {
        SaveOptions {
            kind: FramesKind::Csv,
            overwrite: false,
        }
    }
}

impl SaveOptions {
    /// Options writing frames of `kind`, not overwriting.
    pub fn new(kind: FramesKind) -> Self {
        SaveOptions {
            kind,
            overwrite: false,
        }
    }

    /// The same options, replacing existing files when `overwrite`.
    pub fn overwrite(mut self, overwrite: bool) -> Self {
        self.overwrite = overwrite;
        self
    }
}

impl From<FramesKind> for SaveOptions {
    fn from(kind: FramesKind) -> Self {
        SaveOptions::new(kind)
    }
}

impl Recording {
    /// Write the recording as the manifest `manifest_path` (which must end
    /// in `.json`) plus a frames file beside it named after the manifest's
    /// stem (`scan.json` -> `scan.csv` or `scan.npy`).
    ///
    /// The manifest is written with the current format tag and version,
    /// `frames` set to the frames file's name, and `npy_columns` set for
    /// `.npy` (removed for CSV). Loading the files back gives this recording
    /// exactly (floats are written with round-trip digits, or as float64).
    ///
    /// Errors: [`Error::Config`] for a manifest path not ending in `.json`;
    /// [`Error::Output`] when a file exists and `overwrite` is off, or when
    /// the recording is not valid (lengths disagree, a value is not finite,
    /// time does not increase, the manifest does not check); [`Error::Io`]
    /// when writing fails.
    ///
    /// ```no_run
    /// # use tactread::recording::{FramesKind, Recording, SaveOptions};
    /// # fn demo(rec: &Recording) -> tactread::Result<()> {
    /// rec.save("out/scan.json".as_ref(), FramesKind::Npy)?;
    /// rec.save("out/scan.json".as_ref(), SaveOptions::new(FramesKind::Csv).overwrite(true))?;
    /// # Ok(()) }
    /// ```
    pub fn save(&self, manifest_path: &Path, options: impl Into<SaveOptions>) -> Result<()> {
        let options = options.into();
        if extension_lower(manifest_path).as_deref() != Some("json") {
            return Err(Error::config(
                "manifest path",
                format!(
                    "{} does not end in .json: name the manifest like `scan.json`; the frames \
                     file gets the same stem",
                    manifest_path.display()
                ),
            ));
        }
        let frames_path = manifest_path.with_extension(options.kind.extension());
        let frames_name = frames_path
            .file_name()
            .and_then(|n| n.to_str())
            .ok_or_else(|| {
                Error::config(
                    "manifest path",
                    format!("{} has no usable file name", manifest_path.display()),
                )
            })?
            .to_string();

        let mut manifest = self.manifest.clone();
        manifest.format = MANIFEST_FORMAT.to_string();
        manifest.version = MANIFEST_VERSION;
        manifest.frames = frames_name;
        manifest.npy_columns = match options.kind {
            FramesKind::Csv => None,
            FramesKind::Npy => Some(NpyColumns {
                time_s: true,
                position_mm: self.position_mm.is_some(),
            }),
        };
        check_manifest(&manifest).map_err(|(field, message)| Error::Output {
            path: manifest_path.to_path_buf(),
            reason: format!("manifest field `{field}` {message}"),
        })?;
        check_recording(self, &frames_path)?;

        if !options.overwrite {
            for path in [&frames_path, &manifest_path.to_path_buf()] {
                if path.exists() {
                    return Err(Error::Output {
                        path: path.clone(),
                        reason: "the file exists: choose another name, or save with overwrite \
                                 on (SaveOptions::overwrite)"
                            .to_string(),
                    });
                }
            }
        }
        let frames_tmp = write_temp(&frames_path, |w| match options.kind {
            FramesKind::Csv => csv_frames::write_csv(w, self),
            FramesKind::Npy => npy_frames::write_npy(w, self),
        })?;
        let manifest_tmp = match write_temp(manifest_path, |w| {
            w.write_all(to_json(&manifest).as_bytes())
        }) {
            Ok(tmp) => tmp,
            Err(e) => {
                let _ = std::fs::remove_file(&frames_tmp);
                return Err(e);
            }
        };
        if let Err(e) = std::fs::rename(&frames_tmp, &frames_path) {
            let _ = std::fs::remove_file(&frames_tmp);
            let _ = std::fs::remove_file(&manifest_tmp);
            return Err(Error::io("cannot write", &frames_path, e));
        }
        if let Err(e) = std::fs::rename(&manifest_tmp, manifest_path) {
            let _ = std::fs::remove_file(&manifest_tmp);
            return Err(Error::io("cannot write", manifest_path, e));
        }
        sync_folder(manifest_path);
        Ok(())
    }
}

/// Check that the recording's parts agree and hold only valid values.
fn check_recording(rec: &Recording, frames_path: &Path) -> Result<()> {
    let refuse = |reason: String| Error::Output {
        path: frames_path.to_path_buf(),
        reason,
    };
    let (n, taxels) = rec.frames.dim();
    if taxels != rec.manifest.sensor.taxels {
        return Err(refuse(format!(
            "frames have {taxels} taxel columns but manifest sensor.taxels is {}: make them agree",
            rec.manifest.sensor.taxels
        )));
    }
    if n == 0 {
        return Err(refuse("the recording has no frames".to_string()));
    }
    if rec.time_s.len() != n {
        return Err(refuse(format!(
            "time_s has {} entries for {n} frames: give one time per frame",
            rec.time_s.len()
        )));
    }
    if let Some(p) = &rec.position_mm {
        if p.len() != n {
            return Err(refuse(format!(
                "position_mm has {} entries for {n} frames: give one position per frame",
                p.len()
            )));
        }
    }
    let mut time = TimeCheck::default();
    for (i, row) in rec.frames.rows().into_iter().enumerate() {
        let at = |column: &str, m: String| {
            refuse(format!(
                "frame {} (data row {}), column `{column}`: {m}",
                i,
                i + 1
            ))
        };
        time.check(rec.time_s[i]).map_err(|m| at(TIME, m))?;
        if let Some(p) = &rec.position_mm {
            values::check_f64(p[i]).map_err(|m| at(POSITION, m))?;
        }
        for (k, v) in row.iter().enumerate() {
            if !v.is_finite() {
                return Err(at(
                    &values::taxel_name(k),
                    values::non_finite_message(f64::from(*v)),
                ));
            }
        }
    }
    Ok(())
}
