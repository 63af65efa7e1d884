//! Mixture fits on synthetic mixtures of library spectra at known ratios.

use std::collections::BTreeMap;

use super::*;
use crate::library::synthetic::{Rng, ir_points, ms_points, perturb, staged};
use crate::library::{Library, Outcome, Status, default_recipes};
use crate::search::Request;

/// Raw points, one list per spectrum.
type Points = Vec<Vec<(f64, f64)>>;

/// An in-memory library of `n` seeded synthetic spectra of one technique, named `c0`, `c1`,
/// ...: their raw points and spectrum ids.
fn library(technique: Technique, n: u64) -> (Library, Points, Vec<i64>) {
    let mut lib = Library::in_memory("t").unwrap();
    let mut points = Vec::new();
    let mut ids = Vec::new();
    for seed in 0..n {
        let mut rng = Rng::new(1000 + seed);
        let p = match technique {
            Technique::MsEi => ms_points(&mut rng),
            _ => ir_points(&mut rng),
        };
        let s = staged(
            &default_recipes(),
            technique,
            p.clone(),
            &format!("c{seed}"),
            &[],
        )
        .unwrap();
        match lib.store(&[s], "t", false).unwrap().remove(0) {
            Ok(Outcome::Added { spectrum_id, .. }) => ids.push(spectrum_id),
            other => panic!("{other:?}"),
        }
        points.push(p);
    }
    (lib, points, ids)
}

fn plan(lib: &Library, technique: Technique) -> Plan {
    let mut r = Request::new(technique);
    r.statuses.push(Status::Pending);
    Plan::new(lib, &r).unwrap()
}

/// EI points scaled as whorl prepares them (base peak 1, ions under 0.5 % dropped), then to
/// unit signal (sum 1), so that `w a + (1 - w) b` holds a share `w` of the signal from `a`.
fn ms_unit_signal(p: &[(f64, f64)]) -> BTreeMap<i64, f64> {
    let top = p.iter().map(|q| q.1).fold(0.0, f64::max);
    let kept: Vec<(i64, f64)> = p
        .iter()
        .map(|&(x, y)| (x.round() as i64, y / top))
        .filter(|&(_, r)| r >= 0.005)
        .collect();
    let sum: f64 = kept.iter().map(|k| k.1).sum();
    kept.into_iter().map(|(x, r)| (x, r / sum)).collect()
}

/// Two EI spectra mixed so that `w` of the signal comes from `a`.
fn ms_mix(a: &[(f64, f64)], b: &[(f64, f64)], w: f64) -> Vec<(f64, f64)> {
    let mut ions: BTreeMap<i64, f64> = BTreeMap::new();
    for (p, k) in [(a, w), (b, 1.0 - w)] {
        for (mz, y) in ms_unit_signal(p) {
            *ions.entry(mz).or_default() += k * y;
        }
    }
    ions.into_iter()
        .map(|(mz, y)| (mz as f64, 1000.0 * y))
        .collect()
}

fn prepared(technique: Technique, points: Vec<(f64, f64)>) -> Prepared {
    staged(&default_recipes(), technique, points, "unknown", &[])
        .unwrap()
        .prepared
}

fn fit(lib: &Library, technique: Technique, unknown: &Prepared, n: usize) -> Mixture {
    let plan = plan(lib, technique);
    let hits = plan.search(lib, unknown).unwrap().hits;
    fit_mixture(lib, &plan, unknown, &hits, n).unwrap()
}

fn share_of(m: &Mixture, id: i64) -> Option<f64> {
    m.components
        .iter()
        .find(|c| c.spectrum_id == id)
        .map(|c| c.share)
}

#[test]
fn two_ei_references_mixed_at_several_ratios_are_both_found_with_their_shares() {
    // The mixture is made as the definition of a share says (common practice for a linear
    // mixing model: signals add), so the fit must give the shares back; 0.02 absolute allows
    // for the ions under 0.5 % of the mixture's base peak that preparation drops.
    let (lib, points, ids) = library(Technique::MsEi, 12);
    for (a, b) in [(0, 1), (2, 5), (7, 3), (4, 11)] {
        for w in [0.5, 0.75, 10.0 / 11.0] {
            let u = prepared(Technique::MsEi, ms_mix(&points[a], &points[b], w));
            let m = fit(&lib, Technique::MsEi, &u, 3);
            let (sa, sb) = (share_of(&m, ids[a]), share_of(&m, ids[b]));
            assert!(
                sa.is_some() && sb.is_some(),
                "c{a} + c{b} at {w}: {:#?}",
                m.components
            );
            assert_eq!(m.components.len(), 2, "{:#?}", m.components);
            assert!((sa.unwrap() - w).abs() < 0.02, "c{a} {w}: {sa:?}");
            assert!((sb.unwrap() - (1.0 - w)).abs() < 0.02, "c{b} {w}: {sb:?}");
            assert!(m.explained > 0.999, "{}", m.explained);
            assert!(m.explained_by_best < m.explained);
            assert!(m.has_several());
            assert!(!m.coelution(), "{:?}", m.unexplained_ions);
        }
    }
}

