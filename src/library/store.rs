//! Storing staged spectra: one transaction per batch, a savepoint per spectrum, and the rows,
//! compound and audit event of each new spectrum.

use rusqlite::{Connection, OptionalExtension, params};
use serde::Serialize;

use super::events::append_event;
use super::records::{Review, f32_bytes};
use super::state::{bump_generation, reweigh};
use super::{Library, Staged, now};
use crate::error::{Error, Result};
use crate::prepare::Prepared;
use crate::spectrum::{Metadata, RawSpectrum, Status};

/// What storing one staged spectrum did.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(tag = "outcome", rename_all = "snake_case")]
pub enum Outcome {
    /// A new spectrum.
    Added {
        /// Its id.
        spectrum_id: i64,
        /// Its compound.
        compound_id: i64,
        /// When its compound is new and an older compound has the same normalised name: that
        /// compound (they may be one substance, to merge with `whorl compound merge`).
        #[serde(skip_serializing_if = "Option::is_none")]
        same_name: Option<i64>,
    },
    /// The same raw points were already in the library for this technique.
    AlreadyPresent {
        /// The id already holding them.
        spectrum_id: i64,
    },
}

impl Outcome {
    /// The warning of a new compound that takes an existing compound's name, naming both and
    /// the command that merges them.
    pub fn same_name_warning(&self) -> Option<String> {
        let Outcome::Added {
            compound_id,
            same_name: Some(other),
            ..
        } = self
        else {
            return None;
        };
        Some(format!(
            "a new compound {compound_id} was made for this spectrum, and compound {other} has the same name: if they are one substance, merge them with `whorl compound merge {compound_id} {other} --reason TEXT` (see `whorl compound show {other}`)"
        ))
    }
}

impl Library {
    /// Stores staged spectra in one transaction. Each entry of the result says what happened
    /// to the staged spectrum at the same position, or why it was refused (for example a
    /// formula that contradicts the compound already on record). With `all_or_nothing`, one
    /// refusal rolls the whole batch back. Already-present spectra are not refusals.
    pub fn store(
        &mut self,
        batch: &[Staged],
        actor: &str,
        all_or_nothing: bool,
    ) -> Result<Vec<Result<Outcome>>> {
        let mut tx = self
            .conn
            .transaction_with_behavior(rusqlite::TransactionBehavior::Immediate)?;
        let mut outcomes = Vec::with_capacity(batch.len());
        // Bumped first, so that each import event records the generation this batch makes; a
        // batch that adds nothing rolls the bump back with the rest.
        let generation = bump_generation(&tx)?;
        let mut added = Vec::new();
        let mut names = CompoundNames::default();
        for staged in batch {
            // A savepoint per spectrum: a refusal halfway through one leaves nothing of it behind.
            let sp = tx.savepoint()?;
            let outcome = store_one(&sp, staged, actor, &mut names);
            if outcome.is_ok() {
                sp.commit()?;
            }
            if let Ok(Outcome::Added { spectrum_id, .. }) = outcome {
                added.push(spectrum_id);
            }
            outcomes.push(outcome);
        }
        let refused = outcomes.iter().any(|o| o.is_err());
        if added.is_empty() || (all_or_nothing && refused) {
            drop(tx); // rolls back
            return Ok(outcomes);
        }
        tx.commit()?;
        self.sync_text(&added, generation)?;
        Ok(outcomes)
    }
}

/// The identity key of a new compound: its CAS RN when known, else its InChIKey (the extra
/// field `inchikey`), else its name normalised by [`normalised_name`]. A formula is not part of
/// the key but must agree with the compound's (`find_or_create_compound`). Compounds made
/// before this key keep theirs (`cas:` is unchanged; a name key was the lower-cased name,
/// which [`compound_keys`] still looks up), since their rows are sealed.
pub(super) fn compound_key(m: &Metadata) -> String {
    compound_keys(m).0
}

/// The key of [`compound_key`] and, for a name key, the key a compound of that name was given
/// before names were normalised (when it differs).
fn compound_keys(m: &Metadata) -> (String, Option<String>) {
    if let Some(cas) = &m.cas {
        return (format!("cas:{cas}"), None);
    }
    if let Some(key) = m.extra.get(super::stage::INCHIKEY) {
        return (format!("inchikey:{key}"), None);
    }
    let key = format!("name:{}", normalised_name(&m.name));
    let legacy = format!("name:{}", m.name.to_lowercase());
    let legacy = (legacy != key).then_some(legacy);
    (key, legacy)
}

