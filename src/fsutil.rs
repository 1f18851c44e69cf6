//! File input and output shared by every stage and command.
//!
//! - [`read_utf8`]: a whole text file as UTF-8; invalid UTF-8 is an input
//!   error naming the line and byte, not an I/O failure.
//! - [`write_atomic`]: the one atomic write. The bytes go to a temporary
//!   file in the target's folder (named `.NAME.tmp-PID-N`), are flushed to
//!   disk, and the temporary is renamed over the target, so a reader (or a
//!   run killed half-way) never sees half a file.
//! - [`OutputGuard`]: the checks every command makes before it writes: an
//!   output is never one of the command's inputs (not even with `--force`),
//!   two outputs are never the same file, and an existing output is replaced
//!   only with `--force`.

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};

pub use crate::text_file::read_utf8;

/// Marker between a target's name and the writer's process id in the names
/// of temporary files: `.model.json.tmp-4242-0`.
const TMP_MARK: &str = ".tmp-";

/// The folder a path's file lives in (`.` for a bare name).
fn folder_of(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// Write `bytes` to `path` atomically: a temporary file in the same folder,
/// flushed to disk, then renamed over `path` (and the folder entry flushed
/// where the platform allows). On failure the temporary is removed and
/// `path` is untouched. This does not check whether `path` may be replaced:
/// commands do that first with [`OutputGuard`].
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let tmp = write_temp(path, |w| w.write_all(bytes))?;
    if let Err(e) = std::fs::rename(&tmp, path) {
        let _ = std::fs::remove_file(&tmp);
        return Err(Error::io("cannot write", path, e));
    }
    sync_folder(path);
    Ok(())
}

/// The first half of an atomic write, for writers that stream or commit
/// several files together (`Recording::save`): write a new temporary file
/// beside `target` (`.NAME.tmp-PID-N`) with `fill`, flush it to disk and
/// return its path, for the caller to rename over `target` (then
/// [`sync_folder`]). The temporary is removed if anything fails.
pub(crate) fn write_temp(
    target: &Path,
    fill: impl FnOnce(&mut std::io::BufWriter<&std::fs::File>) -> std::io::Result<()>,
) -> Result<PathBuf> {
    static COUNTER: AtomicUsize = AtomicUsize::new(0);
    let name = target
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "output".to_string());
    let tmp = folder_of(target).join(format!(
        ".{name}{TMP_MARK}{}-{}",
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    let file = std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&tmp)
        .map_err(|e| Error::io("cannot create", &tmp, e))?;
    let result = (|| {
        let mut w = std::io::BufWriter::new(&file);
        fill(&mut w)?;
        w.flush()?;
        drop(w);
        file.sync_all()
    })();
    drop(file);
    match result {
        Ok(()) => Ok(tmp),
        Err(e) => {
            let _ = std::fs::remove_file(&tmp);
            Err(Error::io("cannot write", target, e))
        }
    }
}

/// Flush the folder entry of `path` to disk where the platform allows it
/// (after a rename); failures are ignored (the file itself is synced).
pub(crate) fn sync_folder(path: &Path) {
    #[cfg(unix)]
    if let Ok(d) = std::fs::File::open(folder_of(path)) {
        let _ = d.sync_all();
    }
    #[cfg(not(unix))]
    let _ = path;
}

/// Remove temporary files that [`write_atomic`] left beside `target` when
/// an earlier process was killed while writing (`.NAME.tmp-PID-N` with
/// another process id than ours). Best effort: failures are ignored. Call
/// it only where no other process writes `target` at the same time (e.g.
/// when a training run starts on its own output).
pub(crate) fn remove_stale_temps(target: &Path) {
    let Some(name) = target.file_name().map(|n| n.to_string_lossy().into_owned()) else {
        return;
    };
    let prefix = format!(".{name}{TMP_MARK}");
    let ours = format!("{prefix}{}-", std::process::id());
    let Ok(entries) = std::fs::read_dir(folder_of(target)) else {
        return;
    };
    for entry in entries.flatten() {
        let file = entry.file_name().to_string_lossy().into_owned();
        if file.starts_with(&prefix) && !file.starts_with(&ours) {
            let _ = std::fs::remove_file(entry.path());
        }
    }
}

/// What identifies a file on disk: its canonical path, and on Unix also its
/// device and inode (so a hard link to an input is recognised too).
#[derive(Debug, Clone, PartialEq, Eq)]
struct FileId {
    canonical: PathBuf,
    inode: Option<(u64, u64)>,
}

