//! Helpers shared by the tests that run the built binary: running
//! `tactread` (optionally in a folder or with standard input), a fresh
//! scratch folder per test that removes itself when the test ends (also
//! on a panic), and paths as `&str` arguments.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

/// Run the built binary with `args` and wait for it.
pub fn tactread(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(args)
        .output()
        .expect("the binary runs")
}

/// Run the built binary with `args` in the folder `dir` (relative paths in
/// arguments and messages are then relative to it).
pub fn tactread_in(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the binary runs")
}

/// Run the built binary with `args`, writing `stdin` to its standard input
/// (none: an empty, closed input).
pub fn tactread_with_stdin(args: &[&str], stdin: Option<&str>) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_tactread"))
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary runs");
    if let Some(text) = stdin {
        child
            .stdin
            .take()
            .expect("stdin is piped")
            .write_all(text.as_bytes())
            .expect("stdin takes the text");
    }
    drop(child.stdin.take());
    child.wait_with_output().expect("the binary finishes")
}

/// The environment variable that keeps test folders when set to `1`
/// (for looking at what a failing test left).
pub const KEEP_VAR: &str = "TACTREAD_KEEP_TEST_DIRS";

/// A scratch folder for one test, held for the whole test: dropping it
/// (when the test returns or panics) removes the folder and everything in
/// it, unless [`KEEP_VAR`] was `1` when it was made. Derefs to [`Path`].
#[derive(Debug)]
pub struct TestDir {
    /// The guard that removes the folder on drop; `None` when kept.
    _guard: Option<tempfile::TempDir>,
    path: PathBuf,
}

impl TestDir {
    /// The folder.
    pub fn path(&self) -> &Path {
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
pub fn keep_test_dirs() -> bool {
    std::env::var_os(KEEP_VAR).is_some_and(|v| v == "1")
}

/// A fresh, empty folder `tactread-<name>-<random>` in the system temp
/// folder, unique even across test processes run at once. Kept folders
/// are named on standard error.
pub fn test_dir(name: &str) -> TestDir {
    let guard = tempfile::Builder::new()
        .prefix(&format!("tactread-{name}-"))
        .tempdir()
        .expect("a test folder can be made in the temp folder");
    if keep_test_dirs() {
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

/// A fresh, empty scratch folder for one test,
/// `tactread-<test file>-<name>-<random>` (see [`test_dir`]).
pub fn scratch(name: &str) -> TestDir {
    test_dir(&format!("{}-{name}", env!("CARGO_CRATE_NAME")))
}

/// A path as a command-line argument (test paths are UTF-8).
pub fn s(p: &Path) -> &str {
    p.to_str().expect("test paths are UTF-8")
}

/// Standard error as text.
pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Standard output as text.
pub fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// `tactread simulate dataset` of `lines` lines on the `clean` preset with
/// seed `seed` and one thread into `data`, plus `extra` options (e.g.
/// `--lang en`); fails the test with the command's message if it fails.
pub fn simulate_clean_dataset(data: &Path, lines: &str, seed: &str, extra: &[&str]) {
    let mut args = vec![
        "simulate", "dataset", "--lines", lines, "--preset", "clean", "--seed", seed, "--jobs", "1",
    ];
    args.extend_from_slice(extra);
    args.extend_from_slice(&["--out", s(data)]);
    let out = tactread(&args);
    assert!(out.status.success(), "{}", stderr(&out));
}

/// `tactread train` arguments for a tiny, quick network (8 hidden units,
/// one layer, batches of 8, a 1 mm grid) trained for `epochs` epochs on
/// `threads` threads.
pub fn tiny_train_args<'a>(
    data: &'a str,
    out: &'a str,
    epochs: &'a str,
    threads: &'a str,
) -> Vec<&'a str> {
    vec![
        "train",
        "--data",
        data,
        "--out",
        out,
        "--epochs",
        epochs,
        "--hidden",
        "8",
        "--layers",
        "1",
        "--batch",
        "8",
        "--threads",
        threads,
        "--step-mm",
        "1.0",
    ]
}
