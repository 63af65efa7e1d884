//! A search resolved once: the [`Request`] as asked, the [`Unknown`] as handed over, and the
//! [`Plan`] every path of a search reads (validated parameters and constraints, the recipe,
//! the ids a metadata query allows), so that nothing is looked up or checked twice.

use std::collections::{BTreeMap, HashSet};
use std::path::PathBuf;

use super::{Constraints, Thresholds};
use crate::config::Config;
use crate::error::Result;
use crate::library::{Library, Status};
use crate::prepare::{Recipe, Solvent, shared_solvent_regions};
use crate::score::ScoreParams;
use crate::spectrum::{XUnit, YUnit};
use crate::technique::Technique;

/// How many hits a search ranks at least, whatever `top` asks for: the verdict and the
/// warnings are judged on this deeper list (the lead over the next compound needs one), and
/// the list is then cut to `top`.
pub const VERDICT_DEPTH: usize = 20;

/// What to search for and how.
#[derive(Debug, Clone)]
pub struct Request {
    /// The technique of the unknown.
    pub technique: Technique,
    /// How many hits to return.
    pub top: usize,
    /// A metadata text query restricting the candidates.
    pub filter: Option<String>,
    /// Formula, mass, IHD, element and retention-index constraints.
    pub constraints: Constraints,
    /// List the candidates that the query or the constraints ruled out, with the reason.
    pub explain: bool,
    /// Which review statuses are searched.
    pub statuses: Vec<Status>,
    /// Scoring parameters.
    pub params: ScoreParams,
    /// Overrides of the derived warning thresholds (a library's `whorl.toml`).
    pub thresholds: Thresholds,
    /// The unknown's NMR solvent, compared with each hit's.
    pub solvent: Option<Solvent>,
}

impl Request {
    /// How many hits the ranking keeps: `top`, at least [`VERDICT_DEPTH`].
    pub fn depth(&self) -> usize {
        self.top.max(VERDICT_DEPTH)
    }

    /// A request with the technique's default parameters.
    pub fn new(technique: Technique) -> Request {
        Request {
            technique,
            top: 10,
            filter: None,
            constraints: Constraints::default(),
            explain: false,
            statuses: vec![Status::Verified],
            params: ScoreParams::default_for(technique),
            thresholds: Thresholds::default(),
            solvent: None,
        }
    }

    /// The request for a technique with every setting taken in one order of precedence:
    /// what the face was given (`given`), else the library's `whorl.toml` (`config`), else the
    /// built-in default. Flags that only pick or tune a measure are already in
    /// `given.params` (built over the technique's defaults); the file sets the spectral
    /// weight, the peak tolerance, `top` (per technique, then for every search) and the
    /// warning thresholds.
    pub fn resolve(technique: Technique, given: &Given, config: &Config) -> Request {
        let mut r = Request::new(technique);
        if let Some(p) = &given.params {
            r.params = p.clone();
        }
        if let Some(w) = config.spectral_weight(technique) {
            r.params.spectral_weight = w;
        }
        r.params.peak_tolerance = given
            .peak_tolerance
            .or(config.peak_tolerance(technique))
            .unwrap_or(r.params.peak_tolerance);
        r.top = given.top.unwrap_or(config.top(technique));
        r.thresholds = config.thresholds;
        r.solvent = given.solvent.or(config.solvent(technique));
        r
    }
}

/// What a face (the command line, later a form or an API call) was given for one search;
/// `None` where it was given nothing, so that [`Request::resolve`] falls back in order.
#[derive(Debug, Clone, Default)]
pub struct Given {
    /// Score parameters: the technique's defaults with the measure flags applied.
    pub params: Option<ScoreParams>,
    /// Peak-matching tolerance.
    pub peak_tolerance: Option<f64>,
    /// Hits listed.
    pub top: Option<usize>,
    /// The unknown's NMR solvent.
    pub solvent: Option<Solvent>,
}

/// An unknown spectrum file as the analyst hands it over: its technique and what they
/// declare about it (units when the file's are not the usual ones, the NMR solvent).
#[derive(Debug, Clone)]
pub struct Unknown {
    /// The technique it is searched as.
    pub technique: Technique,
    /// The spectrum file.
    pub file: PathBuf,
    /// Declared x unit, if not the technique's usual one.
    pub x_unit: Option<XUnit>,
    /// Declared y unit (else detected).
    pub y_unit: Option<YUnit>,
    /// NMR solvent.
    pub solvent: Option<Solvent>,
}

impl Unknown {
    /// An unknown file of a technique, with nothing declared.
    pub fn new(technique: Technique, file: impl Into<PathBuf>) -> Unknown {
        Unknown {
            technique,
            file: file.into(),
            x_unit: None,
            y_unit: None,
            solvent: None,
        }
    }
}