impl FileId {
    /// The identity of `path`, which need not exist: a missing file is
    /// identified by its folder's canonical path and its name (or, when the
    /// folder is missing too, by its absolute path).
    fn of(path: &Path) -> FileId {
        let canonical = std::fs::canonicalize(path).unwrap_or_else(|_| {
            let dir = std::fs::canonicalize(folder_of(path)).ok();
            match (dir, path.file_name()) {
                (Some(d), Some(n)) => d.join(n),
                _ => std::env::current_dir()
                    .map(|c| c.join(path))
                    .unwrap_or_else(|_| path.to_path_buf()),
            }
        });
        FileId {
            canonical,
            inode: inode(path),
        }
    }

    fn same(&self, other: &FileId) -> bool {
        self.canonical == other.canonical
            || matches!((self.inode, other.inode), (Some(a), Some(b)) if a == b)
    }
}

#[cfg(unix)]
fn inode(path: &Path) -> Option<(u64, u64)> {
    use std::os::unix::fs::MetadataExt;
    std::fs::metadata(path).ok().map(|m| (m.dev(), m.ino()))
}

#[cfg(not(unix))]
fn inode(_: &Path) -> Option<(u64, u64)> {
    None
}

/// The checks a command makes before it writes anything, so that a
/// mistyped path never destroys data:
///
/// 1. an output is never one of the command's inputs, even with `--force`
///    (paths are compared canonically, so `./words.txt`, `dir/../words.txt`,
///    symbolic and, on Unix, hard links to an input are all recognised);
/// 2. two outputs of one command are never the same file;
/// 3. an output that exists is replaced only with `force` (`--force`).
///
/// Each refusal is an [`Error::Output`] naming the file and saying what to
/// do. Register the inputs with [`OutputGuard::input`], then check each
/// output with [`OutputGuard::file`] (or [`OutputGuard::folder`]).
///
/// ```
/// # use tactread::fsutil::OutputGuard;
/// # let tmp = tempfile::Builder::new().prefix("tactread-guard-doc-").tempdir().unwrap();
/// # let dir = tmp.path();
/// let words = dir.join("words.txt");
/// std::fs::write(&words, "tea\n").unwrap();
/// let mut guard = OutputGuard::new(true);
/// guard.input(&words);
/// // Even with --force, the word list is not written over.
/// assert!(guard.file(&dir.join("./words.txt"), "--out").is_err());
/// assert!(guard.file(&dir.join("words.lex"), "--out").is_ok());
/// ```
#[derive(Debug, Default)]
pub struct OutputGuard {
    force: bool,
    inputs: Vec<(PathBuf, FileId)>,
    outputs: Vec<(String, FileId)>,
}

impl OutputGuard {
    /// A guard for a command run with (`force` true) or without `--force`.
    pub fn new(force: bool) -> OutputGuard {
        OutputGuard {
            force,
            ..OutputGuard::default()
        }
    }

    /// Register an input file of the command (it need not exist yet).
    pub fn input(&mut self, path: impl AsRef<Path>) -> &mut Self {
        let path = path.as_ref();
        self.inputs.push((path.to_path_buf(), FileId::of(path)));
        self
    }

    /// Register several input files.
    pub fn inputs<P: AsRef<Path>>(&mut self, paths: impl IntoIterator<Item = P>) -> &mut Self {
        for p in paths {
            self.input(p);
        }
        self
    }

    /// Check that the file `out`, given with option `flag` (e.g. `--out`),
    /// may be written: it is no input, no other output, not a folder, and
    /// new unless `--force` was given. Claims `out` for later checks.
    /// Checking the same output with the same flag again (after more inputs
    /// are known) checks it against the new inputs.
    pub fn file(&mut self, out: &Path, flag: &str) -> Result<()> {
        let id = FileId::of(out);
        self.not_an_input_or_output(out, &id, flag)?;
        if self.outputs.iter().any(|(f, o)| f == flag && o.same(&id)) {
            return Ok(());
        }
        if out.is_dir() {
            return Err(Error::Output {
                path: out.to_path_buf(),
                reason: format!("it is a folder: give {flag} the name of a file to write"),
            });
        }
        if out.exists() && !self.force {
            return Err(Error::Output {
                path: out.to_path_buf(),
                reason: format!(
                    "the file exists: pass --force to replace it, or choose another {flag}"
                ),
            });
        }
        self.outputs.push((flag.to_string(), id));
        Ok(())
    }

