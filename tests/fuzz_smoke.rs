//! Smoke mode of the fuzz targets, inside `cargo test` (no libFuzzer needed):
//! every harness of `fuzz/src/lib.rs` runs over its committed seeds
//! (`fuzz/corpus/<name>/seed-*`) and over deterministic pseudo-random
//! mutations of them. A panic (or a failed invariant inside a harness) fails
//! the test and prints the input that caused it.

#[path = "../fuzz/src/lib.rs"]
mod harness;
mod rng_support;

use rng_support::XorShift;
use std::path::{Path, PathBuf};

/// Mutations per harness (a few thousand in all; a few seconds in the dev profile).
const MUTATIONS: usize = 700;

/// The draws of the inputs (tests/rng_support), so every run tries the
/// same inputs.
struct Rng(XorShift);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0.step()
    }
    fn below(&mut self, n: usize) -> usize {
        if n == 0 {
            0
        } else {
            (self.next() % n as u64) as usize
        }
    }
}

/// Bytes that matter to rung's parsers: separators, quotes, signs, digits,
/// unit letters, TOML punctuation, multi-byte UTF-8 and invalid UTF-8.
const INTERESTING: &[&[u8]] = &[
    b",",
    b"\"",
    b"\n",
    b"\r\n",
    b":",
    b"-",
    b"+",
    b".",
    b"0",
    b"9",
    b"60",
    b"24",
    b"90",
    b"e308",
    b"NaN",
    b"inf",
    b"h",
    b"m",
    b"s",
    b"d",
    b"Z",
    b"T",
    b" ",
    b"#",
    b"[",
    b"]",
    b"[[",
    b"=",
    b"'",
    b"\"\"\"",
    "\u{2212}".as_bytes(),
    "\u{b0}".as_bytes(),
    "\u{2032}".as_bytes(),
    "\u{e9}".as_bytes(),
    b"\xff",
    b"\xc3",
    b"\0",
    b"\x01",
    b"99999999999999999999",
    b"-0",
    b"1e-400",
    b"2016-12-31T23:59:60",
    b"1959-12-31",
    b"2100-01-01",
    b"[[target]]\n",
    b"[[site]]\n",
    b"name = \"x\"\n",
];

fn mutate(rng: &mut Rng, base: &[u8], other: &[u8]) -> Vec<u8> {
    let mut v = base.to_vec();
    for _ in 0..1 + rng.below(4) {
        let len = v.len();
        match rng.below(7) {
            0 if len > 0 => {
                let i = rng.below(len);
                v[i] ^= 1 << rng.below(8);
            }
            1 => {
                let i = rng.below(len + 1);
                let ins = INTERESTING[rng.below(INTERESTING.len())];
                v.splice(i..i, ins.iter().copied());
            }
            2 if len > 0 => {
                let i = rng.below(len);
                let j = (i + 1 + rng.below(16)).min(len);
                v.drain(i..j);
            }
            3 if len > 0 => {
                let i = rng.below(len);
                let j = (i + 1 + rng.below(64)).min(len);
                let chunk: Vec<u8> = v[i..j].to_vec();
                let k = rng.below(len + 1);
                v.splice(k..k, chunk);
            }
            4 if !other.is_empty() => {
                let i = rng.below(len + 1);
                let a = rng.below(other.len());
                let b = (a + 1 + rng.below(80)).min(other.len());
                v.splice(i..i, other[a..b].iter().copied());
            }
            5 if len > 0 => {
                let i = rng.below(len);
                v[i] = b"0123456789"[rng.below(10)];
            }
            _ => {
                let i = rng.below(len + 1);
                v.truncate(i);
            }
        }
    }
    v
}

fn fuzz_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fuzz")
}

fn seeds(name: &str) -> Vec<(String, Vec<u8>)> {
    let dir = fuzz_dir().join("corpus").join(name);
    let mut out: Vec<(String, Vec<u8>)> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().starts_with("seed-"))
        .map(|e| {
            (
                e.file_name().to_string_lossy().into_owned(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect();
    out.sort();
    out
}

fn run_one(name: &str, f: harness::Harness, input: &[u8], what: &str) {
    let r = std::panic::catch_unwind(|| f(input));
    if r.is_err() {
        panic!(
            "harness {name} panicked on {what}: {:?}",
            String::from_utf8_lossy(input)
        );
    }
}

#[test]
fn every_fuzz_target_has_a_harness_and_seeds() {
    let dir = fuzz_dir().join("fuzz_targets");
    let mut files: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .filter_map(|e| e.ok())
        .map(|e| {
            e.file_name()
                .to_string_lossy()
                .trim_end_matches(".rs")
                .to_string()
        })
        .collect();
    files.sort();
    let mut names: Vec<String> = harness::HARNESSES
        .iter()
        .map(|(n, _)| n.to_string())
        .collect();
    names.sort();
    assert_eq!(files, names, "fuzz_targets/*.rs and HARNESSES disagree");
    let manifest = std::fs::read_to_string(fuzz_dir().join("Cargo.toml")).unwrap();
    for n in &names {
        assert!(
            manifest.contains(&format!("name = \"{n}\"")),
            "fuzz/Cargo.toml has no [[bin]] for {n}"
        );
        assert!(
            seeds(n).len() >= 3,
            "fuzz/corpus/{n} needs a few seed-* files"
        );
    }
}

#[test]
fn harnesses_survive_seeds_and_mutations() {
    for (k, (name, f)) in harness::HARNESSES.iter().enumerate() {
        let seeds = seeds(name);
        for (file, data) in &seeds {
            run_one(name, *f, data, file);
        }
        let mut rng = Rng(XorShift(0x9E37_79B9_7F4A_7C15 ^ (k as u64 + 1)));
        for i in 0..MUTATIONS {
            let (_, base) = &seeds[rng.below(seeds.len())];
            let (_, other) = &seeds[rng.below(seeds.len())];
            let m = mutate(&mut rng, base, other);
            run_one(name, *f, &m, &format!("mutation {i}"));
        }
    }
}
