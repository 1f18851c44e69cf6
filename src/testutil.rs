//! Test-only helpers shared by the unit tests (compiled only under
//! `cfg(test)`): scratch folders in the system temp folder that are unique
//! to one test and removed when the test ends, also when it panics.
//!
//! Set `TACTREAD_KEEP_TEST_DIRS=1` to keep them for looking at after a
//! failing test; each kept folder is named on standard error.

use std::path::{Path, PathBuf};

/// The environment variable that keeps test folders when set to `1`.
pub(crate) const KEEP_VAR: &str = "TACTREAD_KEEP_TEST_DIRS";

/// A scratch folder for one test. Dropping it removes the folder and
/// everything in it, unless [`KEEP_VAR`] was `1` when it was made.
#[derive(Debug)]
pub(crate) struct TestDir {
    /// The guard that removes the folder on drop; `None` when kept.
    _guard: Option<tempfile::TempDir>,
    path: PathBuf,
}

impl TestDir {
    /// The folder.
    pub(crate) fn path(&self) -> &Path {
        &self.path
    }
}

impl std::ops::Deref for TestDir {
    type Target = Path;
    fn deref(&self) -> &Path {
        &self.path
    }
}

impl AsRef<Path> for TestDir {
    fn as_ref(&self) -> &Path {
        &self.path
    }
}

/// Whether [`KEEP_VAR`] asks to keep test folders.
fn keep() -> bool {
    std::env::var_os(KEEP_VAR).is_some_and(|v| v == "1")
}

/// A fresh, empty folder `tactread-<name>-<random>` in the system temp
/// folder, unique even across test processes run at once.
pub(crate) fn test_dir(name: &str) -> TestDir {
    let guard = tempfile::Builder::new()
        .prefix(&format!("tactread-{name}-"))
        .tempdir()
        .expect("a test folder can be made in the temp folder");
    if keep() {
        let path = guard.keep();
        eprintln!("{KEEP_VAR}=1: keeping {}", path.display());
        TestDir { _guard: None, path }
    } else {
        let path = guard.path().to_path_buf();
        TestDir {
            _guard: Some(guard),
            path,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// With [`KEEP_VAR`] set the folder must outlive its guard (and is
    /// then removed here); otherwise it must be gone.
    fn check_after_drop(path: &Path) {
        if keep() {
            assert!(path.is_dir(), "{} was not kept", path.display());
            std::fs::remove_dir_all(path).unwrap();
        } else {
            assert!(!path.exists(), "{} is left behind", path.display());
        }
    }

    #[test]
    fn the_folder_is_removed_on_drop_and_on_panic() {
        let d = test_dir("testutil");
        let path = d.path().to_path_buf();
        std::fs::write(d.join("f.txt"), "x").unwrap();
        assert!(path.is_dir());
        drop(d);
        check_after_drop(&path);

        let mut seen = None;
        let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
            let d = test_dir("testutil-panic");
            seen = Some(d.path().to_path_buf());
            std::fs::write(d.join("f.txt"), "x").unwrap();
            panic!("a failing test");
        }));
        assert!(r.is_err());
        check_after_drop(&seen.expect("the closure ran"));
    }

    #[test]
    fn two_folders_of_one_name_differ() {
        let (a, b) = (test_dir("testutil"), test_dir("testutil"));
        assert_ne!(a.path(), b.path());
        let name = a.path().file_name().unwrap().to_str().unwrap();
        assert!(name.starts_with("tactread-testutil-"), "{name}");
        let paths = [a.path().to_path_buf(), b.path().to_path_buf()];
        drop((a, b));
        for p in &paths {
            check_after_drop(p);
        }
    }
}
