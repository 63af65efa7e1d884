//! Compounds: the substances spectra belong to, listed, shown, and merged when two compound
//! rows turn out to be one substance (a spectrum stored without the CAS RN its compound has).

use rusqlite::{Connection, OptionalExtension, params};
use serde::Serialize;

use super::Library;
use super::events::append_event;
use super::seal::sealed_payload_of;
use super::store::normalised_name;
use crate::error::{Error, Result};

/// One compound row, with how many spectra name it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CompoundRecord {
    /// Its id.
    pub id: i64,
    /// Its identity key (`cas:...`, `inchikey:...` or `name:...`), as it was made.
    pub key: String,
    /// Its name, as first given.
    pub name: String,
    /// Its formula, Hill order.
    pub formula: Option<String>,
    /// Its CAS RN.
    pub cas: Option<String>,
    /// When it was made (UTC).
    pub created_at: String,
    /// The compound it was merged into, if it was.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub merged_into: Option<i64>,
    /// The spectra that name it (withdrawn ones included).
    pub spectra: Vec<i64>,
}

/// What a compound merge did.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Merge {
    /// The compound merged away.
    pub from: i64,
    /// The compound its spectra now belong to.
    pub into: i64,
    /// The spectra moved, by id.
    pub spectra: Vec<i64>,
    /// Why.
    pub reason: String,
    /// Whether the two formulas differed and the merge was made all the same.
    pub formulas_differ: bool,
    /// The audit event recording it.
    pub event: i64,
}

const COLUMNS: &str = "id, key, name, formula, cas, created_at, merged_into";

fn read_compound(conn: &Connection, id: i64) -> Result<Option<CompoundRecord>> {
    let row = conn
        .query_row(
            &format!("SELECT {COLUMNS} FROM compound WHERE id = ?1"),
            [id],
            from_row,
        )
        .optional()?;
    let Some(mut c) = row else {
        return Ok(None);
    };
    c.spectra = spectra_of(conn, id)?;
    Ok(Some(c))
}

fn from_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<CompoundRecord> {
    Ok(CompoundRecord {
        id: r.get(0)?,
        key: r.get(1)?,
        name: r.get(2)?,
        formula: r.get(3)?,
        cas: r.get(4)?,
        created_at: r.get(5)?,
        merged_into: r.get(6)?,
        spectra: Vec::new(),
    })
}

fn spectra_of(conn: &Connection, id: i64) -> Result<Vec<i64>> {
    let mut stmt =
        conn.prepare_cached("SELECT id FROM spectrum WHERE compound_id = ?1 ORDER BY id")?;
    let ids = stmt
        .query_map([id], |r| r.get(0))?
        .collect::<rusqlite::Result<_>>()?;
    Ok(ids)
}

impl Library {
    /// Every compound, by id, with its spectra.
    pub fn compounds(&self) -> Result<Vec<CompoundRecord>> {
        let mut stmt = self
            .conn
            .prepare(&format!("SELECT {COLUMNS} FROM compound ORDER BY id"))?;
        let mut out: Vec<CompoundRecord> = stmt
            .query_map([], from_row)?
            .collect::<rusqlite::Result<_>>()?;
        let mut stmt = self
            .conn
            .prepare("SELECT compound_id, id FROM spectrum ORDER BY id")?;
        let mut by: std::collections::HashMap<i64, Vec<i64>> = std::collections::HashMap::new();
        for row in stmt.query_map([], |r| Ok((r.get::<_, i64>(0)?, r.get::<_, i64>(1)?)))? {
            let (c, s) = row?;
            by.entry(c).or_default().push(s);
        }
        for c in &mut out {
            c.spectra = by.remove(&c.id).unwrap_or_default();
        }
        Ok(out)
    }

    /// One compound.
    pub fn compound(&self, id: i64) -> Result<CompoundRecord> {
        read_compound(&self.conn, id)?.ok_or(Error::NotFound {
            kind: "compound",
            id,
        })
    }

    /// The other compounds (not merged away) whose normalised name is `id`'s.
    pub fn compounds_named_alike(&self, id: i64) -> Result<Vec<i64>> {
        let name = normalised_name(&self.compound(id)?.name);
        Ok(self
            .compounds()?
            .into_iter()
            .filter(|c| c.id != id && c.merged_into.is_none() && normalised_name(&c.name) == name)
            .map(|c| c.id)
            .collect())
    }

