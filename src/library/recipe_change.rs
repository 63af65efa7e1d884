//! Changing a technique's preparation recipe after the library was made: every spectrum of the
//! technique is prepared again from its raw points, in one transaction, and the change is
//! recorded in the audit trail.
//!
//! The raw points, metadata, statuses and sign-offs stay as they are: a sign-off covers the
//! measurement and what it says it is, and the prepared form is derived from the raw points by
//! the recipe. The state hash changes (it covers the recipes), so saved searches made before
//! the change replay as different and `whorl replay` names this event as the reason.

use rayon::prelude::*;
use rusqlite::{Connection, params};
use serde::Serialize;

use super::events::append_event;
use super::stage::prepare_stored;
use super::store::update_prepared;
use super::{Library, Metadata, check_recipes};
use crate::error::{Error, Result};
use crate::prepare::{Prepared, Recipe};
use crate::technique::Technique;

/// Spectra prepared again per round trip to SQLite: bounds the raw points held in memory.
const CHUNK: usize = 512;

/// What a recipe change did.
#[derive(Debug, Clone, Serialize)]
pub struct RecipeChange {
    /// The technique whose recipe changed.
    pub technique: Technique,
    /// The recipe before (`None` when the library had none for the technique).
    pub from: Option<Recipe>,
    /// The recipe now.
    pub to: Recipe,
    /// Spectra prepared again, of every status.
    pub spectra: usize,
    /// The library's state hash before the change.
    pub state_hash_before: String,
    /// The library's state hash after it.
    pub state_hash_after: String,
}

impl Library {
    /// Replaces the recipe of `recipe.technique` and prepares every spectrum of that technique
    /// again with it. All or nothing: if any spectrum cannot be prepared with the new recipe,
    /// nothing changes and the error names the spectrum. `progress(done, total)` is called as
    /// spectra are prepared.
    pub fn change_recipe(
        &mut self,
        recipe: Recipe,
        actor: &str,
        reason: &str,
        progress: &(dyn Fn(usize, usize) + Sync),
    ) -> Result<RecipeChange> {
        let technique = recipe.technique;
        let reason = reason.trim();
        if reason.is_empty() {
            return Err(Error::invalid(
                "a recipe change needs a reason",
                "say why with --reason TEXT; it goes into the audit trail",
            ));
        }
        check_recipes(&[(technique, recipe.clone())].into_iter().collect())?;
        let from = self.recipes.get(&technique).cloned();
        if from.as_ref() == Some(&recipe) {
            return Err(Error::invalid(
                format!("the {technique} recipe already is the one asked for"),
                "nothing to change; `whorl recipe` shows the current recipes",
            ));
        }
        let state_hash_before = self.state_hash()?;
        let spectra = self.write(|tx| {
            let n = reprepare_all(tx, &recipe, progress)?;
            tx.execute(
                "INSERT INTO recipe (technique, recipe) VALUES (?1, ?2)
                 ON CONFLICT (technique) DO UPDATE SET recipe = excluded.recipe",
                params![technique.name(), serde_json::to_string(&recipe)?],
            )?;
            let payload = serde_json::json!({
                "technique": technique,
                "from": from,
                "to": recipe,
                "reason": reason,
                "spectra": n,
            });
            append_event(
                tx,
                actor,
                "recipe",
                &format!("recipe:{technique}"),
                &payload,
            )?;
            Ok((n, vec![]))
        })?;
        self.recipes.insert(technique, recipe.clone());
        Ok(RecipeChange {
            technique,
            from,
            to: recipe,
            spectra,
            state_hash_before,
            state_hash_after: self.state_hash()?,
        })
    }
}

