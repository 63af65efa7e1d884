//! Re-running a saved search and explaining any difference.

use std::path::Path;

use serde::Serialize;

use super::report::search_points;
use super::{Report, Request, Unknown, run_search};
use crate::error::{Error, Location, Result};
use crate::library::{Event, Library};
use crate::spectrum::{decode_points, sha256_hex};

/// Scores that differ by less than this are the same score (they are computed in f64 from
/// identical inputs, so any real change is far larger).
const SAME_SCORE: f64 = 1e-9;

/// What a replay found.
#[derive(Debug, Clone, Serialize)]
pub struct Replay {
    /// True when the hits (spectrum, rank and score) are the same as when the search was saved.
    pub same: bool,
    /// The library state hash then and now.
    pub state_hash_then: String,
    /// See `state_hash_then`.
    pub state_hash_now: String,
    /// One line per difference in the hit list.
    pub differences: Vec<String>,
    /// The audit-trail events since the search was saved: what may explain a difference.
    pub events_since: Vec<Event>,
    /// The search as run now.
    pub now: Report,
}

/// Reads a saved search record.
pub fn load_saved(path: &Path) -> Result<Report> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        Error::input(
            Location::file(path),
            format!("cannot read the saved search: {e}"),
            "give the file written by `whorl search --save`",
        )
    })?;
    serde_json::from_str(&text).map_err(|e| {
        Error::input(
            Location::line(path, e.line()),
            format!("not a saved search record: {e}"),
            "give the file written by `whorl search --save`, unedited",
        )
    })
}

/// Re-runs a saved search with its own parameters against `library` and compares the hits.
/// A record that kept the unknown's raw points is replayed from them, anywhere, once they
/// hash to the value it recorded; an older record needs the unknown's file where it was.
pub fn replay(library: &Library, saved: &Report) -> Result<Replay> {
    let file = Path::new(&saved.unknown.file);
    let points = match (&saved.unknown.points, &saved.unknown.points_sha256) {
        (Some(text), Some(want)) => {
            let edited = |why: String| {
                Error::invalid(
                    format!(
                        "the unknown's points kept in the saved search {why}: the record was edited"
                    ),
                    "replay the search from an unedited record written by `whorl search --save`",
                )
            };
            let bytes = hex::decode(text).map_err(|_| edited("are not hex".into()))?;
            let sha = sha256_hex(&bytes);
            if sha != *want {
                return Err(edited(format!(
                    "do not hash to the value it records (sha256 {}, is {})",
                    crate::error::excerpt(want, 64),
                    sha
                )));
            }
            Some(decode_points(&bytes).ok_or_else(|| edited("are not whole x, y pairs".into()))?)
        }
        (None, None) => None,
        _ => {
            return Err(Error::invalid(
                "the saved search keeps the unknown's points without their hash, or the hash without the points: the record was edited",
                "replay the search from an unedited record written by `whorl search --save`",
            ));
        }
    };
    if points.is_none() {
        let bytes = std::fs::read(file).map_err(|e| {
            Error::input(
                Location::file(file),
                format!("the unknown of the saved search cannot be read: {e}"),
                "this record was saved before searches kept their unknown's points: run the replay from the folder the search was run in, or restore the unknown's file",
            )
        })?;
        let sha = sha256_hex(&bytes);
        if sha != saved.unknown.sha256 {
            return Err(Error::input(
                Location::file(file),
                format!(
                    "the unknown changed since the search was saved (sha256 was {}, is now {sha})",
                    saved.unknown.sha256
                ),
                "a replay needs the same unknown; restore the original file",
            ));
        }
    }
    let p = &saved.parameters;
    let request = Request {
        technique: saved.unknown.technique,
        top: p.top,
        filter: p.filter.clone(),
        statuses: p.statuses.clone(),
        params: p.score.clone(),
        thresholds: p.thresholds,
        constraints: p.constraints.clone(),
        explain: p.explain,
        solvent: saved
            .unknown
            .solvent
            .as_deref()
            .map(str::parse)
            .transpose()?,
    };
    let unknown = Unknown {
        technique: request.technique,
        file: file.to_path_buf(),
        x_unit: saved.unknown.x_unit,
        y_unit: Some(saved.unknown.y_unit),
        solvent: request.solvent,
    };
    let mut now = match points {
        Some(points) => search_points(library, &unknown, &points, &saved.unknown.sha256, &request)?,
        None => run_search(library, &unknown, &request)?,
    };
    // The search as run now describes the same unknown, its points kept as they were.
    now.unknown.points = saved.unknown.points.clone();
    now.unknown.points_sha256 = saved.unknown.points_sha256.clone();

    let mut differences = Vec::new();
    if now.parameters.recipe != p.recipe {
        differences.push(
            "the library's preparation recipe for this technique differs from the saved one"
                .to_string(),
        );
    }
    let label = |h: &super::Hit| format!("spectrum {} ({}, {:.3})", h.spectrum_id, h.name, h.score);
    for rank in 0..saved.hits.len().max(now.hits.len()) {
        match (saved.hits.get(rank), now.hits.get(rank)) {
            (Some(a), Some(b))
                if a.spectrum_id == b.spectrum_id && (a.score - b.score).abs() <= SAME_SCORE => {}
            (Some(a), Some(b)) => differences.push(format!(
                "rank {}: was {}, now {}",
                rank + 1,
                label(a),
                label(b)
            )),
            (Some(a), None) => {
                differences.push(format!("rank {}: was {}, now no hit", rank + 1, label(a)))
            }
            (None, Some(b)) => {
                differences.push(format!("rank {}: was no hit, now {}", rank + 1, label(b)))
            }
            (None, None) => {}
        }
    }
    let events_since = library.events_since(saved.library.last_event)?;
    Ok(Replay {
        same: differences.is_empty(),
        state_hash_then: saved.library.state_hash.clone(),
        state_hash_now: now.library.state_hash.clone(),
        differences,
        events_since,
        now,
    })
}
