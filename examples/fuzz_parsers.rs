//! Seeded fuzzing of the parsers that read what others write: the manifest reader, the
//! bundle reader (a whole bundle import) and the metadata query parser. Each case is a valid
//! seed input mutated at random (bytes flipped, inserted, deleted, repeated; lines cut,
//! swapped and doubled; brackets and quotes added); a bundle case is resealed half of the
//! time (its checksums rewritten, as anyone editing a bundle can) so that the mutation reaches
//! the deeper readers. A case passes when the parser returns (accepts or refuses) without a
//! panic, and a refusal names a file (manifest, bundle) or is a query error. Prints the counts.
//!
//! `cargo run --example fuzz_parsers -- [--cases N] [--seed S] [--only manifest|bundle|query]`
//! (N = 100000 per parser by default; CI runs a small count).

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};

use whorl::library::{Acceptance, Library, Metadata, Submission, read_manifest, stage};
use whorl::technique::Technique;
use whorl::text::TextIndex;

/// xorshift64* (Vigna 2016), seeded: the same seed gives the same cases.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

/// Pieces worth inserting: delimiters, quotes, brackets, formula and control characters,
/// look-alike letters, numbers of extreme size.
const PIECES: &[&str] = &[
    ",",
    ";",
    "\"",
    "\"\"",
    "\n",
    "\r\n",
    "\r",
    "\t",
    "(",
    ")",
    "[",
    "]",
    "{",
    "}",
    ":",
    "*",
    "AND",
    "OR",
    "NOT",
    "=",
    "+",
    "-",
    "@",
    "\u{1b}[31m",
    "\0",
    "\u{202e}",
    "\u{ff41}",
    "\u{0430}",
    "1e308",
    "-1e400",
    "NaN",
    "inf",
    "0x10",
    "..",
    "../",
    "/etc/passwd",
    "~",
    "whorl_status",
    "verified",
    "withdrawn",
    "file",
    "name",
    "technique",
    "ir",
    "ms-ei",
    "nmr-13c",
    "\u{feff}",
    "\\",
    "'",
    "%",
    "é",
];

fn mutate(rng: &mut Rng, seed: &[u8]) -> Vec<u8> {
    let mut b = seed.to_vec();
    for _ in 0..1 + rng.below(6) {
        let at = rng.below(b.len() + 1);
        match rng.below(9) {
            0 if !b.is_empty() => {
                let i = at.min(b.len() - 1);
                b[i] ^= 1 << rng.below(8);
            }
            1 => b.insert(at, rng.next() as u8),
            2 if at < b.len() => {
                let end = (at + 1 + rng.below(16)).min(b.len());
                b.drain(at..end);
            }
            3 => {
                let piece = PIECES[rng.below(PIECES.len())].as_bytes();
                b.splice(at..at, piece.iter().copied());
            }
            4 => b.truncate(at),
            5 if at < b.len() => {
                let end = (at + 1 + rng.below(40)).min(b.len());
                let copy = b[at..end].to_vec();
                for _ in 0..1 + rng.below(50) {
                    b.splice(at..at, copy.iter().copied());
                }
            }
            6 => {
                // Swap, double or drop a line.
                let text = String::from_utf8_lossy(&b).into_owned();
                let mut lines: Vec<&str> = text.split('\n').collect();
                let (i, j) = (rng.below(lines.len()), rng.below(lines.len()));
                match rng.below(3) {
                    0 => lines.swap(i, j),
                    1 => lines.insert(i, lines[j]),
                    _ => {
                        lines.remove(i);
                    }
                }
                b = lines.join("\n").into_bytes();
            }
            7 => {
                let depth = 1 + rng.below(60);
                let mut s = "(".repeat(depth).into_bytes();
                s.extend_from_slice(&b);
                s.extend(std::iter::repeat_n(b')', rng.below(depth + 1)));
                b = s;
            }
            _ => {}
        }
    }
    b
}

#[derive(Default)]
struct Tally {
    cases: usize,
    accepted: usize,
    refused: usize,
    panics: usize,
    unnamed: usize,
}