    /// Merges compound `from` into `into`: every spectrum of `from` (withdrawn ones too)
    /// belongs to `into` afterwards, and `from` records that it went there, so a spectrum
    /// stored later under `from`'s identity lands in `into`. One transaction with one
    /// `compound-merge` event on record `compound:FROM`, which seals every moved spectrum's
    /// rows and both compound rows (`seal::sealed_payload_of`), so `check` compares them with
    /// it. Refuses `from == into`, an unknown id, a compound already merged on either side,
    /// and two different formulas unless `formulas_differ` says the caller knows (the reason
    /// then has to say why they are one substance). The revisions keep the compound they
    /// named when written; the state hash does not move (it sums spectra and metadata, not
    /// compound ids), but the generation does, so the text index and caches catch up.
    pub fn merge_compounds(
        &mut self,
        from: i64,
        into: i64,
        actor: &str,
        reason: &str,
        formulas_differ: bool,
    ) -> Result<Merge> {
        let reason = reason.trim().to_string();
        if reason.is_empty() {
            return Err(Error::invalid(
                "a compound merge needs a reason",
                "say why the two are one substance with --reason TEXT",
            ));
        }
        if from == into {
            return Err(Error::invalid(
                format!("compound {from} cannot be merged into itself"),
                "give two different compound ids (see `whorl compound list`)",
            ));
        }
        let a = self.compound(from)?;
        let b = self.compound(into)?;
        for c in [&a, &b] {
            if let Some(to) = c.merged_into {
                return Err(Error::invalid(
                    format!("compound {} was already merged into compound {to}", c.id),
                    format!("merge with compound {to} instead (see `whorl compound show {to}`)"),
                ));
            }
        }
        let differ = match (&a.formula, &b.formula) {
            (Some(x), Some(y)) => x != y,
            _ => false,
        };
        if differ && !formulas_differ {
            return Err(Error::invalid(
                format!(
                    "compound {from} has formula {} and compound {into} has {}: different formulas are different substances",
                    a.formula.as_deref().unwrap_or(""),
                    b.formula.as_deref().unwrap_or("")
                ),
                "correct the wrong formula with `whorl revise`, or, if one formula on record is simply wrong, add --formulas-differ and say so in --reason",
            ));
        }
        let merge = self.write(|tx| {
            let moved = spectra_of(tx, from)?;
            tx.execute(
                "UPDATE spectrum SET compound_id = ?2 WHERE compound_id = ?1",
                params![from, into],
            )?;
            tx.execute(
                "UPDATE compound SET merged_into = ?2 WHERE id = ?1",
                params![from, into],
            )?;
            // The compound's formula, when only the source knew it, goes with its spectra;
            // then every spectrum of the target has a changed compound row to seal, else the
            // moved ones only.
            let resealed = if b.formula.is_none() && a.formula.is_some() {
                tx.execute(
                    "UPDATE compound SET formula = ?2 WHERE id = ?1",
                    params![into, a.formula],
                )?;
                spectra_of(tx, into)?
            } else {
                moved.clone()
            };
            let records: Vec<String> = resealed.iter().map(|id| format!("spectrum:{id}")).collect();
            let payload = serde_json::json!({
                "from": from,
                "into": into,
                "from_name": a.name,
                "into_name": b.name,
                "from_formula": a.formula,
                "into_formula": b.formula,
                "spectra": moved,
                "reason": reason,
                "formulas_differ": differ,
            });
            let payload = sealed_payload_of(tx, &records, &[from, into], &payload)?;
            let event = append_event(
                tx,
                actor,
                "compound-merge",
                &format!("compound:{from}"),
                &payload,
            )?;
            Ok((
                Merge {
                    from,
                    into,
                    spectra: moved.clone(),
                    reason: reason.clone(),
                    formulas_differ: differ,
                    event,
                },
                moved,
            ))
        })?;
        Ok(merge)
    }
}