/// A search resolved once: the request with its score parameters and constraints validated,
/// the technique's recipe (unknowns are prepared with it, and the report records it), and
/// the ids the metadata query allows. The cached scan, exact scoring and the report all
/// read this one value.
#[derive(Debug, Clone)]
pub struct Plan {
    /// The request, validated.
    pub request: Request,
    /// The technique's preparation recipe.
    pub recipe: Recipe,
    /// The spectrum ids the metadata query matches (`None` without a query).
    pub allowed: Option<HashSet<i64>>,
    /// 1H NMR with [`ScoreParams::shared_solvent_masks`]: the solvent on record of every
    /// reference, by spectrum id (empty otherwise), for the masks a comparison shares
    /// ([`Plan::shared_masks`]).
    pub solvents: BTreeMap<i64, Option<Solvent>>,
}

impl Plan {
    /// Validates a request against a library and resolves what every stage needs.
    pub fn new(library: &Library, request: &Request) -> Result<Plan> {
        if request.top == 0 {
            return Err(crate::error::Error::invalid(
                "--top 0 asks for no hits at all",
                "give --top 1 or more (or set `top` to 1 or more in whorl.toml)",
            ));
        }
        request.params.validate(request.technique)?;
        request.constraints.validate()?;
        if request.constraints.ri.is_some() && request.technique != Technique::MsEi {
            return Err(crate::error::Error::invalid(
                format!(
                    "a retention-index window applies to GC-MS (EI) references only, not to {}",
                    request.technique
                ),
                "leave out --ri/--rt/--alkanes for this search; `identify` applies them to its EI search alone",
            ));
        }
        let recipe = library.recipe(request.technique)?.clone();
        let allowed = match &request.filter {
            Some(q) => Some(library.text().matching_ids(q)?),
            None => None,
        };
        let mut solvents = BTreeMap::new();
        if request.technique == Technique::Nmr1h && request.params.shared_solvent_masks {
            for (id, name) in library.solvents(request.technique)? {
                // Names are checked when they are stored; one this whorl does not know
                // masked nothing when it was prepared.
                solvents.insert(id, name.and_then(|n| n.parse::<Solvent>().ok()));
            }
        }
        Ok(Plan {
            request: request.clone(),
            recipe,
            allowed,
            solvents,
        })
    }

    /// The regions a comparison of the unknown with reference `spectrum_id` masks in both
    /// spectra: both solvents' signals when the two were measured in different solvents
    /// (or only one solvent is known), else none.
    pub fn shared_masks(&self, spectrum_id: i64) -> Vec<(f64, f64)> {
        if !(self.request.technique == Technique::Nmr1h && self.request.params.shared_solvent_masks)
        {
            return Vec::new();
        }
        let reference = self.solvents.get(&spectrum_id).copied().flatten();
        shared_solvent_regions(self.request.solvent, reference)
    }

    /// True when some comparison masks regions its two spectra were not both prepared with,
    /// so that scores are not the dot products of the stored vectors and the vector cache
    /// cannot bound them: the search then scores every candidate.
    pub fn masks_vary(&self) -> bool {
        self.request.technique == Technique::Nmr1h
            && self.request.params.shared_solvent_masks
            && self.solvents.values().any(|&s| s != self.request.solvent)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn searches_saved_before_shared_solvent_masks_replay_without_them() {
        // A saved search's parameters from before the field existed: each spectrum was
        // compared with only its own solvent masked, and a replay must do the same.
        let mut value = serde_json::to_value(ScoreParams::default_for(Technique::Nmr1h)).unwrap();
        assert_eq!(
            value
                .as_object_mut()
                .unwrap()
                .remove("shared_solvent_masks"),
            Some(serde_json::Value::Bool(true))
        );
        let old: ScoreParams = serde_json::from_value(value).unwrap();
        assert!(!old.shared_solvent_masks);
        assert!(!ScoreParams::default_for(Technique::Ir).shared_solvent_masks);
    }

    #[test]
    fn shared_masks_follow_the_two_solvents() {
        let library = Library::in_memory("t.tester").unwrap();
        let mut request = Request::new(Technique::Nmr1h);
        request.solvent = Some(Solvent::DmsoD6);
        let mut plan = Plan::new(&library, &request).unwrap();
        plan.solvents = BTreeMap::from([(1, Some(Solvent::Cdcl3)), (2, Some(Solvent::DmsoD6))]);
        // Different solvents: both solvents' windows; the same solvent: none.
        assert_eq!(plan.shared_masks(1).len(), 4);
        assert!(plan.shared_masks(2).is_empty());
        assert!(plan.masks_vary());
        plan.solvents.remove(&1);
        assert!(!plan.masks_vary());
        // Without the parameter nothing is shared.
        plan.request.params.shared_solvent_masks = false;
        plan.solvents.insert(1, Some(Solvent::Cdcl3));
        assert!(plan.shared_masks(1).is_empty() && !plan.masks_vary());
    }
}