#[test]
fn a_pure_compound_measured_again_gives_one_component() {
    // +-10 % on every ion, the scatter of a second measurement (common practice), must not
    // grow a second component.
    let (lib, points, ids) = library(Technique::MsEi, 12);
    for (k, p) in points.iter().enumerate() {
        let noisy = perturb(p, &mut Rng::new(77 + k as u64), 0.10);
        let m = fit(&lib, Technique::MsEi, &prepared(Technique::MsEi, noisy), 3);
        assert_eq!(m.components.len(), 1, "c{k}: {:#?}", m.components);
        assert_eq!(m.components[0].spectrum_id, ids[k]);
        assert!(!m.has_several());
        assert_eq!(m.explained, m.explained_by_best);
        assert!(m.explained > 0.95, "{}", m.explained);
        // The share of a sole component is the fraction of signal it explains, near 1.
        assert!((m.components[0].share - 1.0).abs() < 0.1);
        // Exactly the reference: explained 1, nothing to search in the residual.
        let exact = fit(
            &lib,
            Technique::MsEi,
            &prepared(Technique::MsEi, p.clone()),
            3,
        );
        assert_eq!(exact.components.len(), 1);
        assert!(exact.explained > 1.0 - 1e-9);
        assert!(!exact.coelution());
    }
}

#[test]
fn ions_of_a_compound_missing_from_the_library_are_flagged() {
    // c12 is not in the library (only c0..c11 are): its strong ions that c3 lacks are left
    // unexplained whatever the residual search finds, and are flagged as co-elution.
    let (lib, points, ids) = library(Technique::MsEi, 12);
    let stranger = ms_points(&mut Rng::new(1000 + 12));
    let u = prepared(Technique::MsEi, ms_mix(&points[3], &stranger, 0.6));
    let m = fit(&lib, Technique::MsEi, &u, 3);
    assert_eq!(m.components[0].spectrum_id, ids[3]);
    assert!(m.coelution());
    let mine = ms_unit_signal(&points[3]);
    let theirs = ms_unit_signal(&stranger);
    let top = theirs.values().copied().fold(0.0, f64::max);
    // The stranger's base peak, where c3 has no ion, is among the flagged ions (unless a
    // component happened to explain it).
    let (&base_mz, _) = theirs.iter().find(|&(_, &y)| y == top).unwrap();
    if !mine.contains_key(&base_mz) && m.components.len() == 1 {
        assert!(
            m.unexplained_ions.iter().any(|i| i.mz == base_mz as f64),
            "{:?}",
            m.unexplained_ions
        );
    }
    for ion in &m.unexplained_ions {
        assert!(ion.observed >= COELUTION_MIN_ABUNDANCE);
        assert!(ion.observed - ion.fitted >= COELUTION_UNEXPLAINED * ion.observed - 1e-12);
    }
}

#[test]
fn two_ir_references_mixed_at_several_ratios_are_both_found() {
    // IR absorbances add (Beer-Lambert, common practice), and preparation is linear but for
    // the baseline and the unit length, so mixing the prepared vectors' signal at known
    // shares and preparing the sum again must give both back; 0.005 absolute on the shares
    // allows for the baseline step acting on the sum.
    let (lib, _, ids) = library(Technique::Ir, 10);
    let recipe = default_recipes()[&Technique::Ir].clone();
    let grid = &recipe.grid;
    let vectors: Vec<Vec<f64>> = ids
        .iter()
        .map(|&id| {
            let v = lib.prepared(id).unwrap().vector;
            let s: f64 = v.iter().map(|&y| f64::from(y).max(0.0)).sum();
            v.iter().map(|&y| f64::from(y) / s).collect()
        })
        .collect();
    for (a, b) in [(0, 1), (2, 6), (8, 5)] {
        for w in [0.5, 0.75, 10.0 / 11.0] {
            let points: Vec<(f64, f64)> = (0..grid.len())
                .map(|i| (grid.x(i), w * vectors[a][i] + (1.0 - w) * vectors[b][i]))
                .collect();
            let u = prepared(Technique::Ir, points);
            let m = fit(&lib, Technique::Ir, &u, 3);
            let (sa, sb) = (share_of(&m, ids[a]), share_of(&m, ids[b]));
            assert!(sa.is_some() && sb.is_some(), "{:#?}", m.components);
            assert!((sa.unwrap() - w).abs() < 0.005, "c{a} at {w}: {sa:?}");
            assert!(
                (sb.unwrap() - (1.0 - w)).abs() < 0.005,
                "c{b} at {w}: {sb:?}"
            );
            assert!(m.unexplained_ions.is_empty(), "EI only");
        }
    }
}

