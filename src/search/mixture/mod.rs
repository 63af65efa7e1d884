//! Mixtures and co-elution: the unknown fitted as a non-negative combination of library
//! spectra, found one at a time by searching what the components so far leave unexplained.
//!
//! The first component is the hit list's best hit. Each further step fits the unknown by
//! non-negative least squares ([`crate::score::nnls`], Lawson & Hanson 1974) on the
//! components so far, clips the residual at zero (what the unknown has and the fit lacks),
//! searches that residual against the library under the same plan (statuses, metadata query,
//! scoring), and tries the first [`CANDIDATES`] new compounds it ranks: the one whose joint
//! fit explains most is added if it explains a material part of what was left
//! ([`MIN_RELATIVE_GAIN`], [`MIN_GAIN`]). It stops at the asked number of components, when
//! nothing is left, or when no candidate is material.
//!
//! A component is evidence that a library spectrum accounts for part of the unknown's
//! signal, not proof that the compound is present; a share is a share of signal (total ion
//! current for EI), not of amount, since compounds respond differently.

use serde::{Deserialize, Serialize};

use super::confidence::Verdict;
use super::hit::Hit;
use super::plan::Plan;
use super::rank::HitList;
use crate::error::{Error, Result};
use crate::library::Library;
use crate::prepare::{Peak, Prepared};
use crate::score::nnls;
use crate::technique::{Grid, Technique};

/// The most components a fit may ask for.
pub const MAX_COMPONENTS: usize = 5;

/// The components fitted unless asked otherwise.
pub const DEFAULT_COMPONENTS: usize = 3;

/// How many new compounds of each residual search are tried as the next component.
pub const CANDIDATES: usize = 5;

/// A new component must remove at least this fraction of the squared residual the
/// components before it left: |r_before|^2 - |r_after|^2 >= 0.5 |r_before|^2. Chosen with
/// [`MIN_GAIN`] on the tuning part of `examples/evaluate_mixture` (real EI spectra mixed in
/// pairs, `docs/evaluation-mixture.md`): of the grid tried (0.25, 0.5, 0.75 by 0.0005, 0.002,
/// 0.01), 0.5 and 0.002 kept 117 of 120 pure spectra measured again (+-10 % per ion) as one
/// component while finding both spectra of 45 of 60 noisy 10:1 mixtures; a lower threshold
/// found more 10:1 mixtures only by splitting more pure spectra, a higher one the reverse.
pub const MIN_RELATIVE_GAIN: f64 = 0.5;

/// A new component must also raise the explained fraction by at least this much, so that
/// a residual of scatter or rounding alone never grows a component. Chosen with
/// [`MIN_RELATIVE_GAIN`] on the same tuning data (at 0.01 most 10:1 mixtures were missed).
pub const MIN_GAIN: f64 = 0.002;

/// EI: ions of the unknown at least this abundant, relative to its base peak, are checked
/// for co-elution. Chosen with [`COELUTION_UNEXPLAINED`] on the tuning part of
/// `examples/evaluate_mixture`: no pure spectrum measured again was flagged at any setting
/// of the grid (0.02, 0.05, 0.1 by 0.3, 0.5, 0.7), so the most sensitive abundance was taken.
pub const COELUTION_MIN_ABUNDANCE: f64 = 0.02;

/// EI: an ion is unexplained when what the fit leaves of it (observed - fitted, at least 0)
/// is at least this fraction of the observed abundance. The middle of the tuning grid
/// (see [`COELUTION_MIN_ABUNDANCE`]): it keeps a margin for weak ions, which scatter more
/// between measurements than the tuning data's +-10 %.
pub const COELUTION_UNEXPLAINED: f64 = 0.5;