/// A compound name as identity compares it: NFKC (Unicode Standard Annex #15), lower-cased
/// (Unicode default case mapping), runs of white space made one space, trimmed; so "Toluene",
/// "toluene" and "TOLUENE " are one name, as are full-width and ordinary letters.
pub fn normalised_name(name: &str) -> String {
    use unicode_normalization::UnicodeNormalization;
    let folded: String = name
        .nfkc()
        .flat_map(char::to_lowercase)
        .collect::<String>()
        .nfkc()
        .collect();
    folded.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// The normalised names of the compounds not merged into another, loaded once per write that
/// may create compounds, to warn when a new compound takes an existing one's name.
#[derive(Default)]
pub(super) struct CompoundNames(Option<std::collections::HashMap<String, i64>>);

impl CompoundNames {
    /// The compound other than `id` whose normalised name is `name`'s, if any (the oldest).
    fn same_name(&mut self, tx: &Connection, name: &str, id: i64) -> Result<Option<i64>> {
        if self.0.is_none() {
            let mut map = std::collections::HashMap::new();
            let mut stmt =
                tx.prepare("SELECT id, name FROM compound WHERE merged_into IS NULL ORDER BY id")?;
            let rows = stmt.query_map([], |r| Ok((r.get::<_, i64>(0)?, r.get::<_, String>(1)?)))?;
            for row in rows {
                let (c, n) = row?;
                map.entry(normalised_name(&n)).or_insert(c);
            }
            self.0 = Some(map);
        }
        let map = self.0.as_mut().expect("loaded above");
        let key = normalised_name(name);
        match map.get(&key) {
            Some(&c) if c != id => Ok(Some(c)),
            Some(_) => Ok(None),
            None => {
                map.insert(key, id);
                Ok(None)
            }
        }
    }
}

fn store_one(
    tx: &Connection,
    staged: &Staged,
    actor: &str,
    names: &mut CompoundNames,
) -> Result<Outcome> {
    let sub = &staged.submission;
    let technique = sub.technique.name();
    let raw_sha256 = staged.raw.raw_sha256();
    if let Some(spectrum_id) = present_by_raw(tx, technique, &raw_sha256)? {
        refuse_withdrawn(tx, spectrum_id, &sub.path)?;
        return Ok(Outcome::AlreadyPresent { spectrum_id });
    }
    let m = &sub.metadata;
    let (compound_id, created) = find_or_create_compound(tx, m)?;
    // A new compound under a name another compound already has is stored (they may be two
    // substances), with the other's id for the warning that offers a merge.
    let same_name = if created {
        names.same_name(tx, &m.name, compound_id)?
    } else {
        None
    };
    let file_name = sub
        .path
        .file_name()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let created_at = now();
    let spectrum_id = insert_spectrum(
        tx,
        &NewSpectrum {
            compound_id,
            technique,
            status: Status::Pending,
            current_revision: 1,
            file_name: &file_name,
            file_sha256: &staged.raw.file_sha256,
            raw_sha256: &raw_sha256,
            raw: &staged.raw,
            submitted_by: &sub.submitted_by,
            imported_by: actor,
            created_at: &created_at,
            withdrawn_reason: None,
        },
    )?;
    let metadata_json = serde_json::to_string(m)?;
    insert_revision(
        tx,
        &NewRevision {
            spectrum_id,
            number: 1,
            metadata_json: &metadata_json,
            created_at: &created_at,
            created_by: &sub.submitted_by,
            reason: None,
            compound_id: Some(compound_id),
        },
    )?;
    insert_prepared(tx, spectrum_id, &staged.prepared)?;
    reweigh(
        tx,
        technique,
        &raw_sha256,
        None,
        Some((Status::Pending, &metadata_json)),
    )?;
    let payload = serde_json::json!({
        "spectrum": spectrum_id,
        "compound": compound_id,
        "technique": technique,
        "file": file_name,
        "file_sha256": staged.raw.file_sha256,
        "raw_sha256": raw_sha256,
        "submitted_by": sub.submitted_by,
        "metadata": m,
    });
    append_event(
        tx,
        actor,
        "add",
        &format!("spectrum:{spectrum_id}"),
        &payload,
    )?;
    Ok(Outcome::Added {
        spectrum_id,
        compound_id,
        same_name,
    })
}

/// The compound a metadata record names: found by its identity key (a compound merged into
/// another leads to the one it went into), or created; with whether it was created. Refuses a
/// formula that contradicts the compound already on record.
pub(super) fn find_or_create_compound(tx: &Connection, m: &Metadata) -> Result<(i64, bool)> {
    let (key, legacy) = compound_keys(m);
    let mut found = None;
    for k in std::iter::once(&key).chain(legacy.as_ref()) {
        let row: Option<i64> = tx
            .query_row("SELECT id FROM compound WHERE key = ?1", [k], |r| r.get(0))
            .optional()?;
        if let Some(id) = row {
            found = Some(merged_target(tx, id)?);
            break;
        }
    }
    let Some(id) = found else {
        tx.execute(
            "INSERT INTO compound (key, name, formula, cas, created_at) VALUES (?1, ?2, ?3, ?4, ?5)",
            params![key, m.name, m.formula, m.cas, now()],
        )?;
        return Ok((tx.last_insert_rowid(), true));
    };
    let formula: Option<String> =
        tx.query_row("SELECT formula FROM compound WHERE id = ?1", [id], |r| {
            r.get(0)
        })?;
    match formula {
        Some(formula) if m.formula.as_ref().is_some_and(|f| f != &formula) => Err(Error::invalid(
            format!(
                "compound {id} ('{}') is on record with formula {formula}, but this spectrum says {}",
                m.name,
                m.formula.as_deref().unwrap_or("")
            ),
            "correct the formula, or give the CAS RN (or --set inchikey=KEY) if this is a different substance",
        )),
        _ => Ok((id, false)),
    }
}

/// The compound `id` was merged into, following merges of merges (a compound merged into one
/// that was merged later); `id` itself when it was not merged.
pub(super) fn merged_target(tx: &Connection, id: i64) -> Result<i64> {
    let mut seen = std::collections::HashSet::new();
    let mut at = id;
    while seen.insert(at) {
        let next: Option<i64> = tx
            .query_row(
                "SELECT merged_into FROM compound WHERE id = ?1",
                [at],
                |r| r.get(0),
            )
            .optional()?
            .flatten();
        match next {
            Some(n) => at = n,
            None => return Ok(at),
        }
    }
    Err(Error::invalid(
        format!("compound {id} is merged in a loop"),
        "run `whorl check`: the compound table was edited outside whorl",
    ))
}

/// The spectrum holding exactly these raw points for this technique, if any: the identity
/// that makes imports idempotent.
pub(super) fn present_by_raw(
    tx: &Connection,
    technique: &str,
    raw_sha256: &str,
) -> Result<Option<i64>> {
    Ok(tx
        .query_row(
            "SELECT id FROM spectrum WHERE technique = ?1 AND raw_sha256 = ?2",
            params![technique, raw_sha256],
            |r| r.get(0),
        )
        .optional()?)
}

/// Refuses a file whose raw points are those of a withdrawn spectrum: storing it again would
/// not bring the spectrum back, so "already present" would mislead. Names the spectrum, why it
/// was withdrawn, and the way back (`whorl reinstate`).
pub(super) fn refuse_withdrawn(
    tx: &Connection,
    spectrum_id: i64,
    path: &std::path::Path,
) -> Result<()> {
    let (status, reason): (String, Option<String>) = tx.query_row(
        "SELECT status, withdrawn_reason FROM spectrum WHERE id = ?1",
        [spectrum_id],
        |r| Ok((r.get(0)?, r.get(1)?)),
    )?;
    if status != Status::Withdrawn.name() {
        return Ok(());
    }
    Err(Error::input(
        crate::error::Location::file(path),
        format!(
            "the same raw points are spectrum {spectrum_id}, which is withdrawn ({})",
            crate::error::excerpt(reason.as_deref().unwrap_or(""), 200)
        ),
        format!(
            "to use it again, bring it back with `whorl reinstate {spectrum_id} --reason TEXT` (it returns pending a new sign-off)"
        ),
    ))
}

// The writes below are the only place each row is written from: storing, the bundle import,
// curation and recipe changes all go through them.

/// A new `spectrum` row: the raw points as staged, and what the caller knows of their history
/// (a new spectrum is pending at revision 1; one imported from a bundle keeps its own).
pub(super) struct NewSpectrum<'a> {
    pub(super) compound_id: i64,
    pub(super) technique: &'a str,
    pub(super) status: Status,
    pub(super) current_revision: i64,
    pub(super) file_name: &'a str,
    pub(super) file_sha256: &'a str,
    pub(super) raw_sha256: &'a str,
    pub(super) raw: &'a RawSpectrum,
    pub(super) submitted_by: &'a str,
    /// Who ran the command that stored it (the event's actor).
    pub(super) imported_by: &'a str,
    pub(super) created_at: &'a str,
    pub(super) withdrawn_reason: Option<&'a str>,
}