#[test]
fn two_explain_more_tells_a_mixture_from_a_pure_compound() {
    let (lib, points, _) = library(Technique::MsEi, 12);
    let plan = plan(&lib, Technique::MsEi);
    let mixed = prepared(Technique::MsEi, ms_mix(&points[1], &points[6], 0.7));
    let list = plan.search(&lib, &mixed).unwrap();
    assert!(two_explain_more(&lib, &plan, &mixed, &list).unwrap());
    let pure = prepared(Technique::MsEi, perturb(&points[1], &mut Rng::new(5), 0.10));
    let list = plan.search(&lib, &pure).unwrap();
    assert!(!two_explain_more(&lib, &plan, &pure, &list).unwrap());
}

#[test]
fn one_component_asked_for_is_the_best_hit_alone() {
    let (lib, points, ids) = library(Technique::MsEi, 6);
    let u = prepared(Technique::MsEi, ms_mix(&points[0], &points[1], 0.5));
    let m = fit(&lib, Technique::MsEi, &u, 1);
    assert_eq!(m.components.len(), 1);
    assert!(ids[..2].contains(&m.components[0].spectrum_id));
    assert_eq!(m.explained, m.explained_by_best);
}

#[test]
fn carbon_peak_lists_and_impossible_counts_are_refused() {
    let (lib, points, _) = library(Technique::MsEi, 3);
    let u = prepared(Technique::MsEi, points[0].clone());
    let plan = plan(&lib, Technique::MsEi);
    for n in [0, MAX_COMPONENTS + 1] {
        let e = fit_mixture(&lib, &plan, &u, &[], n).unwrap_err();
        assert!(e.to_string().contains("components"), "{e}");
    }
    let carbon = plan_for_carbon(&lib);
    let e = fit_mixture(&lib, &carbon, &u, &[], 2).unwrap_err();
    assert!(e.to_string().contains("13C"), "{e}");
    // No hits: nothing to fit, nothing explained.
    let m = fit_mixture(&lib, &plan, &u, &[], 2).unwrap();
    assert!(m.components.is_empty() && m.explained == 0.0);
}

fn plan_for_carbon(lib: &Library) -> Plan {
    plan(lib, Technique::Nmr13c)
}

/// The first `n` spectra of `real-spectra/ei-ms/` (PNNL GC-MS metabolite library, see its
/// README) of distinct InChIKeys, as raw points, in manifest order.
fn real_ei(n: usize) -> Vec<Vec<(f64, f64)>> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("real-spectra/ei-ms");
    let manifest = std::fs::read_to_string(dir.join("manifest.csv")).unwrap();
    let mut seen = std::collections::HashSet::new();
    let mut out = Vec::new();
    for line in manifest.lines().skip(1) {
        let cols: Vec<&str> = line.split(',').collect();
        // file, technique, name, tags, ri, inchikey: names hold no commas before the key in
        // the rows read here; a row whose key does not look like one is skipped.
        let (file, key) = (cols[0], cols[5]);
        if key.len() != 27 || !seen.insert(key.to_string()) {
            continue;
        }
        let text = std::fs::read_to_string(dir.join(file)).unwrap();
        let points = text
            .lines()
            .skip(1)
            .map(|l| {
                let (x, y) = l.split_once(',').unwrap();
                (x.parse().unwrap(), y.parse().unwrap())
            })
            .collect();
        out.push(points);
        if out.len() == n {
            break;
        }
    }
    out
}

#[test]
fn real_ei_spectra_mixed_in_pairs_are_both_found_most_of_the_time() {
    // Real spectra (PNNL GC-MS metabolite library, real-spectra/ei-ms/) in a library of 40;
    // 8 pairs at 1:1, 3:1 and 10:1 by signal. Acceptance: both found in at least 20 of the
    // 24 mixtures and every share within 0.05 where both are found (the whole-set figures are
    // in docs/evaluation-mixture.md).
    let points = real_ei(40);
    let mut lib = Library::in_memory("t").unwrap();
    let mut ids = Vec::new();
    for (k, p) in points.iter().enumerate() {
        let s = staged(
            &default_recipes(),
            Technique::MsEi,
            p.clone(),
            &format!("r{k}"),
            &[],
        )
        .unwrap();
        match lib.store(&[s], "t", false).unwrap().remove(0) {
            Ok(Outcome::Added { spectrum_id, .. }) => ids.push(spectrum_id),
            other => panic!("{other:?}"),
        }
    }
    let mut found = 0;
    let mut total = 0;
    for k in 0..8 {
        let (a, b) = (k * 5 % 40, (k * 5 + 17) % 40);
        for w in [0.5, 0.75, 10.0 / 11.0] {
            let u = prepared(Technique::MsEi, ms_mix(&points[a], &points[b], w));
            let m = fit(&lib, Technique::MsEi, &u, 3);
            total += 1;
            if let (Some(sa), Some(sb)) = (share_of(&m, ids[a]), share_of(&m, ids[b])) {
                found += 1;
                assert!(
                    (sa - w).abs() < 0.05 && (sb - (1.0 - w)).abs() < 0.05,
                    "{sa} {sb} at {w}"
                );
            }
        }
    }
    assert!(found >= 20, "both found in {found} of {total}");
}
