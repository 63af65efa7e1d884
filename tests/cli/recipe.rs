//! `whorl recipe`: changing a technique's preparation after the library was made.

use rusqlite::Connection;

use crate::util::{Lab, hint, seed};

#[test]
fn a_changed_recipe_prepares_the_library_as_a_new_library_with_that_recipe_would() {
    // The library changed after the fact ...
    let changed = Lab::seeded();
    let before = changed.state_hash();
    let out = changed.ok(&[
        "recipe",
        "ir",
        "--baseline",
        "als",
        "--mask",
        "diamond-atr",
        "--reason",
        "ATR accessory fitted",
        "--by",
        "q.manager",
    ]);
    assert!(out.contains("prepared again: 44 ir spectra"), "{out}");
    assert_ne!(changed.state_hash(), before);
    // ... and one made with that recipe from the start hold the same prepared data: equal
    // state hashes (recipes and searchable records) and identical hit lists.
    let fresh = Lab::empty();
    fresh.ok(&["init", "--ir-baseline", "als", "--ir-mask", "diamond-atr"]);
    fresh.ok(&["import", seed().join("manifest.csv").to_str().unwrap()]);
    fresh.approve_all();
    assert_eq!(changed.state_hash(), fresh.state_hash());
    let unknown = seed().join("unknowns/u01.ir.csv");
    let search = [
        "search",
        unknown.to_str().unwrap(),
        "-t",
        "ir",
        "--top",
        "5",
    ];
    let (a, b) = (changed.json(&search), fresh.json(&search));
    assert_eq!(a["hits"], b["hits"]);
    // Every stored vector was replaced: check prepares each spectrum again and compares.
    let report = changed.json(&["check"]);
    assert_eq!(report["findings"].as_array().unwrap().len(), 0, "{report}");
    // Statuses and sign-offs are untouched; the change is in the audit trail with its reason.
    let list = changed.json(&["list"]);
    let verified = list
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["status"] == "verified")
        .count();
    assert_eq!(verified, 220);
    let log = changed.ok(&["log"]);
    let last = log.lines().last().unwrap();
    assert!(
        last.contains("q.manager") && last.contains("recipe:ir") && last.contains("ATR accessory"),
        "{last}"
    );
}

#[test]
fn a_search_saved_before_a_recipe_change_replays_as_different_and_names_the_change() {
    let lab = Lab::seeded();
    let unknown = seed().join("unknowns/u01.ir.csv");
    lab.ok(&[
        "search",
        unknown.to_str().unwrap(),
        "-t",
        "ir",
        "--save",
        "saved.json",
    ]);
    lab.ok(&[
        "recipe",
        "ir",
        "--baseline",
        "rubber-band",
        "--reason",
        "sloping baselines",
    ]);
    let text = lab.fails(&["replay", "saved.json"], 5);
    assert!(text.contains("recipe recipe:ir"), "{text}");
}

#[test]
fn bad_recipe_changes_are_refused_and_change_nothing() {
    let lab = Lab::seeded();
    // No reason.
    let text = lab.refuses(&["recipe", "ir", "--baseline", "als"], 3);
    assert!(hint(&text).contains("--reason"), "{text}");
    // Baseline removal is for IR and Raman.
    let text = lab.refuses(
        &["recipe", "nmr-1h", "--baseline", "als", "--reason", "x"],
        3,
    );
    assert!(text.contains("do not apply to nmr-1h"), "{text}");
    // The recipe it already has (Raman defaults to the rubber band).
    let text = lab.refuses(
        &[
            "recipe",
            "raman",
            "--baseline",
            "rubber-band",
            "--reason",
            "x",
        ],
        3,
    );
    assert!(text.contains("already is"), "{text}");
    // A recipe under which a spectrum cannot be prepared: all or nothing.
    let text = lab.refuses(&["recipe", "ir", "--mask", "300-4100", "--reason", "x"], 3);
    assert!(
        text.contains("cannot be prepared with the new recipe"),
        "{text}"
    );
    assert!(hint(&text).contains("nothing was changed"), "{text}");
    // ALS parameters without ALS.
    lab.refuses(&["recipe", "ir", "--als-p", "0.1", "--reason", "x"], 3);
}

#[test]
fn a_recipe_edited_outside_whorl_is_found_by_check() {
    let lab = Lab::seeded();
    lab.ok(&["recipe", "ir", "--baseline", "als", "--reason", "x"]);
    let conn = Connection::open(lab.library().join("library.sqlite")).unwrap();
    conn.execute_batch(
        "UPDATE recipe SET recipe = replace(recipe, '\"lambda\":100000.0', '\"lambda\":1000.0') WHERE technique = 'ir';",
    )
    .unwrap();
    let text = lab.fails(&["check"], 5);
    assert!(
        text.contains("recipe:ir: the recipe differs from the one its events record"),
        "{text}"
    );
    conn.execute_batch(
        "PRAGMA foreign_keys = OFF; DELETE FROM recipe WHERE technique = 'nmr-13c';",
    )
    .unwrap();
    let text = lab.fails(&["check"], 5);
    assert!(
        text.contains("recipe:nmr-13c: its events record a recipe but the recipe table has none"),
        "{text}"
    );
}

#[test]
fn recipes_are_listed_and_defaults_restore_a_technique() {
    let lab = Lab::new();
    let all = lab.json(&["recipe"]);
    assert_eq!(all.as_array().unwrap().len(), 5);
    lab.ok(&["recipe", "ir", "--baseline", "als", "--reason", "trial"]);
    let ir = lab.json(&["recipe", "ir"]);
    assert_eq!(ir[0]["baseline"]["method"], "als", "{ir}");
    lab.ok(&["recipe", "ir", "--defaults", "--reason", "trial over"]);
    assert_eq!(lab.json(&["recipe", "ir"])[0], all[0]);
}
