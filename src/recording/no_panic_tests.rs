//! Mutation tests: thousands of damaged manifests, CSV and `.npy` files
//! (seeded, so failures reproduce) must each give `Ok` or an error, never a
//! panic. A bounded stand-in for the fuzzing of issue 8; the counts are kept
//! small so the default test run stays fast; set `TACTREAD_MUTATION_ROUNDS`
//! to run more (e.g. `TACTREAD_MUTATION_ROUNDS=200000 cargo test --release
//! --lib no_panic`).

use super::csv_frames::CsvFrameReader;
use super::manifest::parse_manifest;
use super::npy_frames::{header_bytes, read_header};
use super::Recording;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::path::Path;

const MANIFEST: &str = include_str!("../../tests/compat/v1/tea-jar.json");
const NPY_MANIFEST: &str = include_str!("../../tests/compat/v1/tea-jar-npy.json");
const CSV: &str = include_str!("../../tests/compat/v1/tea-jar.csv");
const NPY: &[u8] = include_bytes!("../../tests/compat/v1/tea-jar-npy.npy");

/// Tokens that tend to reach interesting branches.
const TOKENS: [&[u8]; 16] = [
    b",",
    b"\n",
    b"\r\n",
    b"\"",
    b"NaN",
    b"inf",
    b"-",
    b"1e999",
    b"1e39",
    b"\xff",
    b"\xef\xbb\xbf",
    b"{",
    b"}",
    b"(",
    b"'",
    b"999999999999999999999",
];

/// Rounds per test: `TACTREAD_MUTATION_ROUNDS`, else `default`.
fn rounds(default: usize) -> usize {
    std::env::var("TACTREAD_MUTATION_ROUNDS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn mutate(rng: &mut ChaCha8Rng, seed: &[u8]) -> Vec<u8> {
    let mut b = seed.to_vec();
    for _ in 0..rng.gen_range(1..4) {
        let len = b.len();
        let at = if len == 0 { 0 } else { rng.gen_range(0..len) };
        match rng.gen_range(0..6) {
            0 if len > 0 => b[at] = rng.gen(),
            1 => {
                let t = TOKENS[rng.gen_range(0..TOKENS.len())];
                b.splice(at..at, t.iter().copied());
            }
            2 if len > 0 => {
                let end = (at + rng.gen_range(1..16)).min(len);
                b.drain(at..end);
            }
            3 => b.truncate(at),
            4 if len > 0 => {
                let end = (at + rng.gen_range(1..32)).min(len);
                let piece = b[at..end].to_vec();
                b.splice(at..at, piece);
            }
            _ if len > 0 => b[at] ^= 1 << rng.gen_range(0..8),
            _ => {}
        }
    }
    b
}

#[test]
fn damaged_manifests_never_panic() {
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let n = rounds(3000);
    let mut rejected = 0;
    for _ in 0..n {
        let seed = if rng.gen() { MANIFEST } else { NPY_MANIFEST };
        let bytes = mutate(&mut rng, seed.as_bytes());
        rejected += usize::from(parse_manifest(&bytes, Path::new("m.json")).is_err());
    }
    assert!(rejected * 3 > n, "most damage is caught: {rejected} of {n}");
}

#[test]
fn damaged_csv_never_panics() {
    let mut rng = ChaCha8Rng::seed_from_u64(2);
    let n = rounds(3000);
    let mut rejected = 0;
    for _ in 0..n {
        let bytes = mutate(&mut rng, CSV.as_bytes());
        let taxels = rng.gen_range(3..6);
        let result = CsvFrameReader::new(&bytes[..], "t.csv", taxels)
            .and_then(|r| r.collect::<crate::Result<Vec<_>>>());
        rejected += usize::from(result.is_err());
    }
    assert!(rejected * 3 > n, "most damage is caught: {rejected} of {n}");
}

#[test]
fn damaged_npy_headers_never_panic() {
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    let ours = header_bytes(5, 6);
    for _ in 0..rounds(3000) {
        let seed: &[u8] = if rng.gen() { NPY } else { &ours };
        let bytes = mutate(&mut rng, seed);
        let _ = read_header(&mut &bytes[..], bytes.len() as u64);
    }
}

#[test]
fn damaged_npy_files_never_panic() {
    let dir = crate::testutil::test_dir("no-panic-npy");
    std::fs::write(
        dir.join("m.json"),
        NPY_MANIFEST.replace("tea-jar-npy.npy", "m.npy"),
    )
    .unwrap();
    let mut rng = ChaCha8Rng::seed_from_u64(4);
    let n = rounds(3000) / 10 + 1;
    let mut loaded = 0;
    for _ in 0..n {
        std::fs::write(dir.join("m.npy"), mutate(&mut rng, NPY)).unwrap();
        loaded += usize::from(Recording::load(&dir.join("m.json")).is_ok());
    }
    // Flipping bits inside the float data often leaves a valid file.
    assert!(loaded < n, "some damage is caught: {loaded} of {n} loaded");
}
