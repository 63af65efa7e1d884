//! Export and import of portable bundles.

use std::path::Path;

use crate::util::{Lab, seed, seed_rows, seed_rows_of};

/// A library with the seed spectra, some reviewed, one revised and one withdrawn.
fn source() -> Lab {
    let lab = Lab::new();
    lab.ok(&["import", seed().join("manifest.csv").to_str().unwrap()]);
    for id in ["1", "2", "3", "4", "5"] {
        lab.ok(&[
            "review",
            id,
            "--approve",
            "--by",
            "r.reviewer",
            "--note",
            "bundle test",
        ]);
    }
    lab.ok(&[
        "revise",
        "6",
        "--note",
        "second look",
        "--by",
        "e.editor",
        "--reason",
        "notes",
    ]);
    lab.ok(&["review", "7", "--reject", "--by", "r.reviewer"]);
    lab.ok(&["withdraw", "8", "--reason", "recalled", "--by", "q.manager"]);
    lab
}

fn state_hash(lab: &Lab, library: &Path) -> String {
    let out = lab.ok(&["--library", library.to_str().unwrap(), "stats", "--json"]);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    v["state_hash"].as_str().unwrap().to_string()
}

#[test]
fn export_then_import_into_an_empty_library_keeps_state_hash_and_history() {
    let lab = source();
    let bundle = lab.path("bundle");
    let info = lab.json(&["export", bundle.to_str().unwrap()]);
    let all = seed_rows(None);
    assert_eq!(info["spectra"], all);
    for f in [
        "manifest.csv",
        "SHA256SUMS",
        "bundle.json",
        "spectra/1.ir.csv",
    ] {
        assert!(bundle.join(f).is_file(), "{f}");
    }
    let original = lab.json(&["stats"])["state_hash"]
        .as_str()
        .unwrap()
        .to_string();
    assert_eq!(
        info["state_hash"], original,
        "a full export carries the library's state hash"
    );

    let target = lab.path("target-lib");
    lab.ok(&["--library", target.to_str().unwrap(), "init"]);
    let out = lab.ok(&[
        "--library",
        target.to_str().unwrap(),
        "import",
        bundle.to_str().unwrap(),
        "--untrusted",
    ]);
    assert!(
        out.contains(&format!("imported {all}, already present 0")),
        "{out}"
    );
    // Approvals given in the source library do not count here: the copy differs in status.
    let copied = state_hash(&lab, &target);
    assert_ne!(copied, original);

    // History survives: sign-offs, revisions, the withdrawal reason, the original file hash.
    let t = |args: &[&str]| -> serde_json::Value {
        let mut all = vec!["--library", target.to_str().unwrap()];
        all.extend_from_slice(args);
        all.push("--json");
        serde_json::from_str(&lab.ok(&all)).unwrap()
    };
    let orig = |id: &str| lab.json(&["show", id]);
    let list = t(&["list"]);
    let find = |name: &str, technique: &str| {
        list.as_array()
            .unwrap()
            .iter()
            .find(|r| r["name"] == name && r["technique"] == technique)
            .unwrap()["id"]
            .to_string()
    };
    for id in ["1", "6", "7", "8"] {
        let o = orig(id);
        let name = o["spectrum"]["metadata"]["name"].as_str().unwrap();
        let technique = o["spectrum"]["technique"].as_str().unwrap();
        let copy = t(&["show", &find(name, technique)]);
        // References from another library arrive pending local acceptance; a withdrawal stays.
        let arrives = if o["spectrum"]["status"] == "withdrawn" {
            "withdrawn"
        } else {
            "pending"
        };
        assert_eq!(copy["spectrum"]["status"], arrives, "spectrum {id}");
        assert_eq!(
            copy["spectrum"]["revision"], o["spectrum"]["revision"],
            "spectrum {id}"
        );
        assert_eq!(
            copy["spectrum"]["file_sha256"], o["spectrum"]["file_sha256"],
            "spectrum {id}"
        );
        assert_eq!(
            copy["spectrum"]["raw_sha256"], o["spectrum"]["raw_sha256"],
            "spectrum {id}"
        );
        assert_eq!(
            copy["withdrawn_reason"], o["withdrawn_reason"],
            "spectrum {id}"
        );
        let reviews = |v: &serde_json::Value| -> Vec<(String, String, String)> {
            v["reviews"]
                .as_array()
                .unwrap()
                .iter()
                .map(|r| {
                    (
                        r["reviewer"].to_string(),
                        r["decision"].to_string(),
                        r["at"].to_string(),
                    )
                })
                .collect()
        };
        assert_eq!(reviews(&copy), reviews(&o), "spectrum {id}");
        for r in copy["reviews"].as_array().unwrap() {
            assert!(r["imported_from"].is_string(), "spectrum {id}: {r}");
        }
    }
    let old = t(&["show", &find("acetone", "ir"), "--revision", "1"]);
    assert_eq!(old["revision"]["number"], 1);
    // The copy checks clean, and importing the same bundle again adds nothing.
    t(&["check"]);
    let again = lab.ok(&[
        "--library",
        target.to_str().unwrap(),
        "import",
        bundle.to_str().unwrap(),
        "--untrusted",
    ]);
    assert!(
        again.contains(&format!("imported 0, already present {all}")),
        "{again}"
    );
    assert_eq!(state_hash(&lab, &target), copied);
}