impl Tally {
    fn print(&self, what: &str) {
        println!(
            "{what:<9} {:>7} cases: {:>7} accepted, {:>7} refused, {} panics, {} refusals without their file",
            self.cases, self.accepted, self.refused, self.panics, self.unnamed
        );
    }
}

fn run<T>(
    tally: &mut Tally,
    f: impl FnOnce() -> whorl::Result<T>,
    names: impl Fn(&whorl::Error) -> bool,
) {
    tally.cases += 1;
    match catch_unwind(AssertUnwindSafe(f)) {
        Ok(Ok(_)) => tally.accepted += 1,
        Ok(Err(e)) => {
            tally.refused += 1;
            if !names(&e) {
                tally.unnamed += 1;
                if tally.unnamed <= 3 {
                    eprintln!("refusal without its file: {e}");
                }
            }
        }
        Err(_) => tally.panics += 1,
    }
}

fn ms_file(peaks: &[(u32, f64)]) -> String {
    let mut s = String::from("mz,abundance\n");
    for (mz, a) in peaks {
        s.push_str(&format!("{mz},{a}\n"));
    }
    s
}

fn fuzz_manifest(rng: &mut Rng, cases: usize, dir: &Path) -> Tally {
    std::fs::write(
        dir.join("a.csv"),
        ms_file(&[(43, 100.0), (58, 30.0), (15, 10.0)]),
    )
    .unwrap();
    std::fs::write(
        dir.join("b.csv"),
        ms_file(&[(31, 100.0), (45, 40.0), (46, 20.0)]),
    )
    .unwrap();
    let seed = "file,technique,name,formula,cas,synonyms,tags,solvent,y_unit,submitted_by,notes,lot\n\
                a.csv,ms-ei,acetone,C3H6O,67-64-1,propanone;dimethyl ketone,solvent,,,a.analyst,\"a note, quoted\",L1\n\
                b.csv,ms-ei,ethanol,C2H6O,64-17-5,,solvent;alcohol,,,b.analyst,,L2\n";
    let path = dir.join("manifest.csv");
    let mut tally = Tally::default();
    for _ in 0..cases {
        std::fs::write(&path, mutate(rng, seed.as_bytes())).unwrap();
        run(
            &mut tally,
            || read_manifest(&path, "fuzz"),
            |e| e.to_string().contains("manifest.csv"),
        );
    }
    tally
}

/// Rewrites `SHA256SUMS` for the files it lists as they are now.
fn reseal(dir: &Path) {
    let Ok(sums) = std::fs::read_to_string(dir.join("SHA256SUMS")) else {
        return;
    };
    let mut out = String::new();
    for line in sums.lines() {
        let Some((_, file)) = line.split_once("  ") else {
            continue;
        };
        if let Ok(bytes) = std::fs::read(dir.join(file)) {
            out.push_str(&format!(
                "{}  {file}\n",
                whorl::spectrum::sha256_hex(&bytes)
            ));
        }
    }
    std::fs::write(dir.join("SHA256SUMS"), out).unwrap();
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to.join("spectra")).unwrap();
    for f in ["SHA256SUMS", "manifest.csv", "bundle.json"] {
        std::fs::copy(from.join(f), to.join(f)).unwrap();
    }
    for e in std::fs::read_dir(from.join("spectra")).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), to.join("spectra").join(e.file_name())).unwrap();
    }
}