    /// Check that the folder `dir`, given with option `flag`, may receive
    /// outputs: it is no input and holds no input (a folder that is
    /// replaced would take them with it). Whether an existing folder may be
    /// replaced is up to the command.
    pub fn folder(&mut self, dir: &Path, flag: &str) -> Result<()> {
        let id = FileId::of(dir);
        self.not_an_input_or_output(dir, &id, flag)?;
        if let Some((input, _)) = self
            .inputs
            .iter()
            .find(|(_, i)| i.canonical.starts_with(&id.canonical))
        {
            return Err(Error::Output {
                path: dir.to_path_buf(),
                reason: format!(
                    "it holds {}, an input of this command: move the input out of the folder or \
                     choose another {flag} (--force never writes over an input)",
                    input.display()
                ),
            });
        }
        self.outputs.push((flag.to_string(), id));
        Ok(())
    }

    fn not_an_input_or_output(&self, out: &Path, id: &FileId, flag: &str) -> Result<()> {
        if let Some((input, _)) = self.inputs.iter().find(|(_, i)| i.same(id)) {
            return Err(Error::Output {
                path: out.to_path_buf(),
                reason: format!(
                    "it is {}, an input of this command: choose another {flag} (--force never \
                     writes over an input)",
                    input.display()
                ),
            });
        }
        if let Some((other, _)) = self.outputs.iter().find(|(f, o)| f != flag && o.same(id)) {
            return Err(Error::Output {
                path: out.to_path_buf(),
                reason: format!("{other} writes the same file: give {flag} another name"),
            });
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(name: &str) -> crate::testutil::TestDir {
        crate::testutil::test_dir(&format!("fsutil-{name}"))
    }

    #[test]
    fn writes_and_replaces() {
        let dir = scratch("write");
        let p = dir.join("out.txt");
        write_atomic(&p, b"one").unwrap();
        write_atomic(&p, b"two").unwrap();
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "two");
        let leftovers = std::fs::read_dir(&dir).unwrap().count();
        assert_eq!(leftovers, 1);
        assert!(write_atomic(&dir.join("no/such/dir/x"), b"x").is_err());
        // A writer that fails half-way leaves neither the target nor a temporary.
        let e = write_temp(&dir.join("half.txt"), |w| {
            w.write_all(b"half")?;
            Err(std::io::Error::other("disk full"))
        })
        .unwrap_err();
        assert!(matches!(e, Error::Io { .. }), "{e}");
        assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 1);
    }

    #[test]
    fn stale_temporaries_of_other_processes_are_removed() {
        let dir = scratch("stale");
        let target = dir.join("m.json");
        let stale = dir.join(".m.json.tmp-999999999-0");
        let ours = dir.join(format!(".m.json.tmp-{}-7", std::process::id()));
        let other = dir.join(".n.json.tmp-999999999-0");
        for p in [&stale, &ours, &other] {
            std::fs::write(p, "half").unwrap();
        }
        remove_stale_temps(&target);
        assert!(!stale.exists());
        assert!(ours.exists(), "our own temporary is not touched");
        assert!(other.exists(), "another target's temporary is not touched");
    }

    #[test]
    fn guard_refuses_inputs_twins_and_existing_files() {
        let dir = scratch("guard");
        let words = dir.join("words.txt");
        std::fs::write(&words, "tea\n").unwrap();
        std::fs::create_dir_all(dir.join("sub")).unwrap();
        let mut g = OutputGuard::new(true);
        g.input(&words);
        // The same file by another spelling, even with force.
        let e = g.file(&dir.join("sub/../words.txt"), "--out").unwrap_err();
        assert!(matches!(e, Error::Output { .. }), "{e}");
        assert!(e.to_string().contains("an input of this command"), "{e}");
        #[cfg(unix)]
        {
            let link = dir.join("hard.txt");
            std::fs::hard_link(&words, &link).unwrap();
            assert!(g.file(&link, "--out").is_err(), "a hard link is the input");
        }
        // Two outputs on one file; the same output checked again is fine.
        g.file(&dir.join("a.json"), "--json").unwrap();
        g.file(&dir.join("a.json"), "--json").unwrap();
        let e = g.file(&dir.join("./a.json"), "--report").unwrap_err();
        assert!(e.to_string().contains("--json writes the same file"), "{e}");
        // A folder holding an input.
        let e = g.folder(&dir, "--out").unwrap_err();
        assert!(e.to_string().contains("it holds"), "{e}");
        assert!(g.folder(&dir.join("sub"), "--out").is_ok());
        // Without force an existing file is refused, a new one is not.
        let mut g = OutputGuard::new(false);
        let e = g.file(&words, "--out").unwrap_err();
        assert!(e.to_string().contains("pass --force"), "{e}");
        assert!(g.file(&dir.join("new.txt"), "--out").is_ok());
        let e = g.file(&dir.join("sub"), "--out").unwrap_err();
        assert!(e.to_string().contains("is a folder"), "{e}");
    }
}
