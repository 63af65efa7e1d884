//! Helpers for running the real `whorl` binary against temporary libraries.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::Value;

/// A temporary folder holding a library and any input files a test writes.
pub struct Lab {
    pub dir: tempfile::TempDir,
}

/// What can be seen of a library from outside: `stats --json` (state hash, counts, events)
/// and `list --json`. Two equal states mean nothing was written.
#[derive(Debug, PartialEq)]
pub struct State {
    pub stats: Value,
    pub list: Value,
}

impl Lab {
    /// A fresh folder with an initialised library in `lib/`.
    pub fn new() -> Lab {
        let lab = Lab::empty();
        lab.ok(&["init"]);
        lab
    }

    /// A fresh folder without a library.
    pub fn empty() -> Lab {
        Lab {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }

    /// A library holding the seed spectra, all signed off by a second analyst (search covers
    /// verified spectra by default).
    pub fn seeded() -> Lab {
        let lab = Lab::new();
        let manifest = seed().join("manifest.csv");
        lab.ok(&["import", manifest.to_str().unwrap()]);
        lab.approve_all();
        lab
    }

    /// Signs off every spectrum in the library as a second analyst.
    pub fn approve_all(&self) {
        let list = self.json(&["list"]);
        let ids: Vec<String> = list
            .as_array()
            .unwrap()
            .iter()
            .map(|r| r["id"].to_string())
            .collect();
        let mut args = vec!["review", "--verify", "--by", "r.second"];
        args.extend(ids.iter().map(String::as_str));
        self.ok(&args);
    }

    pub fn library(&self) -> PathBuf {
        self.dir.path().join("lib")
    }

    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Writes a file relative to the lab folder, creating folders as needed. Commands run
    /// in the lab folder, so tests can pass `name` itself on the command line.
    pub fn write(&self, name: &str, contents: impl AsRef<[u8]>) -> PathBuf {
        let p = self.path(name);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).unwrap();
        }
        std::fs::write(&p, contents).unwrap();
        p
    }

    /// Runs whorl with `--library <lab>/lib` (unless the arguments name another library) and
    /// the given arguments.
    pub fn run(&self, args: &[&str]) -> Output {
        self.command(args).output().expect("run whorl")
    }

    /// The command `run` runs, for tests that set more environment or run it in the background.
    pub fn command(&self, args: &[&str]) -> Command {
        let mut cmd = Command::new(env!("CARGO_BIN_EXE_whorl"));
        if !args.contains(&"--library") {
            cmd.arg("--library").arg(self.library());
        }
        cmd.args(args)
            .current_dir(self.dir.path())
            .env("WHORL_USER", "t.tester")
            .env_remove("WHORL_LIBRARY");
        cmd
    }

    /// Runs whorl and asserts success; returns stdout.
    pub fn ok(&self, args: &[&str]) -> String {
        let out = self.run(args);
        assert!(
            out.status.success(),
            "whorl {args:?} failed with {:?}\nstdout:\n{}\nstderr:\n{}",
            out.status.code(),
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).unwrap()
    }

    /// Runs whorl and asserts it fails with `code`; returns stderr and stdout together.
    pub fn fails(&self, args: &[&str], code: i32) -> String {
        let out = self.run(args);
        let text = format!(
            "{}{}",
            String::from_utf8_lossy(&out.stderr),
            String::from_utf8_lossy(&out.stdout)
        );
        assert_eq!(
            out.status.code(),
            Some(code),
            "whorl {args:?}: expected exit {code}\n{text}"
        );
        text
    }

    /// Runs whorl with `--json` appended and parses stdout.
    pub fn json(&self, args: &[&str]) -> serde_json::Value {
        let mut all = args.to_vec();
        all.push("--json");
        serde_json::from_str(&self.ok(&all)).expect("valid JSON")
    }

    /// The library as seen by `stats --json` and `list --json`.
    pub fn state(&self) -> State {
        State {
            stats: self.json(&["stats"]),
            list: self.json(&["list"]),
        }
    }

    /// The library state hash from `stats --json`.
    pub fn state_hash(&self) -> String {
        self.json(&["stats"])["state_hash"]
            .as_str()
            .expect("state hash is a string")
            .to_string()
    }

    /// Runs whorl expecting it to fail with `code` and to leave the library exactly as it
    /// was; returns stderr and stdout together.
    pub fn refuses(&self, args: &[&str], code: i32) -> String {
        let before = self.state();
        let text = self.fails(args, code);
        assert_eq!(
            self.state(),
            before,
            "whorl {args:?} changed the library although it failed\n{text}"
        );
        text
    }

    /// Writes `contents` to `file` and adds it with `whorl add`; returns the printed id.
    pub fn add(
        &self,
        file: &str,
        contents: &str,
        technique: &str,
        name: &str,
        more: &[&str],
    ) -> i64 {
        self.write(file, contents);
        let mut args = vec!["add", file, "--technique", technique, "--name", name];
        args.extend_from_slice(more);
        let out = self.ok(&args);
        out.trim()
            .parse()
            .unwrap_or_else(|_| panic!("add printed {out:?}, not an id"))
    }
}