impl Library {
    /// The audit trail of one spectrum: its own events (record `spectrum:ID`) and every
    /// `compound-merge` that concerned it, in sequence order. A merge concerns a spectrum when
    /// it moved the spectrum, or when it merged another compound into the one the spectrum
    /// belonged to then (the merge event seals that spectrum's compound row too). Which
    /// compound that was is found walking the merges back from the spectrum's compound now:
    /// before a merge that moved it, it belonged to the merge's `from`.
    pub fn spectrum_log(&self, id: i64) -> Result<Vec<super::Event>> {
        let mut compound = self.spectrum(id)?.compound_id;
        let mut events = self.events(Some(&format!("spectrum:{id}")))?;
        let mut merges = self.events_of_action("compound-merge")?;
        merges.sort_by_key(|e| std::cmp::Reverse(e.seq));
        for e in merges {
            let moved = e.payload["spectra"]
                .as_array()
                .is_some_and(|s| s.iter().any(|v| v.as_i64() == Some(id)));
            if moved {
                compound = e.payload["from"].as_i64().unwrap_or(compound);
                events.push(e);
            } else if e.payload["into"].as_i64() == Some(compound) {
                events.push(e);
            }
        }
        events.sort_by_key(|e| e.seq);
        Ok(events)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::Outcome;
    use crate::library::testing::{add, ir};

    fn with(
        seed: u64,
        name: &str,
        cas: Option<&str>,
        formula: Option<&str>,
    ) -> super::super::Staged {
        let mut s = ir(seed, name, "alice");
        s.submission.metadata.cas = cas.map(str::to_string);
        s.submission.metadata.formula = formula.map(str::to_string);
        s
    }

    /// Regression test for issue 16: toluene stored once with its CAS RN and once without
    /// became two compounds. 108-88-3 is toluene's CAS RN (from memory; its check digit
    /// passes the CAS registry's published rule, `chem::check_cas`).
    #[test]
    fn a_second_toluene_warns_and_a_merge_joins_them_and_checks_clean() {
        let mut lib = Library::in_memory("t").unwrap();
        let a = add(
            &mut lib,
            &with(1, "Toluene", Some("108-88-3"), Some("C7H8")),
        );
        let out = lib
            .store(&[with(2, "  toluene ", None, None)], "bob", false)
            .unwrap();
        let Ok(
            o @ Outcome::Added {
                spectrum_id: b,
                compound_id,
                same_name,
            },
        ) = out[0]
        else {
            panic!("{out:?}")
        };
        let first = lib.spectrum(a).unwrap().compound_id;
        assert_eq!(same_name, Some(first));
        assert!(o.same_name_warning().unwrap().contains(&format!(
            "whorl compound merge {compound_id} {first} --reason"
        )));
        // A second spectrum of the new compound does not warn again.
        let out = lib
            .store(&[with(3, "TOLUENE", None, None)], "bob", false)
            .unwrap();
        assert!(matches!(
            out[0],
            Ok(Outcome::Added {
                same_name: None,
                ..
            })
        ));
        let c = lib.spectrum(b).unwrap().compound_id;
        assert_eq!(lib.compounds_named_alike(first).unwrap(), [c]);
        let generation = lib.generation().unwrap();

        // Refusals: itself, unknown ids, no reason.
        assert!(lib.merge_compounds(c, c, "carol", "same", false).is_err());
        assert!(matches!(
            lib.merge_compounds(c, 99, "carol", "same", false),
            Err(Error::NotFound {
                kind: "compound",
                id: 99
            })
        ));
        assert!(lib.merge_compounds(c, first, "carol", " ", false).is_err());

        let m = lib
            .merge_compounds(c, first, "carol", "the same toluene, CAS RN missing", false)
            .unwrap();
        assert_eq!(m.spectra.len(), 2);
        assert!(lib.generation().unwrap() > generation);
        for id in &m.spectra {
            assert_eq!(lib.spectrum(*id).unwrap().compound_id, first);
        }
        assert_eq!(lib.compound(c).unwrap().merged_into, Some(first));
        // The event seals both compound rows and every moved spectrum.
        let event = lib
            .events(Some(&format!("compound:{c}")))
            .unwrap()
            .pop()
            .unwrap();
        assert_eq!(event.action, "compound-merge");
        let rows = event.payload["rows"].as_object().unwrap();
        assert!(rows.contains_key(&format!("compound:{c}")));
        assert!(rows.contains_key(&format!("compound:{first}")));
        for id in &m.spectra {
            assert!(rows.contains_key(&format!("spectrum:{id}")));
        }
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
        // An edit of a moved spectrum's compound afterwards is found through the merge's seal.
        lib.conn
            .execute(
                "UPDATE spectrum SET compound_id = ?1 WHERE id = ?2",
                params![c, b],
            )
            .unwrap();
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(
            report
                .findings
                .iter()
                .any(|f| f.record == format!("spectrum:{b}")),
            "{:?}",
            report.findings
        );
        lib.conn
            .execute(
                "UPDATE spectrum SET compound_id = ?1 WHERE id = ?2",
                params![first, b],
            )
            .unwrap();
        // A later spectrum under the merged identity lands in the compound it went into.
        let d = add(&mut lib, &with(4, "toluene", None, None));
        assert_eq!(lib.spectrum(d).unwrap().compound_id, first);
        // Merging the merged compound again is refused, naming where it went.
        let err = lib
            .merge_compounds(c, first, "carol", "again", false)
            .unwrap_err();
        assert!(err.to_string().contains("already merged"), "{err}");
    }

    #[test]
    fn different_formulas_are_merged_only_when_the_caller_says_so() {
        let mut lib = Library::in_memory("t").unwrap();
        let a = add(
            &mut lib,
            &with(1, "acetone", Some("67-64-1"), Some("C3H6O")),
        );
        let b = add(&mut lib, &with(2, "acetone", None, Some("C3H8O")));
        let (ca, cb) = (
            lib.spectrum(a).unwrap().compound_id,
            lib.spectrum(b).unwrap().compound_id,
        );
        let err = lib
            .merge_compounds(cb, ca, "carol", "typo", false)
            .unwrap_err();
        assert!(err.to_string().contains("different formulas"), "{err}");
        assert_eq!(lib.spectrum(b).unwrap().compound_id, cb);
        let m = lib
            .merge_compounds(cb, ca, "carol", "C3H8O was a typo for C3H6O", true)
            .unwrap();
        assert!(m.formulas_differ);
        assert!(lib.check(&|_, _| {}).unwrap().findings.is_empty());
    }

    #[test]
    fn names_are_compared_after_nfkc_case_and_space_normalisation() {
        // NFKC maps full-width letters to ASCII (Unicode Standard Annex #15).
        assert_eq!(normalised_name("Ｔｏｌｕｅｎｅ"), "toluene");
        assert_eq!(normalised_name("  Acetic   Acid\t"), "acetic acid");
        assert_ne!(
            normalised_name("acetic acid"),
            normalised_name("aceticacid")
        );
    }
}