/// Inserts a spectrum row and returns its id.
pub(super) fn insert_spectrum(tx: &Connection, s: &NewSpectrum<'_>) -> Result<i64> {
    tx.execute(
        "INSERT INTO spectrum (compound_id, technique, status, current_revision, file_name, file_sha256, raw_sha256, raw,
                               x_unit, y_unit, submitted_by, created_at, withdrawn_reason, imported_by)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14)",
        params![
            s.compound_id,
            s.technique,
            s.status.name(),
            s.current_revision,
            s.file_name,
            s.file_sha256,
            s.raw_sha256,
            s.raw.canonical_bytes(),
            s.raw.x_unit.name(),
            s.raw.y_unit.name(),
            s.submitted_by,
            s.created_at,
            s.withdrawn_reason,
            s.imported_by,
        ],
    )?;
    Ok(tx.last_insert_rowid())
}

/// A new `revision` row: one version of a spectrum's metadata.
pub(super) struct NewRevision<'a> {
    pub(super) spectrum_id: i64,
    pub(super) number: i64,
    pub(super) metadata_json: &'a str,
    pub(super) created_at: &'a str,
    pub(super) created_by: &'a str,
    /// Why (none for the first revision).
    pub(super) reason: Option<&'a str>,
    /// The compound the revision names (a bundle carries it for the current revision only).
    pub(super) compound_id: Option<i64>,
}

