//! Several processes on one library: readers never wait, writers wait for each other, and a
//! writer kept waiting too long gives up with a clear message, leaving the library whole.

use std::process::Stdio;

use rusqlite::Connection;

use crate::util::{Lab, ir_csv, seed};

#[test]
fn a_writer_kept_busy_gives_up_clearly_while_readers_go_on() {
    let lab = Lab::seeded();
    let file = lab.write("new.csv", ir_csv(&[(1700.0, 0.8, 9.0)]));
    let before = lab.state_hash();

    // Another process holds the write lock.
    let holder = Connection::open(lab.library().join("library.sqlite")).unwrap();
    holder.execute_batch("BEGIN IMMEDIATE;").unwrap();

    let out = lab
        .command(&["add", file.to_str().unwrap(), "-t", "ir", "--name", "late"])
        .env("WHORL_BUSY_TIMEOUT_MS", "300")
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(6), "{err}");
    assert!(err.contains("another whorl process is writing"), "{err}");

    // Searching needs no write lock (WAL readers), so it runs while the writer holds on.
    let u = seed().join("unknowns").join("u01.ir.csv");
    let report = lab.json(&["search", u.to_str().unwrap(), "-t", "ir"]);
    assert_eq!(report["hits"][0]["name"], "ethyl acetate");

    holder.execute_batch("ROLLBACK;").unwrap();
    drop(holder);
    assert_eq!(
        lab.state_hash(),
        before,
        "the refused add left nothing behind"
    );
    lab.ok(&["add", file.to_str().unwrap(), "-t", "ir", "--name", "late"]);
    lab.ok(&["check"]);
}

#[test]
fn two_importers_at_once_both_finish_and_the_library_checks_clean() {
    let lab = Lab::new();
    // Copy the seed spectra beside two half manifests.
    let rows: Vec<String> = std::fs::read_to_string(seed().join("manifest.csv"))
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect();
    let (header, body) = rows.split_first().unwrap();
    for entry in std::fs::read_dir(seed().join("spectra")).unwrap() {
        let path = entry.unwrap().path();
        lab.write(
            &format!("spectra/{}", path.file_name().unwrap().to_string_lossy()),
            std::fs::read(&path).unwrap(),
        );
    }
    let half = body.len() / 2;
    lab.write("a.csv", format!("{header}\n{}\n", body[..half].join("\n")));
    lab.write("b.csv", format!("{header}\n{}\n", body[half..].join("\n")));

    let spawn = |m: &str| {
        lab.command(&["import", m])
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap()
    };
    let (a, b) = (spawn("a.csv"), spawn("b.csv"));
    for child in [a, b] {
        let out = child.wait_with_output().unwrap();
        assert!(
            out.status.success(),
            "{:?}\n{}\n{}",
            out.status,
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        );
    }
    assert_eq!(lab.json(&["list"]).as_array().unwrap().len(), body.len());
    let report = lab.json(&["check"]);
    assert_eq!(report["findings"].as_array().unwrap().len(), 0, "{report}");
    // The text index covers both imports (rebuilt if one importer could not update it).
    assert_eq!(
        lab.json(&["find", "technique:ir", "--top", "1000"])
            .as_array()
            .unwrap()
            .len(),
        crate::util::seed_rows(Some("ir"))
    );
}