/// One library spectrum of a mixture fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Component {
    /// Library spectrum id.
    pub spectrum_id: i64,
    /// Compound id.
    pub compound_id: i64,
    /// Compound name.
    pub name: String,
    /// Formula.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub formula: Option<String>,
    /// The fitted share of the unknown's signal: the coefficient times the component's
    /// signal (sum of its positive prepared values) over the unknown's. The shares add up to
    /// about the explained part; a share is of signal, not of amount.
    pub share: f64,
    /// The non-negative least-squares coefficient on the prepared vectors.
    pub coefficient: f64,
    /// The combined score of this spectrum against what it was found in: the unknown itself
    /// for the first component, the residual the components before it left for the others.
    pub score: f64,
    /// 1 for the best hit, 2 for the component found in the first residual, and so on.
    pub step: usize,
}

/// An EI ion of the unknown that no component explains: a sign of co-elution.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct UnexplainedIon {
    /// Nominal m/z.
    pub mz: f64,
    /// Observed abundance relative to the unknown's base peak.
    pub observed: f64,
    /// The fitted abundance (sum of the components), on the same scale.
    pub fitted: f64,
}

/// The unknown fitted as a mixture of library spectra.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Mixture {
    /// The components, in the order they were found.
    pub components: Vec<Component>,
    /// The fraction of the unknown the components explain together,
    /// 1 - |u - A x|^2 / |u|^2 for the prepared unknown u, the components' prepared vectors A
    /// and the non-negative least-squares coefficients x (the uncentred R^2 of the fit).
    pub explained: f64,
    /// The same fraction for the best hit alone.
    pub explained_by_best: f64,
    /// EI: ions of the unknown at or above [`COELUTION_MIN_ABUNDANCE`] of its base peak of
    /// which at least [`COELUTION_UNEXPLAINED`] is left unexplained; empty for other
    /// techniques.
    pub unexplained_ions: Vec<UnexplainedIon>,
    /// The thresholds the fit ran with.
    pub settings: MixtureSettings,
}

impl Mixture {
    /// Whether the fit needed more than one component: a second library spectrum explained
    /// clearly more of the unknown than the best hit alone (at least [`MIN_RELATIVE_GAIN`] of
    /// what the best hit left, and [`MIN_GAIN`] of the whole).
    pub fn has_several(&self) -> bool {
        self.components.len() > 1
    }

    /// The verdict a hit list takes when the fit needed more than one component
    /// ([`Mixture::has_several`]): possibly a mixture, naming each compound once, largest
    /// share first. `None` for a fit that kept to the best hit.
    pub fn verdict(&self) -> Option<Verdict> {
        if !self.has_several() {
            return None;
        }
        let mut by_share: Vec<&Component> = self.components.iter().collect();
        by_share.sort_by(|a, b| b.share.total_cmp(&a.share).then(a.step.cmp(&b.step)));
        let mut seen = std::collections::HashSet::new();
        let components = by_share
            .into_iter()
            .filter(|c| seen.insert(c.compound_id))
            .map(|c| c.name.clone())
            .collect();
        Some(Verdict::PossibleMixture { components })
    }

    /// EI: whether some abundant ion is left unexplained ([`Mixture::unexplained_ions`]), a
    /// sign of a co-eluting compound the components do not account for.
    pub fn coelution(&self) -> bool {
        !self.unexplained_ions.is_empty()
    }
}

/// The thresholds of a mixture fit; [`Default`] gives the documented constants.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MixtureSettings {
    /// The most components fitted, 1..=[`MAX_COMPONENTS`].
    pub max_components: usize,
    /// [`MIN_RELATIVE_GAIN`].
    pub min_relative_gain: f64,
    /// [`MIN_GAIN`].
    pub min_gain: f64,
    /// [`COELUTION_MIN_ABUNDANCE`].
    pub coelution_min_abundance: f64,
    /// [`COELUTION_UNEXPLAINED`].
    pub coelution_unexplained: f64,
}