#[test]
fn a_filtered_export_holds_only_what_matches() {
    let lab = source();
    let bundle = lab.path("ketones");
    let info = lab.json(&[
        "export",
        bundle.to_str().unwrap(),
        "--where",
        "class:ketone",
        "--status",
        "pending",
    ]);
    // The compounds whose class contains "ketone" in the seed tables (acetone, 2-butanone,
    // cyclohexanone, 4-methyl-2-pentanone, and acetophenone, an "aromatic ketone"), every
    // technique of each, all pending (the reviewed spectra are methanol's and ethanol's).
    let expected: usize = compounds_where(|c| c["class"].as_str().unwrap().contains("ketone"))
        .iter()
        .map(|name| seed_rows_of(name))
        .sum();
    assert_eq!(info["spectra"], expected);
    let manifest = std::fs::read_to_string(bundle.join("manifest.csv")).unwrap();
    assert_eq!(manifest.lines().count(), expected + 1);
}

fn compounds_where(pick: impl Fn(&serde_json::Value) -> bool) -> Vec<String> {
    let text = std::fs::read_to_string(seed().join("compounds.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    v["compounds"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| pick(c))
        .map(|c| c["name"].as_str().unwrap().to_string())
        .collect()
}

fn bundle_of_three() -> (Lab, std::path::PathBuf) {
    let lab = source();
    let bundle = lab.path("small");
    lab.ok(&[
        "export",
        bundle.to_str().unwrap(),
        "--where",
        "name:toluene",
    ]);
    (lab, bundle)
}

fn import_fails(lab: &Lab, bundle: &Path, words: &str) {
    let target = lab.path("fresh");
    if !target.exists() {
        lab.ok(&["--library", target.to_str().unwrap(), "init"]);
    }
    let before = state_hash(lab, &target);
    let out = lab.run(&[
        "--library",
        target.to_str().unwrap(),
        "import",
        bundle.to_str().unwrap(),
        "--untrusted",
    ]);
    let text = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(3), "{text}");
    assert!(text.contains(words) && text.contains("hint:"), "{text}");
    assert_eq!(state_hash(lab, &target), before, "nothing was imported");
}

#[test]
fn a_bundle_with_a_missing_file_is_refused() {
    let (lab, bundle) = bundle_of_three();
    let victim = std::fs::read_dir(bundle.join("spectra"))
        .unwrap()
        .next()
        .unwrap()
        .unwrap()
        .path();
    std::fs::remove_file(victim).unwrap();
    import_fails(&lab, &bundle, "is listed but cannot be read");
}

#[test]
fn a_bundle_with_a_wrong_checksum_is_refused() {
    let (lab, bundle) = bundle_of_three();
    let victim = std::fs::read_dir(bundle.join("spectra"))
        .unwrap()
        .next()
        .unwrap()
        .unwrap()
        .path();
    let mut text = std::fs::read_to_string(&victim).unwrap();
    text.push_str("9999,1\n");
    std::fs::write(&victim, text).unwrap();
    import_fails(&lab, &bundle, "does not match its checksum");
}

#[test]
fn a_bundle_path_that_escapes_its_folder_is_refused() {
    let (lab, bundle) = bundle_of_three();
    lab.write("outside.csv", "1,2\n");
    let sums = bundle.join("SHA256SUMS");
    let mut text = std::fs::read_to_string(&sums).unwrap();
    let digest = whorl::spectrum::sha256_hex(b"1,2\n");
    text.push_str(&format!("{digest}  ../outside.csv\n"));
    std::fs::write(&sums, text).unwrap();
    import_fails(&lab, &bundle, "outside the manifest's folder");
}

#[test]
fn a_file_without_a_checksum_is_refused() {
    let (lab, bundle) = bundle_of_three();
    std::fs::write(bundle.join("spectra/extra.csv"), "1,2\n").unwrap();
    import_fails(&lab, &bundle, "has no checksum");
}

#[test]
fn a_bundle_manifest_given_as_a_plain_manifest_is_refused() {
    let (lab, bundle) = bundle_of_three();
    let err = lab.fails(
        &["import", bundle.join("manifest.csv").to_str().unwrap()],
        3,
    );
    assert!(err.contains("import the bundle's folder"), "{err}");
}

#[test]
fn export_refuses_a_folder_that_is_not_empty() {
    let lab = Lab::new();
    lab.write("full/x.txt", "keep me");
    let err = lab.fails(&["export", lab.path("full").to_str().unwrap()], 3);
    assert!(err.contains("not empty"), "{err}");
    assert_eq!(
        std::fs::read_to_string(lab.path("full/x.txt")).unwrap(),
        "keep me"
    );
}

#[test]
fn formula_cells_are_neutralised_in_every_csv_and_bundles_round_trip() {
    // OWASP Cheat Sheet Series, CSV injection: cells starting with = + - @ (or a tab) are
    // read as formulas by spreadsheets; written with a leading quote they are text.
    let lab = Lab::new();
    let text = crate::util::ir_csv(&[(1715.0, 0.8, 10.0), (1220.0, 0.5, 12.0)]);
    let name = "=HYPERLINK(\"http://x\",\"y\")";
    let id = lab.add(
        "a.csv",
        &text,
        "ir",
        name,
        &[
            "--tag",
            "+tag",
            "--note",
            "@note",
            "--source=-src",
            "--by",
            "'quoted",
        ],
    );
    lab.approve_all();
    // search --csv: the name cell starts with a quote.
    let csv = lab.ok(&["search", "a.csv", "--technique", "ir", "--csv"]);
    let rows = csv_rows_of(&csv);
    assert_eq!(rows[0]["name"], format!("'{name}"));
    // The bundle manifest: every such cell starts with a quote.
    let bundle = lab.path("bundle");
    lab.ok(&["export", bundle.to_str().unwrap()]);
    let rows = crate::util::csv_rows(&bundle.join("manifest.csv"));
    let row = &rows[0];
    assert_eq!(row["name"], format!("'{name}"));
    assert_eq!(row["tags"], "'+tag");
    assert_eq!(row["notes"], "'@note");
    assert_eq!(row["source"], "'-src");
    assert_eq!(row["submitted_by"], "''quoted");
    // Imported elsewhere, the values are what they were.
    let other = Lab::new();
    other.ok(&["import", bundle.to_str().unwrap(), "--untrusted"]);
    let shown = other.json(&["show", &id.to_string()]);
    let m = &shown["spectrum"]["metadata"];
    assert_eq!(m["name"], name);
    assert_eq!(m["tags"], serde_json::json!(["+tag"]));
    assert_eq!(m["notes"], "@note");
    assert_eq!(m["source"], "-src");
    assert_eq!(shown["spectrum"]["submitted_by"], "'quoted");
    // Every metadata value as it was at home (the status differs: a foreign reference arrives
    // pending, so the two state hashes differ by design).
    assert_eq!(
        m,
        &lab.json(&["show", &id.to_string()])["spectrum"]["metadata"]
    );
}

fn csv_rows_of(text: &str) -> Vec<std::collections::BTreeMap<String, String>> {
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let headers = r.headers().unwrap().clone();
    r.records()
        .map(|rec| {
            let rec = rec.unwrap();
            headers
                .iter()
                .zip(rec.iter())
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}

#[test]
fn a_listed_file_outside_spectra_is_refused() {
    let (lab, bundle) = bundle_of_three();
    std::fs::write(bundle.join("notes.txt"), "1,2\n").unwrap();
    let sums = bundle.join("SHA256SUMS");
    let mut text = std::fs::read_to_string(&sums).unwrap();
    let digest = whorl::spectrum::sha256_hex(b"1,2\n");
    text.push_str(&format!("{digest}  notes.txt\n"));
    std::fs::write(&sums, text).unwrap();
    import_fails(&lab, &bundle, "is not a file a bundle holds");
}

#[test]
fn a_fifo_in_a_bundle_is_refused_without_waiting() {
    let (lab, bundle) = bundle_of_three();
    let victim = std::fs::read_dir(bundle.join("spectra"))
        .unwrap()
        .next()
        .unwrap()
        .unwrap()
        .path();
    std::fs::remove_file(&victim).unwrap();
    // mkfifo (POSIX.1-2017, XCU "mkfifo"): opening it for reading blocks until a writer comes.
    let made = std::process::Command::new("mkfifo")
        .arg(&victim)
        .status()
        .unwrap();
    assert!(made.success());
    import_fails(&lab, &bundle, "not a regular file");
}

/// What `whorl export` leaves when killed mid-way: its record in the library (named after
/// its process and the time, holding the staging folder's path) and the marked staging
/// folder beside the destination.
fn killed_export(lab: &Lab, pid: u32, destination: &Path) -> std::path::PathBuf {
    let token = format!("{pid}-1");
    let staging = destination.with_file_name(format!(
        ".{}.partial",
        destination.file_name().unwrap().to_string_lossy()
    ));
    std::fs::create_dir_all(staging.join("spectra")).unwrap();
    std::fs::write(staging.join("spectra/1.ir.csv"), "4000,0.1\n").unwrap();
    std::fs::write(staging.join(".whorl-export"), &token).unwrap();
    let records = lab.library().join("exports-under-way");
    std::fs::create_dir_all(&records).unwrap();
    std::fs::write(records.join(&token), staging.to_str().unwrap()).unwrap();
    staging
}

#[test]
fn a_killed_exports_partial_folder_is_removed_next_time_wherever_it_was() {
    let lab = Lab::new();
    let elsewhere = tempfile::tempdir().unwrap();
    // A process id no process has (above Linux's pid_max limit of 2^22).
    let dead = killed_export(&lab, 4_000_000_000, &elsewhere.path().join("monthly"));
    // One whose process still runs (this test's) is an export under way: left alone.
    let running = killed_export(&lab, std::process::id(), &lab.path("weekly"));
    // A record pointing at a folder without the export's mark is not followed.
    let unmarked = lab.path("keep.partial");
    std::fs::create_dir_all(&unmarked).unwrap();
    std::fs::write(
        lab.library().join("exports-under-way/4000000001-1"),
        unmarked.to_str().unwrap(),
    )
    .unwrap();
    // Any command opens the library, and the opening cleans up.
    lab.ok(&["stats"]);
    assert!(!dead.exists(), "the killed export's folder is removed");
    assert!(running.join(".whorl-export").exists());
    assert!(unmarked.exists());
    let left: Vec<String> = std::fs::read_dir(lab.library().join("exports-under-way"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(left, [format!("{}-1", std::process::id())]);
    // A finished export leaves no record and no mark.
    lab.ok(&["export", lab.path("done").to_str().unwrap()]);
    assert!(!lab.path("done").join(".whorl-export").exists());
    assert_eq!(
        std::fs::read_dir(lab.library().join("exports-under-way"))
            .unwrap()
            .count(),
        1
    );
}
