//! Faults of the machine rather than of the input: a full disk, leftovers of killed builds.
//!
//! A full disk is made for real: a 'tmpfs' filesystem just large enough for the library and
//! too small for its vector cache, mounted in a private mount namespace of an unprivileged
//! user namespace (`unshare --mount --map-root-user`, util-linux), so the test needs no root.

use std::process::Command;

use crate::util::{Lab, unknown};

/// Kilobytes a folder takes on disk (`du -sk`).
fn kilobytes(path: &std::path::Path) -> u64 {
    let out = Command::new("du").arg("-sk").arg(path).output().unwrap();
    String::from_utf8_lossy(&out.stdout)
        .split_whitespace()
        .next()
        .unwrap()
        .parse()
        .unwrap()
}

#[test]
fn a_search_on_a_full_disk_neither_crashes_nor_leaves_temporary_files() {
    let lab = Lab::seeded();
    let query = unknown("u01.ir.csv");
    let expected = lab.json(&["search", &query, "--technique", "ir"]);
    std::fs::remove_dir_all(lab.library().join("cache")).unwrap();
    let size = kilobytes(&lab.library());
    let mnt = lab.path("mnt");
    std::fs::create_dir_all(&mnt).unwrap();
    let out_file = lab.path("out.json");
    // The library copied onto a filesystem with 160 KB to spare: enough for SQLite's
    // shared-memory file, not for the IR cache (far larger, see the assertion below).
    let script = format!(
        "mount -t tmpfs -o size={}k tmpfs '{m}' && cp -r '{lib}' '{m}/lib' && \
         '{whorl}' --library '{m}/lib' search '{q}' --technique ir --json > '{out}'; \
         echo \"exit $?\"; ls -A '{m}/lib/cache' 2>/dev/null; df -k '{m}' | tail -1",
        size + 160,
        m = mnt.display(),
        lib = lab.library().display(),
        whorl = env!("CARGO_BIN_EXE_whorl"),
        q = query,
        out = out_file.display(),
    );
    let out = Command::new("unshare")
        .args(["--mount", "--map-root-user", "sh", "-c", &script])
        .env("WHORL_USER", "t.tester")
        .output()
        .expect("unshare (util-linux) runs");
    let said = String::from_utf8_lossy(&out.stdout).to_string();
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    assert!(said.contains("exit 0"), "{said}\n{err}");
    // The search fell back to a cache in memory, with the hits of a search on a roomy disk.
    let got: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&out_file).unwrap()).unwrap();
    assert_eq!(got["hits"], expected["hits"]);
    // Nothing half-built is left behind, and the disk was really too small for the cache.
    assert!(!said.contains(".building-"), "{said}");
    let ir_cache = 1801 * 5 * crate::util::seed_rows(Some("ir")) as u64 / 1024;
    assert!(
        ir_cache > 160,
        "the IR cache ({ir_cache} KB) fits the space left"
    );
}

#[test]
fn leftovers_of_killed_cache_builds_are_removed_at_the_next_start() {
    let lab = Lab::seeded();
    let cache = lab.library().join("cache");
    std::fs::create_dir_all(&cache).unwrap();
    // A build by a process that is gone (pid 0 is never a user process) and one by a
    // process still running (this test).
    let dead = cache.join(".building-0-abc123");
    let alive = cache.join(format!(".building-{}-def456", std::process::id()));
    std::fs::write(&dead, vec![0u8; 4096]).unwrap();
    std::fs::write(&alive, vec![0u8; 4096]).unwrap();
    lab.ok(&["stats"]);
    assert!(!dead.exists(), "the dead build's file is removed");
    assert!(alive.exists(), "a running build's file is left alone");
}