/// Inserts a revision row.
pub(super) fn insert_revision(tx: &Connection, r: &NewRevision<'_>) -> Result<()> {
    tx.execute(
        "INSERT INTO revision (spectrum_id, number, metadata, created_at, created_by, reason, compound_id)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
        params![
            r.spectrum_id,
            r.number,
            r.metadata_json,
            r.created_at,
            r.created_by,
            r.reason,
            r.compound_id
        ],
    )?;
    Ok(())
}

/// Stores the prepared form of a new spectrum.
pub(super) fn insert_prepared(tx: &Connection, spectrum_id: i64, p: &Prepared) -> Result<()> {
    tx.execute(
        "INSERT INTO prepared (spectrum_id, vector, peaks, y_unit, warnings, coverage) VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
        params![
            spectrum_id,
            f32_bytes(&p.vector),
            serde_json::to_string(&p.peaks)?,
            p.y_unit.name(),
            serde_json::to_string(&p.warnings)?,
            coverage_json(p)?
        ],
    )?;
    Ok(())
}

/// Replaces the prepared form of a spectrum prepared again (a new solvent, a new recipe).
pub(super) fn update_prepared(tx: &Connection, spectrum_id: i64, p: &Prepared) -> Result<()> {
    // Cached: a recipe change runs it once per spectrum of the technique.
    tx.prepare_cached(
        "UPDATE prepared SET vector = ?2, peaks = ?3, y_unit = ?4, warnings = ?5, coverage = ?6 WHERE spectrum_id = ?1",
    )?
    .execute(params![
        spectrum_id,
        f32_bytes(&p.vector),
        serde_json::to_string(&p.peaks)?,
        p.y_unit.name(),
        serde_json::to_string(&p.warnings)?,
        coverage_json(p)?
    ])?;
    Ok(())
}