impl Default for MixtureSettings {
    fn default() -> MixtureSettings {
        MixtureSettings {
            max_components: DEFAULT_COMPONENTS,
            min_relative_gain: MIN_RELATIVE_GAIN,
            min_gain: MIN_GAIN,
            coelution_min_abundance: COELUTION_MIN_ABUNDANCE,
            coelution_unexplained: COELUTION_UNEXPLAINED,
        }
    }
}

/// Fits an unknown as a mixture of up to `max_components` library spectra, starting from its
/// hit list `hits` (searched under `plan`), with the default thresholds; see the module
/// documentation for the steps. Residuals are searched under `plan` without its constraints
/// (a formula, a mass or a retention index describes the unknown's main compound, not the
/// others) and without `explain`.
///
/// Errors: 13C NMR (peak lists carry positions, not intensities to fit), a
/// `max_components` outside 1..=[`MAX_COMPONENTS`], and the library's own errors.
pub fn fit_mixture(
    library: &Library,
    plan: &Plan,
    unknown: &Prepared,
    hits: &[Hit],
    max_components: usize,
) -> Result<Mixture> {
    let settings = MixtureSettings {
        max_components,
        ..MixtureSettings::default()
    };
    fit_mixture_with(library, plan, unknown, hits, &settings)
}

/// [`fit_mixture`] with other thresholds (the evaluation tunes them with it).
pub fn fit_mixture_with(
    library: &Library,
    plan: &Plan,
    unknown: &Prepared,
    hits: &[Hit],
    settings: &MixtureSettings,
) -> Result<Mixture> {
    let max_components = settings.max_components;
    let technique = plan.request.technique;
    if technique == Technique::Nmr13c {
        return Err(Error::invalid(
            "a mixture fit needs intensities, and 13C peak lists carry positions only",
            "fit mixtures of IR, Raman, EI-MS or 1H NMR spectra; for 13C compare the hit list's peaks by hand",
        ));
    }
    if !(1..=MAX_COMPONENTS).contains(&max_components) {
        return Err(Error::invalid(
            format!("{max_components} components asked for; a fit takes 1 to {MAX_COMPONENTS}"),
            format!("give a number of components from 2 to {MAX_COMPONENTS}"),
        ));
    }
    let keep = Keep::of(plan, unknown);
    let u = keep.vector(&unknown.vector);
    let mut residual_plan = plan.clone();
    residual_plan.request.constraints = Default::default();
    residual_plan.request.explain = false;
    residual_plan.request.top = CANDIDATES + max_components;

    let Some(best) = hits.first() else {
        return Ok(Mixture {
            components: Vec::new(),
            explained: 0.0,
            explained_by_best: 0.0,
            unexplained_ions: Vec::new(),
            settings: *settings,
        });
    };
    let mut chosen = vec![Chosen {
        hit: best.clone(),
        vector: keep.vector(&library.prepared(best.spectrum_id)?.vector),
        score: best.score,
        step: 1,
    }];
    let mut fit = Fit::of(&u, &chosen);
    let explained_by_best = fit.explained;
    let mut step = 1;
    while chosen.len() < max_components {
        step += 1;
        let Some(residual) = residual_of(&plan.recipe.grid, unknown, &u, &fit, &keep) else {
            break;
        };
        let list: HitList = residual_plan.search(library, &residual)?;
        let mut best_next: Option<(Fit, Chosen)> = None;
        for h in list
            .hits
            .iter()
            .filter(|h| chosen.iter().all(|c| c.hit.compound_id != h.compound_id))
            .take(CANDIDATES)
        {
            let mut trial = chosen.clone();
            trial.push(Chosen {
                hit: h.clone(),
                vector: keep.vector(&library.prepared(h.spectrum_id)?.vector),
                score: h.score,
                step,
            });
            let f = Fit::of(&u, &trial);
            if best_next
                .as_ref()
                .is_none_or(|(b, _)| f.explained > b.explained)
            {
                let added = trial.pop().expect("the candidate just pushed");
                best_next = Some((f, added));
            }
        }
        let Some((next_fit, next)) = best_next else {
            break;
        };
        let left = 1.0 - fit.explained;
        let gain = next_fit.explained - fit.explained;
        if gain < settings.min_gain || gain < settings.min_relative_gain * left {
            break;
        }
        chosen.push(next);
        // A component the joint fit no longer needs (coefficient 0) is dropped: the newer one
        // explains what it did.
        let kept: Vec<bool> = next_fit.x.iter().map(|&x| x > 0.0).collect();
        let mut k = kept.iter();
        chosen.retain(|_| *k.next().expect("one coefficient per component"));
        fit = Fit::of(&u, &chosen);
    }

    let unknown_signal = positive_sum(&u);
    let components = chosen
        .iter()
        .zip(&fit.x)
        .map(|(c, &x)| Component {
            spectrum_id: c.hit.spectrum_id,
            compound_id: c.hit.compound_id,
            name: c.hit.name.clone(),
            formula: c.hit.formula.clone(),
            share: if unknown_signal > 0.0 {
                x * positive_sum(&c.vector) / unknown_signal
            } else {
                0.0
            },
            coefficient: x,
            score: c.score,
            step: c.step,
        })
        .collect();
    let unexplained_ions = if technique == Technique::MsEi {
        unexplained_ions(&plan.recipe.grid, &u, &fit.fitted, settings)
    } else {
        Vec::new()
    };
    Ok(Mixture {
        components,
        explained: fit.explained,
        explained_by_best,
        unexplained_ions,
        settings: *settings,
    })
}

