//! Checks of the test helpers themselves: the scratch folders of
//! `tests/common/cli.rs` are unique and leave nothing behind in the system
//! temp folder, when the test ends and when it panics.

mod common;

use common::cli::{keep_test_dirs, scratch, test_dir};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};

/// With `TACTREAD_KEEP_TEST_DIRS=1` the folder must outlive its guard
/// (and is then removed here); otherwise it must be gone.
fn check_after_drop(path: &Path) {
    if keep_test_dirs() {
        assert!(path.is_dir(), "{} was not kept", path.display());
        std::fs::remove_dir_all(path).unwrap();
    } else {
        assert!(!path.exists(), "{} is left behind", path.display());
    }
}

#[test]
fn the_folder_is_removed_when_its_guard_drops() {
    let d = scratch("drop");
    let path = d.path().to_path_buf();
    std::fs::create_dir_all(d.join("sub")).unwrap();
    std::fs::write(d.join("sub/f.txt"), "full").unwrap();
    assert!(path.is_dir());
    drop(d);
    check_after_drop(&path);
}

#[test]
fn the_folder_is_removed_when_the_test_panics() {
    let mut seen = None;
    let r = catch_unwind(AssertUnwindSafe(|| {
        let d = scratch("panic");
        seen = Some(d.path().to_path_buf());
        std::fs::write(d.join("f.txt"), "half").unwrap();
        panic!("a failing assertion");
    }));
    assert!(r.is_err(), "the closure panicked");
    check_after_drop(&seen.expect("the closure made the folder"));
}

#[test]
fn folders_are_unique_and_keep_a_readable_name() {
    let (a, b) = (scratch("same"), scratch("same"));
    assert_ne!(a.path(), b.path());
    for d in [&a, &b] {
        let name = d.file_name().unwrap().to_str().unwrap();
        assert!(name.starts_with("tactread-test_dirs-same-"), "{name}");
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 0, "empty");
    }
    let c = test_dir("plain");
    let name = c.file_name().unwrap().to_str().unwrap();
    assert!(name.starts_with("tactread-plain-"), "{name}");
    let paths: Vec<PathBuf> = [&a, &b, &c].iter().map(|d| d.to_path_buf()).collect();
    drop((a, b, c));
    for p in &paths {
        check_after_drop(p);
    }
}
