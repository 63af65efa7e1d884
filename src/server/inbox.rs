//! The drop folder (`whorl serve --inbox DIR --inbox-account NAME`): an instrument or a
//! script drops a manifest and its files into DIR and writes a marker last; the server
//! imports them as the account and moves them away with the result beside them.
//!
//! A drop is `NAME.csv` (the manifest, as `whorl import` reads it, its `file` paths relative
//! to DIR), the files it lists, and `NAME.ready`, an empty marker written after everything
//! else is complete. Nothing is read before the marker exists, so a half-copied file is never
//! read. The manifest is imported all or nothing through the library's own import
//! (`import::import_manifest_as`); then the manifest, its files and the marker are moved to
//! `done/NAME/` (every row stored or already present) or `failed/NAME/` (nothing stored),
//! with `NAME.result.json` beside them. A drop the server was killed in the middle of is
//! picked up again at the next start: its rows already stored come back as already present.
//!
//! The imports are recorded as asserted, not signed in: whoever can write to DIR submits as
//! the account, and no one proves who they are at that moment.

use std::path::{Path, PathBuf};
use std::time::Duration;

use serde_json::{Value, json};
use whorl::library::{Capability, Library, read_manifest, resolve_within};

use super::import::{import_manifest_as, report_json};

/// How often DIR is looked at.
pub const POLL: Duration = Duration::from_millis(500);

/// The drop folder's settings.
#[derive(Debug, Clone)]
pub struct Inbox {
    /// The folder watched.
    pub dir: PathBuf,
    /// The account drops are imported as.
    pub account: String,
}

impl Inbox {
    /// Checks the folder and the account before the server starts; makes `done/` and
    /// `failed/`. Returns the account's name as stored.
    pub fn prepare(&self, library: &Path) -> anyhow::Result<String> {
        if !self.dir.is_dir() {
            return Err(whorl::Error::invalid(
                format!("the inbox {} is not a folder", self.dir.display()),
                "create the folder first, and let the instrument write into it",
            )
            .into());
        }
        let lib = Library::open(library)?;
        let account = lib
            .account(&self.account)?
            .filter(whorl::library::Account::is_active)
            .ok_or_else(|| {
                whorl::Error::invalid(
                    format!("there is no active account '{}'", self.account),
                    "add one with `whorl account add NAME --role submitter`",
                )
            })?;
        if !account.can(Capability::Submit) {
            return Err(whorl::Error::invalid(
                format!(
                    "the account '{}' (role {}) may not submit",
                    account.name, account.role
                ),
                "give --inbox-account an account with the submitter, curator or admin role",
            )
            .into());
        }
        for sub in ["done", "failed"] {
            let p = self.dir.join(sub);
            std::fs::create_dir_all(&p)
                .map_err(|e| whorl::Error::io(format!("creating {}", p.display()), e))?;
        }
        Ok(account.name)
    }
}

/// Watches the folder until the process ends, one drop at a time on the blocking pool.
pub async fn watch(inbox: Inbox, library: PathBuf) {
    loop {
        let (i, l) = (inbox.clone(), library.clone());
        match tokio::task::spawn_blocking(move || sweep(&i, &l)).await {
            Ok(Ok(0)) => {}
            Ok(Ok(n)) => tracing::info!(drops = n, "inbox: drops handled"),
            Ok(Err(e)) => tracing::error!(error = %e, "inbox: a drop could not be handled"),
            Err(e) => tracing::error!(error = %e, "inbox: the sweep failed"),
        }
        tokio::time::sleep(POLL).await;
    }
}

/// Handles every drop whose marker is there; returns how many.
pub fn sweep(inbox: &Inbox, library: &Path) -> std::io::Result<usize> {
    let mut markers: Vec<PathBuf> = std::fs::read_dir(&inbox.dir)?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "ready") && p.is_file())
        .collect();
    markers.sort();
    for marker in &markers {
        handle(inbox, library, marker)?;
    }
    Ok(markers.len())
}

/// Imports one drop and moves it to `done/` or `failed/` with its result.
fn handle(inbox: &Inbox, library: &Path, marker: &Path) -> std::io::Result<()> {
    let stem = marker
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let manifest = inbox.dir.join(format!("{stem}.csv"));
    let (ok, result) = import(inbox, library, &manifest);
    tracing::info!(drop = %stem, ok, account = %inbox.account, "inbox: drop imported");
    let target = free_folder(&inbox.dir.join(if ok { "done" } else { "failed" }), &stem);
    std::fs::create_dir_all(&target)?;
    // The files the manifest lists, where they exist inside DIR, keep their relative paths.
    if let Ok(rows) = read_manifest(&manifest, &inbox.account) {
        for row in rows {
            if let Ok(from) = resolve_within(&inbox.dir, &row.file)
                && from.is_file()
            {
                let to = target.join(row.file.trim());
                if let Some(parent) = to.parent() {
                    std::fs::create_dir_all(parent)?;
                }
                std::fs::rename(&from, &to)?;
            }
        }
    }
    if manifest.is_file() {
        std::fs::rename(&manifest, target.join(format!("{stem}.csv")))?;
    }
    let mut text = serde_json::to_string_pretty(&result).unwrap_or_default();
    text.push('\n');
    std::fs::write(target.join(format!("{stem}.result.json")), text)?;
    // The marker last: until it is gone, a restart would handle the drop again.
    std::fs::rename(marker, target.join(format!("{stem}.ready")))?;
    Ok(())
}

/// `base/stem`, or `base/stem-2`, `-3` ... when a drop of that name was handled before.
fn free_folder(base: &Path, stem: &str) -> PathBuf {
    let mut candidate = base.join(stem);
    let mut n = 2;
    while candidate.exists() {
        candidate = base.join(format!("{stem}-{n}"));
        n += 1;
    }
    candidate
}

/// Imports the manifest all or nothing; whether every row was stored (or already present),
/// and the result to write.
fn import(inbox: &Inbox, library: &Path, manifest: &Path) -> (bool, Value) {
    let prefix = format!("{}/", inbox.dir.display());
    let outcome = Library::open(library).and_then(|mut lib| {
        let report = import_manifest_as(&mut lib, manifest, &inbox.account, true)?;
        // `[audit] witness`: the drop's new head goes to the witness file.
        if let Some(file) = whorl::config::Config::load(library)?.audit.witness {
            lib.witness_new_head(&file)?;
        }
        Ok(report)
    });
    match outcome {
        Ok(report) => {
            let mut body = report_json(&report, &inbox.dir);
            let ok = report.rejected().next().is_none();
            body["account"] = json!(inbox.account);
            body["imported_at"] = json!(whorl::library::now());
            (ok, body)
        }
        Err(e) => (
            false,
            json!({
                "account": inbox.account,
                "imported_at": whorl::library::now(),
                "error": {
                    "message": e.to_string().replace(&prefix, ""),
                    "hint": e.hint(),
                },
            }),
        ),
    }
}