/// Whether a two-component fit explains clearly more of the unknown than its best hit alone:
/// [`fit_mixture`] with two components at most, under the same plan and hit list, and
/// [`Mixture::has_several`]. For a later verdict on a hit list ("possibly a mixture"); it
/// runs one residual search.
pub fn two_explain_more(
    library: &Library,
    plan: &Plan,
    unknown: &Prepared,
    list: &HitList,
) -> Result<bool> {
    Ok(fit_mixture(library, plan, unknown, &list.hits, 2)?.has_several())
}

/// A component chosen so far, with its vector as fitted.
#[derive(Debug, Clone)]
struct Chosen {
    hit: Hit,
    vector: Vec<f64>,
    score: f64,
    step: usize,
}

/// The non-negative least-squares fit of the unknown on some components.
#[derive(Debug, Clone)]
struct Fit {
    x: Vec<f64>,
    fitted: Vec<f64>,
    explained: f64,
}

impl Fit {
    fn of(u: &[f64], chosen: &[Chosen]) -> Fit {
        let cols: Vec<&[f64]> = chosen.iter().map(|c| c.vector.as_slice()).collect();
        let solution = nnls(&cols, u);
        let mut fitted = vec![0.0; u.len()];
        for (c, &x) in cols.iter().zip(&solution.x) {
            for (f, &a) in fitted.iter_mut().zip(c.iter()) {
                *f += x * a;
            }
        }
        let uu: f64 = u.iter().map(|v| v * v).sum();
        let rr = solution.residual_norm * solution.residual_norm;
        Fit {
            x: solution.x,
            fitted,
            explained: if uu > 0.0 {
                (1.0 - rr / uu).clamp(0.0, 1.0)
            } else {
                0.0
            },
        }
    }
}

/// Which bins take part in the fit: every bin, except EI ions below the plan's low m/z
/// cutoff, which no measure sees either.
struct Keep {
    below: usize,
}

impl Keep {
    fn of(plan: &Plan, unknown: &Prepared) -> Keep {
        let grid = &plan.recipe.grid;
        let below = match (unknown.technique, plan.request.params.min_mz) {
            (Technique::MsEi, Some(lo)) => (0..grid.len()).take_while(|&i| grid.x(i) < lo).count(),
            _ => 0,
        };
        Keep { below }
    }

