//! Helpers for running the real `whorl` binary against temporary libraries.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// A temporary folder holding a library and any input files a test writes.
pub struct Lab {
    pub dir: tempfile::TempDir,
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

    pub fn library(&self) -> PathBuf {
        self.dir.path().join("lib")
    }

    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Writes a file relative to the lab folder, creating folders as needed.
    pub fn write(&self, name: &str, contents: impl AsRef<[u8]>) -> PathBuf {
        let p = self.path(name);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).unwrap();
        }
        std::fs::write(&p, contents).unwrap();
        p
    }

    /// Runs whorl with `--library <lab>/lib` and the given arguments.
    pub fn run(&self, args: &[&str]) -> Output {
        Command::new(env!("CARGO_BIN_EXE_whorl"))
            .arg("--library")
            .arg(self.library())
            .args(args)
            .current_dir(self.dir.path())
            .env("WHORL_USER", "t.tester")
            .env_remove("WHORL_LIBRARY")
            .output()
            .expect("run whorl")
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
}

/// The repository's seed library.
pub fn seed() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("seed-library")
}

/// A synthetic IR spectrum in absorbance, 4000..400 cm-1 at 2 cm-1, with Gaussian bands
/// `(centre, height, width)` on a small flat baseline.
pub fn ir_csv(bands: &[(f64, f64, f64)]) -> String {
    let mut s = String::from("wavenumber,absorbance\n");
    for i in 0..=1800 {
        let x = 4000.0 - 2.0 * i as f64;
        let y: f64 = 0.01
            + bands
                .iter()
                .map(|&(c, h, w)| h * (-((x - c) / w).powi(2)).exp())
                .sum::<f64>();
        s.push_str(&format!("{x},{y:.6}\n"));
    }
    s
}

impl Lab {
    /// Runs whorl like [`Lab::run`] with extra environment variables.
    pub fn run_env(&self, args: &[&str], env: &[(&str, &str)]) -> Output {
        let mut cmd = Command::new(env!("CARGO_BIN_EXE_whorl"));
        cmd.arg("--library")
            .arg(self.library())
            .args(args)
            .current_dir(self.dir.path())
            .env("WHORL_USER", "t.tester")
            .env_remove("WHORL_LIBRARY")
            .env_remove("NO_COLOR");
        for (k, v) in env {
            cmd.env(k, v);
        }
        cmd.output().expect("run whorl")
    }

    /// A library holding the seed library's spectra (all four techniques) of the named
    /// compounds, imported through a manifest of just those rows.
    pub fn seeded(compounds: &[&str]) -> Lab {
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
        lab
    }
}

/// An example unknown of the seed library.
pub fn unknown(name: &str) -> String {
    seed().join("unknowns").join(name).display().to_string()
}