/// The stored form of a prepared spectrum's coverage: JSON, or NULL for the whole grid.
pub(super) fn coverage_json(p: &Prepared) -> Result<Option<String>> {
    Ok(match &p.coverage {
        Some(c) => Some(serde_json::to_string(c)?),
        None => None,
    })
}

/// Inserts a sign-off row (its `id` is not read) and returns its id.
pub(super) fn insert_review(tx: &Connection, r: &Review) -> Result<i64> {
    tx.execute(
        "INSERT INTO review (spectrum_id, revision, reviewer, at, decision, meaning, note, imported_from)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
        params![
            r.spectrum_id,
            r.revision,
            r.reviewer,
            r.at,
            r.decision,
            r.meaning,
            r.note,
            r.imported_from
        ],
    )?;
    Ok(tx.last_insert_rowid())
}

/// Changes a spectrum's status; a withdrawal records its reason beside it.
pub(super) fn set_status(
    tx: &Connection,
    spectrum_id: i64,
    status: Status,
    withdrawn_reason: Option<&str>,
) -> Result<()> {
    match withdrawn_reason {
        None => tx.execute(
            "UPDATE spectrum SET status = ?2 WHERE id = ?1",
            params![spectrum_id, status.name()],
        )?,
        Some(reason) => tx.execute(
            "UPDATE spectrum SET status = ?2, withdrawn_reason = ?3 WHERE id = ?1",
            params![spectrum_id, status.name(), reason],
        )?,
    };
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::testing::{add, ir, rows};

    #[test]
    fn the_same_raw_points_are_stored_once() {
        let mut lib = Library::in_memory("t").unwrap();
        let a = ir(1, "acetone", "alice");
        let id = add(&mut lib, &a);
        let (events, generation) = (lib.last_event().unwrap(), lib.generation().unwrap());
        // Found again by their raw points, whatever the metadata says; nothing is written.
        let mut again = a.clone();
        again.submission.metadata.name = "propanone".into();
        let out = lib.store(&[again], "t", false).unwrap();
        assert_eq!(
            out[0].as_ref().unwrap(),
            &Outcome::AlreadyPresent { spectrum_id: id }
        );
        assert_eq!(rows(&lib, "spectrum"), 1);
        assert_eq!(lib.last_event().unwrap(), events);
        assert_eq!(lib.generation().unwrap(), generation);
        // A batch holding the same points twice stores the first only.
        let b = ir(2, "butanone", "alice");
        let out = lib.store(&[b.clone(), b], "t", false).unwrap();
        let Ok(Outcome::Added { spectrum_id, .. }) = out[0] else {
            panic!("{out:?}")
        };
        assert_eq!(
            out[1].as_ref().unwrap(),
            &Outcome::AlreadyPresent { spectrum_id }
        );
        assert_eq!(rows(&lib, "spectrum"), 2);
    }

    #[test]
    fn spectra_of_one_compound_share_its_row() {
        let mut lib = Library::in_memory("t").unwrap();
        let compound = |lib: &Library, id| lib.spectrum(id).unwrap().compound_id;
        let a = add(&mut lib, &ir(1, "Acetone", "alice"));
        // The name key ignores case.
        let b = add(&mut lib, &ir(2, "acetone", "bob"));
        assert_eq!(compound(&lib, a), compound(&lib, b));
        // A CAS RN is the key when given, whatever the name (67-64-1 is acetone, from memory).
        let mut c = ir(3, "propanone", "alice");
        c.submission.metadata.cas = Some("67-64-1".into());
        let c = add(&mut lib, &c);
        let mut d = ir(4, "dimethyl ketone", "alice");
        d.submission.metadata.cas = Some("67-64-1".into());
        let d = add(&mut lib, &d);
        assert_eq!(compound(&lib, c), compound(&lib, d));
        assert_ne!(compound(&lib, a), compound(&lib, c));
        assert_eq!(rows(&lib, "compound"), 2);
    }

    #[test]
    fn a_formula_contradicting_the_compound_is_refused_and_leaves_nothing() {
        let mut lib = Library::in_memory("t").unwrap();
        let with_formula = |seed, formula: &str| {
            let mut s = ir(seed, "acetone", "alice");
            s.submission.metadata.formula = Some(formula.into());
            s
        };
        let batch = [
            with_formula(1, "C3H6O"),
            with_formula(2, "C3H8O"),
            ir(3, "ethanol", "alice"),
        ];
        // All or nothing: the refusal rolls the batch back, events included.
        let events = lib.last_event().unwrap();
        let out = lib.store(&batch, "t", true).unwrap();
        assert!(out[0].is_ok() && out[2].is_ok());
        let err = out[1].as_ref().unwrap_err().to_string();
        assert!(err.contains("formula C3H6O"), "{err}");
        assert_eq!(rows(&lib, "spectrum"), 0);
        assert_eq!(rows(&lib, "compound"), 0);
        assert_eq!(lib.last_event().unwrap(), events);
        // Otherwise the refused spectrum leaves nothing of itself and the others are stored.
        let out = lib.store(&batch, "t", false).unwrap();
        assert!(out[1].is_err());
        assert_eq!(rows(&lib, "spectrum"), 2);
        assert_eq!(rows(&lib, "revision"), 2);
        assert_eq!(rows(&lib, "prepared"), 2);
        assert_eq!(lib.events(None).unwrap().len() as i64, events + 2);
    }

    #[test]
    fn each_new_spectrum_has_its_add_event() {
        let mut lib = Library::in_memory("t").unwrap();
        let s = ir(1, "acetone", "alice");
        let out = lib.store(std::slice::from_ref(&s), "clerk", false).unwrap();
        let Ok(Outcome::Added {
            spectrum_id,
            compound_id,
            ..
        }) = out[0]
        else {
            panic!("{out:?}")
        };
        let events = lib
            .events(Some(&format!("spectrum:{spectrum_id}")))
            .unwrap();
        assert_eq!(events.len(), 1);
        let e = &events[0];
        assert_eq!((e.action.as_str(), e.actor.as_str()), ("add", "clerk"));
        assert_eq!(e.payload["spectrum"], spectrum_id);
        assert_eq!(e.payload["compound"], compound_id);
        assert_eq!(e.payload["raw_sha256"], s.raw.raw_sha256());
        assert_eq!(e.payload["submitted_by"], "alice");
        assert_eq!(e.payload["metadata"]["name"], "acetone");
    }

    /// Pins the rows a new spectrum is stored as, which the bundle import and the store share
    /// one set of INSERTs for.
    #[test]
    fn a_new_spectrum_is_stored_pending_at_revision_one() {
        let mut lib = Library::in_memory("t").unwrap();
        let s = ir(1, "acetone", "alice");
        let id = add(&mut lib, &s);
        type Row = (String, i64, Option<String>, String, String, String, Vec<u8>);
        let row: Row = lib
            .conn
            .query_row(
                "SELECT status, current_revision, withdrawn_reason, file_name, file_sha256,
                        submitted_by, raw FROM spectrum WHERE id = ?1",
                [id],
                |r| {
                    Ok((
                        r.get(0)?,
                        r.get(1)?,
                        r.get(2)?,
                        r.get(3)?,
                        r.get(4)?,
                        r.get(5)?,
                        r.get(6)?,
                    ))
                },
            )
            .unwrap();
        assert_eq!(row.0, "pending");
        assert_eq!(row.1, 1);
        assert_eq!(row.2, None);
        assert_eq!(row.3, "acetone.csv");
        assert_eq!(row.4, s.raw.file_sha256);
        assert_eq!(row.5, "alice");
        assert_eq!(row.6, s.raw.canonical_bytes());
        let revision: (i64, Option<String>, String, i64, bool) = lib
            .conn
            .query_row(
                "SELECT r.number, r.reason, r.created_by, r.compound_id, r.created_at = s.created_at
                 FROM revision r JOIN spectrum s ON s.id = r.spectrum_id WHERE s.id = ?1",
                [id],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?)),
            )
            .unwrap();
        let compound = lib.spectrum(id).unwrap().compound_id;
        assert_eq!(revision, (1, None, "alice".into(), compound, true));
        let stored = lib.prepared(id).unwrap();
        assert_eq!(stored.vector, s.prepared.vector);
        assert_eq!(stored.y_unit, s.prepared.y_unit);
        assert_eq!(stored.warnings, s.prepared.warnings);
    }
}