/// The text of the `hint: ...` line in a command's output; fails the test when there is none.
pub fn hint(text: &str) -> &str {
    text.lines()
        .filter_map(|l| l.trim_start().strip_prefix("hint: "))
        .find(|h| !h.trim().is_empty())
        .unwrap_or_else(|| panic!("no 'hint: ...' line in:\n{text}"))
}

/// The repository's seed library.
pub fn seed() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("seed-library")
}

/// The data rows of a CSV file, each as column name -> value.
pub fn csv_rows(path: &Path) -> Vec<BTreeMap<String, String>> {
    let mut reader = csv::Reader::from_path(path).expect("readable CSV");
    let headers = reader.headers().unwrap().clone();
    reader
        .records()
        .map(|r| {
            let r = r.expect("valid CSV row");
            headers
                .iter()
                .zip(r.iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}

/// SHA-256 of a file's bytes, lower-case hex.
pub fn sha256_of(path: &Path) -> String {
    use sha2::Digest;
    hex::encode(sha2::Sha256::digest(std::fs::read(path).unwrap()))
}

/// The keys of a JSON object, sorted.
pub fn keys(v: &Value) -> Vec<&str> {
    let mut k: Vec<&str> = v
        .as_object()
        .unwrap_or_else(|| panic!("not an object: {v}"))
        .keys()
        .map(String::as_str)
        .collect();
    k.sort_unstable();
    k
}

/// A two-column file: a header line, then one `x,y` line per point.
pub fn xy_csv(header: &str, points: &[(f64, f64)]) -> String {
    let mut s = format!("{header}\n");
    for (x, y) in points {
        s.push_str(&format!("{x},{y}\n"));
    }
    s
}

fn gaussian_sum(x: f64, bands: &[(f64, f64, f64)]) -> f64 {
    bands
        .iter()
        .map(|&(c, h, w)| h * (-((x - c) / w).powi(2)).exp())
        .sum()
}

/// A synthetic IR spectrum in absorbance, 4000..400 cm-1 at 2 cm-1, with Gaussian bands
/// `(centre, height, width)` on a small flat baseline.
pub fn ir_csv(bands: &[(f64, f64, f64)]) -> String {
    let mut s = String::from("wavenumber,absorbance\n");
    for i in 0..=1800 {
        let x = 4000.0 - 2.0 * i as f64;
        let y = 0.01 + gaussian_sum(x, bands);
        s.push_str(&format!("{x},{y:.6}\n"));
    }
    s
}

/// The same kind of IR spectrum with x as wavelength in micrometres, 2.5..25 um at 0.01 um;
/// band centres and widths are given in micrometres.
pub fn ir_micrometre_csv(bands: &[(f64, f64, f64)]) -> String {
    let mut s = String::from("wavelength_um,absorbance\n");
    for i in 0..=2250 {
        let x = 2.5 + 0.01 * i as f64;
        let y = 0.01 + gaussian_sum(x, bands);
        s.push_str(&format!("{x:.2},{y:.6}\n"));
    }
    s
}

/// A synthetic Raman spectrum in counts, 100..3500 cm-1 at 2 cm-1, with Gaussian bands.
pub fn raman_csv(bands: &[(f64, f64, f64)]) -> String {
    let mut s = String::from("raman_shift,counts\n");
    for i in 0..=1700 {
        let x = 100.0 + 2.0 * i as f64;
        let y = 100.0 + gaussian_sum(x, bands);
        s.push_str(&format!("{x},{y:.1}\n"));
    }
    s
}

/// A synthetic 1H NMR spectrum, 12..-0.5 ppm at 0.005 ppm, with Gaussian lines
/// `(shift, height, width)`.
pub fn nmr_csv(lines: &[(f64, f64, f64)]) -> String {
    let mut s = String::from("ppm,intensity\n");
    for i in 0..=2500 {
        let x = 12.0 - 0.005 * i as f64;
        let y = 1.0 + gaussian_sum(x, lines);
        s.push_str(&format!("{x:.3},{y:.3}\n"));
    }
    s
}

/// A centroided EI mass spectrum: one `m/z,abundance` line per ion.
pub fn ms_csv(ions: &[(u32, f64)]) -> String {
    let mut s = String::from("mz,abundance\n");
    for (mz, a) in ions {
        s.push_str(&format!("{mz},{a}\n"));
    }
    s
}

impl Lab {
    /// Runs whorl like [`Lab::run`] with extra environment variables.
    pub fn run_env(&self, args: &[&str], env: &[(&str, &str)]) -> Output {
        let mut cmd = self.command(args);
        cmd.env_remove("NO_COLOR");
        for (k, v) in env {
            cmd.env(k, v);
        }
        cmd.output().expect("run whorl")
    }

    /// A library holding the seed library's spectra (all four techniques) of the named
    /// compounds, imported through a manifest of just those rows and signed off by a second
    /// analyst.
    pub fn seeded_with(compounds: &[&str]) -> Lab {
        let lab = Lab::new();
        let mut reader = csv::Reader::from_path(seed().join("manifest.csv")).unwrap();
        std::fs::create_dir_all(lab.path("seed")).unwrap();
        let mut writer = csv::Writer::from_path(lab.path("seed/manifest.csv")).unwrap();
        writer.write_record(reader.headers().unwrap()).unwrap();
        for record in reader.records() {
            let record = record.unwrap();
            if compounds.contains(&&record[2]) {
                let target = lab.path(&format!("seed/{}", &record[0]));
                std::fs::create_dir_all(target.parent().unwrap()).unwrap();
                std::fs::copy(seed().join(&record[0]), target).unwrap();
                writer.write_record(&record).unwrap();
            }
        }
        writer.flush().unwrap();
        drop(writer);
        lab.ok(&["import", "seed/manifest.csv"]);
        lab.approve_all();
        lab
    }
}

/// An example unknown of the seed library.
pub fn unknown(name: &str) -> String {
    seed().join("unknowns").join(name).display().to_string()
}

/// Rows of the seed manifest, of one technique or of all.
pub fn seed_rows(technique: Option<&str>) -> usize {
    let mut reader = csv::Reader::from_path(seed().join("manifest.csv")).unwrap();
    reader
        .records()
        .map(|r| r.unwrap())
        .filter(|r| technique.is_none_or(|t| &r[1] == t))
        .count()
}

/// Rows of the seed manifest for one compound (one per technique it was measured by).
pub fn seed_rows_of(name: &str) -> usize {
    let mut reader = csv::Reader::from_path(seed().join("manifest.csv")).unwrap();
    reader
        .records()
        .map(|r| r.unwrap())
        .filter(|r| &r[2] == name)
        .count()
}