    fn vector(&self, v: &[f32]) -> Vec<f64> {
        v.iter()
            .enumerate()
            .map(|(i, &y)| if i < self.below { 0.0 } else { f64::from(y) })
            .collect()
    }
}

fn positive_sum(v: &[f64]) -> f64 {
    v.iter().filter(|&&y| y > 0.0).sum()
}

/// What the unknown has and the fit lacks, as a prepared spectrum to search with: the
/// residual clipped at zero and scaled as the technique's vectors are (EI: base peak 1, ions
/// below the recipe's relative abundance threshold of the unknown's base peak dropped;
/// IR and Raman: unit length; 1H NMR: unit area). Its peaks are the unknown's peaks where at
/// least half of the height is left (EI: every ion left). `None` when nothing is left.
fn residual_of(
    grid: &Grid,
    unknown: &Prepared,
    u: &[f64],
    fit: &Fit,
    keep: &Keep,
) -> Option<Prepared> {
    let technique = unknown.technique;
    let base = u.iter().copied().fold(0.0, f64::max);
    let floor = match technique {
        // Ions weaker than the library keeps are not ions (0.5 % of the base peak by default).
        Technique::MsEi => 0.005 * base,
        _ => 0.0,
    };
    let mut r: Vec<f64> = u
        .iter()
        .zip(&fit.fitted)
        .map(|(&y, &f)| {
            let left = y - f;
            if left > floor { left } else { 0.0 }
        })
        .collect();
    for v in r.iter_mut().take(keep.below) {
        *v = 0.0;
    }
    let scale = match technique {
        Technique::MsEi => r.iter().copied().fold(0.0, f64::max),
        Technique::Nmr1h => r.iter().sum(),
        _ => r.iter().map(|v| v * v).sum::<f64>().sqrt(),
    };
    if scale <= 0.0 {
        return None;
    }
    r.iter_mut().for_each(|v| *v /= scale);
    let vector: Vec<f32> = r.iter().map(|&v| v as f32).collect();
    let peaks: Vec<Peak> = match technique {
        Technique::MsEi => unknown
            .peaks
            .iter()
            .filter_map(|p| {
                let i = grid.index_of(p.x).filter(|&i| i < r.len())?;
                (r[i] > 0.0).then_some(Peak { height: r[i], ..*p })
            })
            .collect(),
        _ => unknown
            .peaks
            .iter()
            .filter_map(|p| {
                let i = grid.index_of(p.x).filter(|&i| i < r.len())?;
                (u[i] > 0.0 && r[i] * scale >= 0.5 * u[i]).then_some(Peak {
                    height: r[i],
                    area: p.area * r[i] * scale / u[i],
                    ..*p
                })
            })
            .collect(),
    };
    Some(Prepared {
        technique,
        vector,
        peaks,
        y_unit: unknown.y_unit,
        warnings: Vec::new(),
        // What is left of the unknown was measured where the unknown was.
        coverage: unknown.coverage,
    })
}

/// EI ions of the unknown (`u`, relative to its base peak) at or above
/// [`COELUTION_MIN_ABUNDANCE`] of which the fit leaves at least [`COELUTION_UNEXPLAINED`].
fn unexplained_ions(
    grid: &Grid,
    u: &[f64],
    fitted: &[f64],
    settings: &MixtureSettings,
) -> Vec<UnexplainedIon> {
    let base = u.iter().copied().fold(0.0, f64::max);
    if base <= 0.0 {
        return Vec::new();
    }
    u.iter()
        .zip(fitted)
        .enumerate()
        .filter(|&(_, (&y, &f))| {
            y >= settings.coelution_min_abundance * base
                && (y - f).max(0.0) >= settings.coelution_unexplained * y
        })
        .map(|(i, (&y, &f))| UnexplainedIon {
            mz: grid.x(i),
            observed: y / base,
            fitted: f / base,
        })
        .collect()
}

#[cfg(test)]
mod tests;