fn fuzz_bundle(rng: &mut Rng, cases: usize, dir: &Path) -> Tally {
    // A small source library: three EI spectra, one withdrawn.
    let source = dir.join("source");
    let mut lib = Library::init(&source, "fuzz").unwrap();
    let spectra: [(&str, &[(u32, f64)]); 3] = [
        ("acetone", &[(43, 100.0), (58, 30.0), (15, 10.0)]),
        ("ethanol", &[(31, 100.0), (45, 40.0), (46, 20.0)]),
        ("toluene", &[(91, 100.0), (92, 70.0), (65, 12.0)]),
    ];
    for (name, peaks) in spectra {
        let file = dir.join(format!("{name}.csv"));
        std::fs::write(&file, ms_file(peaks)).unwrap();
        let staged = stage(
            lib.recipes(),
            Submission {
                path: file,
                technique: Technique::MsEi,
                metadata: Metadata {
                    name: name.into(),
                    ..Default::default()
                },
                x_unit: None,
                y_unit: None,
                submitted_by: "a.analyst".into(),
            },
        )
        .unwrap();
        lib.store(&[staged], "a.analyst", true).unwrap();
    }
    lib.withdraw(3, "q.manager", "recalled").unwrap();
    let bundle = dir.join("bundle");
    lib.export(&bundle, None, None, "fuzz", None, &|_, _| {})
        .unwrap();
    let files: Vec<PathBuf> = ["manifest.csv", "bundle.json", "SHA256SUMS"]
        .iter()
        .map(PathBuf::from)
        .chain(
            std::fs::read_dir(bundle.join("spectra"))
                .unwrap()
                .map(|e| PathBuf::from("spectra").join(e.unwrap().file_name())),
        )
        .collect();
    let mut tally = Tally::default();
    let case = dir.join("case");
    for _ in 0..cases {
        let _ = std::fs::remove_dir_all(&case);
        copy_dir(&bundle, &case);
        let victim = case.join(&files[rng.below(files.len())]);
        let bytes = std::fs::read(&victim).unwrap();
        std::fs::write(&victim, mutate(rng, &bytes)).unwrap();
        if rng.below(2) == 0 {
            reseal(&case);
        }
        let mut target = Library::in_memory("fuzz").unwrap();
        run(
            &mut tally,
            || target.import_bundle(&case, "dave", Acceptance::Untrusted),
            |e| e.to_string().contains("case"),
        );
    }
    tally
}

fn fuzz_query(rng: &mut Rng, cases: usize) -> Tally {
    let index = TextIndex::in_ram().unwrap();
    let seeds = [
        "name:acetone AND (tag:solvent OR NOT cas:\"67-64-1\")",
        "ketone",
        "\"dimethyl ketone\" OR formula:C3H6O",
        "lot:L1 AND technique:ir",
        "name:* AND NOT status:withdrawn",
        "(((a OR b) AND c) OR \"d e\")",
    ];
    let mut tally = Tally::default();
    for _ in 0..cases {
        let seed = seeds[rng.below(seeds.len())];
        let q = String::from_utf8_lossy(&mutate(rng, seed.as_bytes())).into_owned();
        run(&mut tally, || index.matching_ids(&q), |_| true);
    }
    tally
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let value = |flag: &str| {
        args.iter()
            .position(|a| a == flag)
            .and_then(|i| args.get(i + 1))
            .cloned()
    };
    let cases: usize = value("--cases").map_or(100_000, |v| v.parse().unwrap());
    let seed: u64 = value("--seed").map_or(20_261_203, |v| v.parse().unwrap());
    let only = value("--only");
    // Panics are counted, not printed case by case.
    std::panic::set_hook(Box::new(|_| {}));
    let tmp = tempfile::tempdir().unwrap();
    let mut failed = false;
    let want = |name: &str| only.as_deref().is_none_or(|o| o == name);
    if want("manifest") {
        let t = fuzz_manifest(&mut Rng(seed | 1), cases, tmp.path());
        t.print("manifest");
        failed |= t.panics > 0 || t.unnamed > 0;
    }
    if want("bundle") {
        let t = fuzz_bundle(&mut Rng(seed.wrapping_mul(3) | 1), cases, tmp.path());
        t.print("bundle");
        failed |= t.panics > 0 || t.unnamed > 0;
    }
    if want("query") {
        let t = fuzz_query(&mut Rng(seed.wrapping_mul(5) | 1), cases);
        t.print("query");
        failed |= t.panics > 0;
    }
    if failed {
        eprintln!("FAIL: a parser panicked or refused without naming its file");
        std::process::exit(1);
    }
}
