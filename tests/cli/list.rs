use std::io::Read;
use std::process::{Command, Stdio};

use crate::util::{Lab, ir_csv, ms_csv};

fn lab() -> Lab {
    let lab = Lab::new();
    lab.add(
        "a.csv",
        &ir_csv(&[(1715.0, 0.8, 10.0)]),
        "ir",
        "compound a",
        &["--formula", "C3H6O", "--cas", "67-64-1"],
    );
    lab.add(
        "a.ms.csv",
        &ms_csv(&[(43, 100.0), (58, 30.0)]),
        "ms-ei",
        "compound a",
        &[],
    );
    lab.add(
        "b.csv",
        &ir_csv(&[(1050.0, 0.8, 12.0)]),
        "ir",
        "compound b",
        &[],
    );
    lab
}

#[test]
fn list_of_a_fresh_library_is_empty() {
    let lab = Lab::new();
    assert_eq!(lab.json(&["list"]), serde_json::json!([]));
}

#[test]
fn list_json_has_one_row_per_spectrum_in_id_order() {
    let lab = lab();
    let rows = lab.json(&["list"]);
    let rows = rows.as_array().unwrap();
    let ids: Vec<i64> = rows.iter().map(|r| r["id"].as_i64().unwrap()).collect();
    assert_eq!(ids, [1, 2, 3]);
    assert_eq!(rows[0]["technique"], "ir");
    assert_eq!(rows[0]["name"], "compound a");
    assert_eq!(rows[0]["formula"], "C3H6O");
    assert_eq!(rows[0]["cas"], "67-64-1");
    assert_eq!(rows[0]["status"], "pending");
    assert_eq!(rows[0]["revision"], 1);
    assert_eq!(rows[1]["technique"], "ms-ei");
    assert_eq!(rows[2]["name"], "compound b");
    assert_eq!(rows[2]["formula"], serde_json::Value::Null);
}

#[test]
fn list_technique_keeps_only_that_technique() {
    let lab = lab();
    let rows = lab.json(&["list", "--technique", "ir"]);
    let names: Vec<&str> = rows
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["name"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["compound a", "compound b"]);
    assert_eq!(lab.json(&["list", "-t", "nmr-1h"]), serde_json::json!([]));
}

#[test]
fn list_prints_a_table() {
    let lab = lab();
    let out = lab.ok(&["list"]);
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines.len(), 4, "{out}");
    assert!(lines[0].trim_start().starts_with("id"), "{out}");
    assert!(
        lines[1].contains("compound a") && lines[1].contains("67-64-1"),
        "{out}"
    );
    assert!(lines[3].contains("compound b"), "{out}");
}

#[test]
fn output_into_a_closed_pipe_exits_quietly() {
    // Regression: JSON written into a pipe whose reader had gone (`whorl list --json | head`)
    // ended in "error: Broken pipe" and exit code 1, because serde_json hides the io::Error
    // from the error chain that main() searches for a broken pipe.
    let lab = lab();
    for json in [false, true] {
        let mut cmd = Command::new(env!("CARGO_BIN_EXE_whorl"));
        cmd.arg("--library").arg(lab.library()).arg("list");
        if json {
            cmd.arg("--json");
        }
        let mut child = cmd
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        // Close the reading end before whorl has opened the library, let alone written.
        drop(child.stdout.take());
        let mut stderr = String::new();
        child
            .stderr
            .take()
            .unwrap()
            .read_to_string(&mut stderr)
            .unwrap();
        let status = child.wait().unwrap();
        assert_eq!(status.code(), Some(0), "json {json}: {stderr}");
        assert_eq!(stderr, "", "json {json}");
    }
}