/// Prepares every spectrum of the recipe's technique again and stores the result; returns how
/// many there were.
fn reprepare_all(
    tx: &Connection,
    recipe: &Recipe,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<usize> {
    let ids: Vec<i64> = {
        let mut stmt = tx.prepare("SELECT id FROM spectrum WHERE technique = ?1 ORDER BY id")?;
        stmt.query_map([recipe.technique.name()], |r| r.get(0))?
            .collect::<rusqlite::Result<_>>()?
    };
    let total = ids.len();
    let done = std::sync::atomic::AtomicUsize::new(0);
    progress(0, total);
    for chunk in ids.chunks(CHUNK) {
        let mut inputs = Vec::with_capacity(chunk.len());
        for &id in chunk {
            inputs.push(tx.query_row(
                "SELECT s.raw, s.x_unit, s.y_unit, r.metadata FROM spectrum s
                 JOIN revision r ON r.spectrum_id = s.id AND r.number = s.current_revision
                 WHERE s.id = ?1",
                [id],
                |r| {
                    Ok((
                        id,
                        r.get::<_, Vec<u8>>(0)?,
                        r.get::<_, String>(1)?,
                        r.get::<_, String>(2)?,
                        r.get::<_, String>(3)?,
                    ))
                },
            )?);
        }
        let prepared: Vec<(i64, Prepared)> = inputs
            .par_iter()
            .map(|(id, raw, x_unit, y_unit, metadata)| {
                let again = prepare_one(recipe, *id, raw, x_unit, y_unit, metadata);
                let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
                progress(n, total);
                again.map(|p| (*id, p))
            })
            .collect::<Result<_>>()?;
        for (id, p) in &prepared {
            update_prepared(tx, *id, p)?;
        }
    }
    Ok(total)
}

/// One spectrum prepared with the new recipe, from its stored raw points, units and solvent.
fn prepare_one(
    recipe: &Recipe,
    id: i64,
    raw: &[u8],
    x_unit: &str,
    y_unit: &str,
    metadata: &str,
) -> Result<Prepared> {
    let why = |e: Error| {
        Error::invalid(
            format!("spectrum {id} cannot be prepared with the new recipe: {e}"),
            "nothing was changed; every spectrum of the technique, withdrawn ones too, must prepare under the new recipe",
        )
    };
    let metadata: Metadata = serde_json::from_str(metadata)?;
    prepare_stored(id, recipe, raw, x_unit, y_unit, metadata.solvent.as_deref()).map_err(why)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::library::testing::{add, ir, ms};

    /// Two IR spectra (one approved) and one EI mass spectrum.
    fn mixed() -> Library {
        let mut lib = Library::in_memory("t").unwrap();
        let a = add(&mut lib, &ir(1, "acetone", "alice"));
        add(&mut lib, &ir(2, "butanone", "alice"));
        add(&mut lib, &ms(3, "ethanol", "alice"));
        lib.review(a, "bob", crate::library::Decision::Approve, None, None)
            .unwrap();
        lib
    }

    /// The default IR recipe on a grid half as fine, which changes every IR vector's length.
    fn coarser() -> Recipe {
        let mut r = Recipe::default_for(Technique::Ir);
        r.grid.step = 4.0;
        r
    }

    #[test]
    fn every_spectrum_of_the_technique_is_prepared_again() {
        let mut lib = mixed();
        let ms_before = lib.prepared(3).unwrap().vector;
        let state_hash = lib.state_hash().unwrap();
        let change = lib
            .change_recipe(coarser(), "admin", "coarser grid", &|_, _| {})
            .unwrap();
        assert_eq!(change.spectra, 2);
        assert_eq!(change.state_hash_before, state_hash);
        assert_ne!(change.state_hash_after, state_hash);
        assert_eq!(lib.recipe(Technique::Ir).unwrap(), &coarser());
        for id in [1, 2] {
            let p = lib.prepared(id).unwrap();
            assert_eq!(p.vector.len(), coarser().grid.len(), "spectrum {id}");
        }
        assert_eq!(lib.prepared(3).unwrap().vector, ms_before);
        // Statuses and sign-offs stay.
        assert_eq!(
            lib.spectrum(1).unwrap().status,
            crate::library::Status::Verified
        );
        let event = lib.events(Some("recipe:ir")).unwrap().pop().unwrap();
        assert_eq!(
            (event.action.as_str(), event.actor.as_str()),
            ("recipe", "admin")
        );
        assert_eq!(event.payload["spectra"], 2);
        assert_eq!(event.payload["reason"], "coarser grid");
        assert_eq!(event.payload["to"]["grid"]["step"], 4.0);
        // Stored vectors, recipes and events agree: check prepares everything again.
        let report = lib.check(&|_, _| {}).unwrap();
        assert!(report.findings.is_empty(), "{:?}", report.findings);
    }

    #[test]
    fn a_recipe_one_spectrum_cannot_take_changes_nothing() {
        let mut lib = mixed();
        let (events, before) = (lib.last_event().unwrap(), lib.prepared(1).unwrap());
        // Masking the whole grid leaves no signal in any spectrum.
        let mut blind = Recipe::default_for(Technique::Ir);
        blind.grid.masks = vec![(0.0, 5000.0)];
        let err = lib
            .change_recipe(blind, "admin", "test", &|_, _| {})
            .unwrap_err()
            .to_string();
        // Either IR spectrum may be the one named: they are prepared in parallel.
        assert!(
            err.contains("cannot be prepared with the new recipe"),
            "{err}"
        );
        assert_eq!(
            lib.recipe(Technique::Ir).unwrap(),
            &Recipe::default_for(Technique::Ir)
        );
        assert_eq!(lib.prepared(1).unwrap().vector, before.vector);
        assert_eq!(lib.last_event().unwrap(), events);
        // Nor does the same recipe, or a change without a reason.
        let same = Recipe::default_for(Technique::Ir);
        assert!(
            lib.change_recipe(same, "admin", "again", &|_, _| {})
                .is_err()
        );
        assert!(
            lib.change_recipe(coarser(), "admin", " ", &|_, _| {})
                .is_err()
        );
    }
}
