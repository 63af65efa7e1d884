//! Similarity measures between prepared spectra. Every measure is a pure function of its
//! inputs and documented parameters, and lies in 0..1 with 1 for identical spectra.

mod composite;
mod derivative;
mod entropy;
mod nnls;
mod overlap;
mod vector;

pub use composite::{Composite, CompositeParams, stein_scott};
pub use derivative::{
    DerivativeParams, derivative_correlation, first_derivative, savgol_coefficients,
};
pub use entropy::{LN_4, common_term, entropy_similarity, entropy_weights, spectral_entropy};
pub use nnls::{Nnls, nnls};
pub use overlap::{
    Overlap, peak_overlap, shift_match, shift_match_costed, shift_match_referenced, weak_line_costs,
};
pub use vector::{cosine, pearson};

use std::fmt;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::prepare::{Prepared, peak_in, shared_bins};
use crate::technique::{Grid, Technique};

/// The spectral measure a technique ranks by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Measure {
    /// Cosine of the prepared vectors.
    Cosine,
    /// Pearson correlation over unmasked bins, negative values counted as 0.
    Correlation,
    /// Pearson correlation of the Savitzky-Golay first derivatives (IR, Raman).
    Derivative,
    /// Stein & Scott composite (EI-MS).
    Composite,
    /// Spectral entropy similarity, weighted (EI-MS; Li et al. 2021, [`entropy_similarity`]).
    Entropy,
    /// Tolerance-weighted Jaccard index of the peak positions (13C NMR), by default after
    /// removing a common referencing offset ([`ScoreParams::referencing_correction`]) and
    /// with missing weak reference lines discounted ([`ScoreParams::weak_line_discount`]).
    ShiftMatch,
}

impl Measure {
    /// The measure a technique uses unless told otherwise. IR ranks by correlation, which
    /// ignores a constant offset of the baseline; Raman by the derivative correlation, which
    /// also ignores what is left of a fluorescence background and was best on the tuning
    /// evidence (real spectra across instruments, as measured and degraded, and the generated
    /// tuning runs; `docs/evaluation-real.md`, `docs/evaluation.md`); 1H NMR by cosine of the area-normalised
    /// bins; EI-MS by the weighted spectral entropy similarity (Li et al. 2021), chosen on the
    /// tuning parts of the real and the generated evaluations over the Stein & Scott composite,
    /// weighted cosines (including square-root intensities) and forward and reverse search
    /// (`docs/evaluation-real.md`, `docs/evaluation.md`); 13C NMR by the shift match, because a 13C peak list carries
    /// positions, not quantitative intensities.
    pub fn default_for(technique: Technique) -> Measure {
        match technique {
            Technique::Ir => Measure::Correlation,
            Technique::Raman => Measure::Derivative,
            Technique::MsEi => Measure::Entropy,
            Technique::Nmr1h => Measure::Cosine,
            Technique::Nmr13c => Measure::ShiftMatch,
        }
    }

    /// The command-line name.
    pub fn name(self) -> &'static str {
        match self {
            Measure::Cosine => "cosine",
            Measure::Correlation => "correlation",
            Measure::Derivative => "derivative",
            Measure::Composite => "composite",
            Measure::Entropy => "entropy",
            Measure::ShiftMatch => "shift-match",
        }
    }

    /// The short label of a hit-list column and of the CSV `measure` field, e.g. `corr`.
    pub fn label(self) -> &'static str {
        match self {
            Measure::Cosine => "cosine",
            Measure::Correlation => "corr",
            Measure::Derivative => "deriv",
            Measure::Composite => "composite",
            Measure::Entropy => "entropy",
            Measure::ShiftMatch => "shift",
        }
    }

    /// The measure's name as reports write it in prose, e.g. `derivative correlation`.
    pub fn title(self) -> &'static str {
        match self {
            Measure::Cosine => "cosine",
            Measure::Correlation => "correlation",
            Measure::Composite => "composite",
            Measure::Derivative => "derivative correlation",
            Measure::Entropy => "entropy similarity",
            Measure::ShiftMatch => "shift match",
        }
    }

    /// Whether this measure can rank spectra of `technique`.
    pub fn applies_to(self, technique: Technique) -> bool {
        match self {
            Measure::Cosine => true,
            Measure::Correlation => technique != Technique::MsEi && technique != Technique::Nmr13c,
            Measure::Derivative => matches!(technique, Technique::Ir | Technique::Raman),
            Measure::Composite | Measure::Entropy => technique == Technique::MsEi,
            Measure::ShiftMatch => technique == Technique::Nmr13c,
        }
    }

    /// Every measure, in display order.
    pub const ALL: [Measure; 6] = [
        Measure::Correlation,
        Measure::Derivative,
        Measure::Cosine,
        Measure::Composite,
        Measure::Entropy,
        Measure::ShiftMatch,
    ];
}

impl fmt::Display for Measure {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Measure {
    type Err = Error;

    fn from_str(s: &str) -> Result<Measure> {
        let want = s.trim().to_ascii_lowercase();
        let alias = match want.as_str() {
            "corr" | "pearson" => "correlation",
            "deriv" | "derivative-correlation" => "derivative",
            "entropy-similarity" => "entropy",
            other => other,
        };
        Measure::ALL
            .into_iter()
            .find(|m| m.name() == alias)
            .ok_or_else(|| {
                Error::invalid(
                    format!("unknown measure '{s}'"),
                    "use correlation, derivative or cosine (IR, Raman); cosine or correlation (1H NMR); entropy, composite or cosine (EI-MS); shift-match or cosine (13C NMR)",
                )
            })
    }
}

/// Everything that decides a score, reported with every hit list.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScoreParams {
    /// The spectral measure.
    pub measure: Measure,
    /// Weight of the spectral measure in the combined score; peak overlap (Jaccard) has the rest.
    pub spectral_weight: f64,
    /// One-to-one peak matching tolerance in x units.
    pub peak_tolerance: f64,
    /// EI-MS weighting and search direction.
    pub composite: CompositeParams,
    /// EI-MS: ions below this m/z are left out of every measure, in the unknown and in the
    /// references alike (for example below m/z 35, where air, water and carrier-gas ions sit).
    #[serde(default)]
    pub min_mz: Option<f64>,
    /// IR, Raman: the Savitzky-Golay first derivative of the derivative correlation.
    #[serde(default)]
    pub derivative: DerivativeParams,
    /// 13C NMR: remove a common referencing offset of the unknown's shifts before the shift
    /// match ([`shift_match_referenced`]). Absent in results saved before it existed, which
    /// were matched without it, so it reads as false.
    #[serde(default)]
    pub referencing_correction: bool,
    /// 13C NMR: a reference line the unknown lacks counts against the match by its height
    /// relative to the reference's median line, at most 1 ([`weak_line_costs`]), so a missing
    /// weak line (a carbon without H) costs less than a missing typical one. Absent in
    /// results saved before it existed, which counted every line in full, so it reads as
    /// false.
    #[serde(default)]
    pub weak_line_discount: bool,
    /// 1H NMR: when the unknown's solvent and a reference's differ, the comparison masks
    /// both solvents' residual and water windows in both spectra
    /// ([`crate::prepare::shared_solvent_regions`]), so that declaring a solvent cannot turn
    /// a match into a mismatch. Absent in results saved before it existed, which compared
    /// each spectrum with only its own solvent masked, so it reads as false.
    #[serde(default)]
    pub shared_solvent_masks: bool,
    /// IR, Raman: compare two spectra only over the bins both were measured on
    /// ([`crate::prepare::shared_bins`]): cosine, correlation and derivative correlation over
    /// those bins, peak overlap over the peaks inside them. Absent in results saved before
    /// it existed, which compared over the whole grid (zeros where a spectrum had no data),
    /// so it reads as false.
    #[serde(default)]
    pub shared_range: bool,
}

impl ScoreParams {
    /// The defaults for a technique. The 0.8 / 0.2 split keeps the whole-spectrum measure in
    /// charge and lets agreement of peak positions break near-ties. EI-MS ranks by the entropy
    /// similarity alone: on the real tuning part, adding the peak Jaccard lowered top-1 in both
    /// protocols (`docs/evaluation-real.md`).
    pub fn default_for(technique: Technique) -> ScoreParams {
        ScoreParams {
            measure: Measure::default_for(technique),
            spectral_weight: if technique == Technique::MsEi {
                1.0
            } else {
                0.8
            },
            peak_tolerance: technique.peak_tolerance(),
            composite: CompositeParams::default(),
            min_mz: None,
            derivative: DerivativeParams::default(),
            // Chosen on the evaluation's tuning set (docs/evaluation.md).
            referencing_correction: technique == Technique::Nmr13c,
            weak_line_discount: technique == Technique::Nmr13c,
            shared_solvent_masks: technique == Technique::Nmr1h,
            shared_range: true,
        }
    }

    /// Checks the parameters make sense for `technique`.
    pub fn validate(&self, technique: Technique) -> Result<()> {
        if !self.measure.applies_to(technique) {
            let usable: Vec<&str> = Measure::ALL
                .iter()
                .filter(|m| m.applies_to(technique))
                .map(|m| m.name())
                .collect();
            return Err(Error::invalid(
                format!("measure {} does not apply to {technique}", self.measure),
                format!("for {technique} use one of: {}", usable.join(", ")),
            ));
        }
        if !(0.0..=1.0).contains(&self.spectral_weight) {
            return Err(Error::invalid(
                format!("spectral weight {} is outside 0..1", self.spectral_weight),
                "give a weight between 0 and 1",
            ));
        }
        if !(self.peak_tolerance.is_finite() && self.peak_tolerance > 0.0) {
            return Err(Error::invalid(
                format!(
                    "peak tolerance {} is not a positive number",
                    self.peak_tolerance
                ),
                format!(
                    "give a tolerance in the technique's x unit, e.g. {} for {technique}",
                    technique.peak_tolerance()
                ),
            ));
        }
        let c = &self.composite;
        for (what, v) in [
            ("intensity exponent", c.intensity_exponent),
            ("m/z exponent", c.mass_exponent),
        ] {
            if !(v.is_finite() && (0.0..=10.0).contains(&v)) {
                return Err(Error::invalid(
                    format!("{what} {v} is outside 0..10"),
                    "the usual values are 0.6 for the intensity and 3 for m/z (Stein & Scott 1994)",
                ));
            }
        }
        if let Some(m) = self.min_mz
            && !(m.is_finite() && m >= 0.0)
        {
            return Err(Error::invalid(
                format!("low m/z cutoff {m} is not a non-negative number"),
                "give an m/z such as 35",
            ));
        }
        self.derivative.validate()
    }
}

/// One library spectrum's scores against an unknown.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Scores {
    /// The combined score: `spectral_weight * spectral + (1 - spectral_weight) * overlap.jaccard`.
    pub combined: f64,
    /// The value of the ranking measure.
    pub spectral: f64,
    /// Cosine of the prepared vectors.
    pub cosine: f64,
    /// Pearson r over unmasked bins, clipped to 0..1 (IR, Raman, 1H NMR).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub correlation: Option<f64>,
    /// Pearson r of the Savitzky-Golay first derivatives, clipped to 0..1 (IR, Raman).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub derivative: Option<f64>,
    /// The Stein & Scott terms (EI-MS).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub composite: Option<Composite>,
    /// The entropy similarity (EI-MS). Absent in results saved before it existed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub entropy: Option<f64>,
    /// The tolerance-weighted Jaccard index of the peak positions (13C NMR), with the
    /// referencing correction and the weak-line discount when the parameters ask for them.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shift_match: Option<f64>,
    /// One-to-one peak matching.
    pub peak_overlap: Overlap,
}

impl Scores {
    /// The value of one measure, when it was computed for this technique.
    pub fn value(&self, measure: Measure) -> Option<f64> {
        match measure {
            Measure::Cosine => Some(self.cosine),
            Measure::Correlation => self.correlation,
            Measure::Derivative => self.derivative,
            Measure::Composite => self.composite.map(|c| c.composite),
            Measure::Entropy => self.entropy,
            Measure::ShiftMatch => self.shift_match,
        }
    }
}

/// Scores a library spectrum against an unknown prepared with the same recipe.
///
/// With [`ScoreParams::shared_range`], the measures see only the bins both spectra cover
/// (IR and Raman record their coverage; the other techniques cover the whole grid): cosine,
/// Pearson correlation and derivative correlation over those bins (masked ones left out as
/// always), peak overlap over the peaks of each spectrum that lie in them. A reference
/// measured 650-4000 cm-1 is then compared with a 400-4000 unknown over 650-4000, and the
/// bins it has no data for neither lower nor raise its score. Every measure stays in 0..1
/// and symmetric (the shared bins are).
pub fn score(
    unknown: &Prepared,
    reference: &Prepared,
    grid: &Grid,
    params: &ScoreParams,
) -> Scores {
    let technique = unknown.technique;
    let cutoff = match technique {
        Technique::MsEi => params.min_mz,
        _ => None,
    };
    let whole = 0..grid.len();
    let range = if params.shared_range {
        shared_bins(unknown.coverage.as_ref(), reference.coverage.as_ref(), grid)
    } else {
        whole.clone()
    };
    let restricted = range != whole;
    let keep =
        |x: f64| cutoff.is_none_or(|lo| x >= lo) && (!restricted || peak_in(x, grid, &range));
    let cos = match (cutoff, restricted) {
        (None, false) => cosine(&unknown.vector, &reference.vector),
        (None, true) => {
            let part = |v: &[f32]| v[range.start.min(v.len())..range.end.min(v.len())].to_vec();
            cosine(&part(&unknown.vector), &part(&reference.vector))
        }
        (Some(_), _) => {
            let cut = |p: &Prepared| -> Vec<f32> {
                p.vector
                    .iter()
                    .enumerate()
                    .map(|(i, &v)| if keep(grid.x(i)) { v } else { 0.0 })
                    .collect()
            };
            cosine(&cut(unknown), &cut(reference))
        }
    }
    .clamp(0.0, 1.0);
    let xs =
        |p: &Prepared| -> Vec<f64> { p.peaks.iter().map(|p| p.x).filter(|&x| keep(x)).collect() };
    let (ux, rx) = (xs(unknown), xs(reference));
    let (mut correlation, mut derivative, mut composite, mut shift) = (None, None, None, None);
    let mut entropy = None;
    match technique {
        Technique::MsEi => {
            let sticks = |p: &Prepared| -> Vec<(f64, f64)> {
                p.peaks
                    .iter()
                    .filter(|p| keep(p.x))
                    .map(|p| (p.x, p.height))
                    .collect()
            };
            let (u, r) = (sticks(unknown), sticks(reference));
            composite = Some(stein_scott(&u, &r, &params.composite));
            entropy = Some(entropy_similarity(&u, &r));
        }
        Technique::Nmr13c => {
            // No m/z cutoff applies to 13C, so rx and the reference's peaks correspond.
            let costs = if params.weak_line_discount {
                weak_line_costs(&reference.peaks.iter().map(|p| p.height).collect::<Vec<_>>())
            } else {
                vec![1.0; rx.len()]
            };
            let lines: Vec<(f64, f64)> = rx.iter().copied().zip(costs).collect();
            shift = Some(
                shift_match_costed(
                    &ux,
                    &lines,
                    params.peak_tolerance,
                    params.referencing_correction,
                )
                .0,
            );
        }
        Technique::Ir | Technique::Raman | Technique::Nmr1h => {
            // Bins outside the shared range are left out as masked bins are.
            let masked: Vec<bool> = (0..grid.len())
                .map(|i| grid.masked(grid.x(i)) || !range.contains(&i))
                .collect();
            let active: Vec<bool> = masked.iter().map(|m| !m).collect();
            correlation =
                Some(pearson(&unknown.vector, &reference.vector, Some(&active)).clamp(0.0, 1.0));
            if technique != Technique::Nmr1h {
                derivative = Some(derivative_correlation(
                    &unknown.vector,
                    &reference.vector,
                    &params.derivative,
                    &masked,
                ));
            }
        }
    }
    let spectral = match params.measure {
        Measure::Cosine => Some(cos),
        Measure::Correlation => correlation,
        Measure::Derivative => derivative,
        Measure::Composite => composite.as_ref().map(|c| c.composite),
        Measure::Entropy => entropy,
        Measure::ShiftMatch => shift,
    }
    .unwrap_or(cos);
    let peak_overlap = peak_overlap(&ux, &rx, params.peak_tolerance);
    let w = params.spectral_weight.clamp(0.0, 1.0);
    let combined = (w * spectral + (1.0 - w) * peak_overlap.jaccard).clamp(0.0, 1.0);
    Scores {
        combined,
        spectral,
        cosine: cos,
        correlation,
        derivative,
        composite,
        entropy,
        shift_match: shift,
        peak_overlap,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prepare::{Peak, Recipe};
    use crate::spectrum::YUnit;
    use proptest::prelude::*;

    fn optical(values: &[f32], peaks: &[f64]) -> Prepared {
        let mut vector = values.to_vec();
        crate::prepare::l2_normalise(&mut vector);
        Prepared {
            technique: Technique::Ir,
            vector,
            peaks: peaks
                .iter()
                .map(|&x| Peak {
                    x,
                    height: 1.0,
                    width: 0.0,
                    area: 0.0,
                })
                .collect(),
            y_unit: YUnit::Absorbance,
            warnings: vec![],
            coverage: None,
        }
    }

    /// Uniform values in `lo..hi` on a grid of a million steps. proptest's own f32 range
    /// sampler can trip a debug assertion inside proptest on some seeds (known upstream), so
    /// the tests draw integers and scale them.
    fn f32_in(lo: f32, hi: f32) -> impl Strategy<Value = f32> {
        (0u32..1_000_000).prop_map(move |n| lo + (hi - lo) * (n as f32 / 1e6))
    }

    /// As [`f32_in`], for f64.
    fn f64_in(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
        (0u32..1_000_000).prop_map(move |n| lo + (hi - lo) * (f64::from(n) / 1e6))
    }

    fn mass(ions: &[(u16, f32)]) -> Prepared {
        let grid = Technique::MsEi.default_grid();
        let mut vector = vec![0f32; grid.len()];
        let mut peaks = Vec::new();
        for &(mz, a) in ions {
            vector[usize::from(mz) - 1] = a;
        }
        for (i, &a) in vector.iter().enumerate() {
            if a > 0.0 {
                peaks.push(Peak {
                    x: grid.x(i),
                    height: f64::from(a),
                    width: 0.0,
                    area: 0.0,
                });
            }
        }
        Prepared {
            technique: Technique::MsEi,
            vector,
            peaks,
            y_unit: YUnit::Relative,
            warnings: vec![],
            coverage: None,
        }
    }

    fn in_unit(x: f64) -> bool {
        (0.0..=1.0).contains(&x)
    }

    fn grid(n: usize) -> Grid {
        Grid {
            start: 0.0,
            stop: (n - 1) as f64,
            step: 1.0,
            masks: vec![],
        }
    }

    #[test]
    fn measure_labels_are_distinct_and_abbreviate_the_title() {
        for a in Measure::ALL {
            // The short column label is the start of the prose title ("corr", "correlation").
            assert!(a.title().starts_with(a.label()), "{a:?}");
            for b in Measure::ALL.into_iter().filter(|&b| b != a) {
                assert_ne!(a.label(), b.label());
                assert_ne!(a.title(), b.title());
            }
        }
    }

    /// `p` measured over grid points `lo..=hi` only: zero elsewhere, peaks outside dropped.
    fn measured_over(p: &Prepared, lo: usize, hi: usize) -> Prepared {
        let mut q = p.clone();
        for (i, v) in q.vector.iter_mut().enumerate() {
            if i < lo || i > hi {
                *v = 0.0;
            }
        }
        q.peaks
            .retain(|peak| peak.x >= lo as f64 && peak.x <= hi as f64);
        q.coverage =
            crate::prepare::Coverage::measured(lo as f64, hi as f64, &grid(q.vector.len()));
        q
    }

    /// A smooth, non-constant spectrum of 64 points from drawn band heights, so that the
    /// derivative correlation has windows to work with.
    fn smooth(heights: &[f32]) -> Vec<f32> {
        (0..64)
            .map(|i| {
                heights
                    .iter()
                    .enumerate()
                    .map(|(k, &h)| h * (-((i as f32 - 6.0 * k as f32 - 3.0) / 3.0).powi(2)).exp())
                    .sum::<f32>()
                    + 0.01 * i as f32
            })
            .collect()
    }

    #[test]
    fn a_spectrum_and_its_shorter_measurement_match_in_full() {
        // IR prepared from 400-4000 cm-1 and from the same points within 650-4000 cm-1 (the
        // range of a diamond ATR accessory, common practice): over the bins both cover they
        // are the same spectrum. Compared over the whole grid, the zeros below 650 counted
        // as data and lowered the score.
        let recipe = Recipe::default_for(Technique::Ir);
        let band = |x: f64, c: f64, w: f64| (-((x - c) / w).powi(2)).exp();
        let pts: Vec<(f64, f64)> = (0..=900)
            .map(|i| {
                let x = 400.0 + 4.0 * f64::from(i);
                (
                    x,
                    0.02 + band(x, 520.0, 15.0)
                        + band(x, 1715.0, 12.0)
                        + 0.4 * band(x, 2950.0, 20.0),
                )
            })
            .collect();
        let short: Vec<(f64, f64)> = pts.iter().copied().filter(|p| p.0 >= 650.0).collect();
        let cond = crate::prepare::Conditions {
            y_unit: Some(YUnit::Absorbance),
            solvent: None,
        };
        let path = std::path::Path::new("t");
        let full = crate::prepare::prepare(path, &recipe, &pts, &cond).unwrap();
        let part = crate::prepare::prepare(path, &recipe, &short, &cond).unwrap();
        assert_eq!(full.coverage, None);
        // Points every 4 cm-1 from 400: the first one kept is 652 cm-1, grid point 126.
        assert_eq!(part.coverage.unwrap().bins(&recipe.grid), 126..1801);
        let params = ScoreParams::default_for(Technique::Ir);
        let s = score(&full, &part, &recipe.grid, &params);
        for v in [
            s.combined,
            s.cosine,
            s.correlation.unwrap(),
            s.derivative.unwrap(),
        ] {
            assert!((v - 1.0).abs() < 1e-6, "{s:?}");
        }
        assert_eq!(
            s.peak_overlap.matched, 2,
            "the band at 520 cm-1 lies outside: {s:?}"
        );
        let whole = ScoreParams {
            shared_range: false,
            ..params
        };
        let before = score(&full, &part, &recipe.grid, &whole);
        assert!(
            before.correlation.unwrap() < 0.99 && before.peak_overlap.jaccard < 1.0,
            "{before:?}"
        );
    }

    proptest! {
        #[test]
        fn optical_scores_lie_in_0_1(
            a in prop::collection::vec(f32_in(-1.0, 10.0), 32),
            b in prop::collection::vec(f32_in(-1.0, 10.0), 32),
            pa in prop::collection::vec(f64_in(0.0, 31.0), 0..8),
            pb in prop::collection::vec(f64_in(0.0, 31.0), 0..8),
        ) {
            let s = score(&optical(&a, &pa), &optical(&b, &pb), &grid(32), &ScoreParams::default_for(Technique::Ir));
            prop_assert!(in_unit(s.combined) && in_unit(s.spectral) && in_unit(s.cosine));
            prop_assert!(in_unit(s.correlation.unwrap()));
            let o = s.peak_overlap;
            prop_assert!(in_unit(o.forward) && in_unit(o.reverse) && in_unit(o.jaccard));
        }

        #[test]
        fn mass_scores_lie_in_0_1(
            a in prop::collection::vec((1u16..400, f32_in(0.01, 1.0)), 1..20),
            b in prop::collection::vec((1u16..400, f32_in(0.01, 1.0)), 1..20),
            reverse in any::<bool>(),
        ) {
            let mut params = ScoreParams::default_for(Technique::MsEi);
            params.composite.reverse = reverse;
            let s = score(&mass(&a), &mass(&b), &Technique::MsEi.default_grid(), &params);
            let c = s.composite.unwrap();
            prop_assert!(in_unit(s.combined) && in_unit(c.dot) && in_unit(c.ratio) && in_unit(c.composite));
        }

        #[test]
        fn a_spectrum_compared_with_itself_scores_1(
            a in prop::collection::vec(f32_in(0.0, 10.0), 32).prop_filter("not constant", |v| v.iter().any(|&x| (x - v[0]).abs() > 1e-3)),
            peaks in prop::collection::vec(f64_in(0.0, 31.0), 1..8),
            ions in prop::collection::vec((1u16..400, f32_in(0.01, 1.0)), 1..20),
        ) {
            let p = optical(&a, &peaks);
            let s = score(&p, &p, &grid(32), &ScoreParams::default_for(Technique::Ir));
            prop_assert!((s.combined - 1.0).abs() < 1e-6, "{s:?}");
            let m = mass(&ions);
            let s = score(&m, &m, &Technique::MsEi.default_grid(), &ScoreParams::default_for(Technique::MsEi));
            prop_assert!((s.combined - 1.0).abs() < 1e-6, "{s:?}");
        }

        #[test]
        fn cosine_ignores_y_scale_and_is_symmetric(
            a in prop::collection::vec(f32_in(0.0, 10.0), 16),
            b in prop::collection::vec(f32_in(0.0, 10.0), 16),
            k in f32_in(0.001, 1000.0),
        ) {
            let scaled: Vec<f32> = a.iter().map(|x| x * k).collect();
            prop_assert!((cosine(&a, &b) - cosine(&scaled, &b)).abs() < 1e-5);
            prop_assert!((cosine(&a, &b) - cosine(&b, &a)).abs() < 1e-12);
            prop_assert!((pearson(&a, &b, None) - pearson(&b, &a, None)).abs() < 1e-12);
        }

        #[test]
        fn a_spectrum_against_itself_measured_over_less_scores_1(
            heights in prop::collection::vec(f32_in(0.05, 10.0), 10),
            lo in 0usize..20,
            hi in 44usize..64,
        ) {
            // Measured over grid points lo..=hi only (common practice: an ATR accessory or a
            // detector cuts the range); every measure over the shared bins is 1 (the
            // derivative to within f32 rounding of the vector).
            let peaks: Vec<f64> = (0..10).map(|k| 6.0 * k as f64 + 3.0).collect();
            let p = optical(&smooth(&heights), &peaks);
            let q = measured_over(&p, lo, hi);
            let s = score(&p, &q, &grid(64), &ScoreParams::default_for(Technique::Ir));
            prop_assert!((s.cosine - 1.0).abs() < 1e-6 && (s.correlation.unwrap() - 1.0).abs() < 1e-6, "{s:?}");
            prop_assert!((s.derivative.unwrap() - 1.0).abs() < 1e-5, "{s:?}");
            prop_assert!((s.peak_overlap.jaccard - 1.0).abs() < 1e-12, "{s:?}");
            prop_assert!((s.combined - 1.0).abs() < 1e-5, "{s:?}");
        }

        #[test]
        fn what_a_spectrum_does_not_cover_never_counts(
            a in prop::collection::vec(f32_in(0.0, 10.0), 64),
            b in prop::collection::vec(f32_in(0.0, 10.0), 64),
            filler in prop::collection::vec(f32_in(-1.0, 10.0), 64),
            (lo_a, hi_a, lo_b, hi_b) in (0usize..25, 40usize..64, 0usize..25, 40usize..64),
            pa in prop::collection::vec(f64_in(0.0, 63.0), 0..8),
            pb in prop::collection::vec(f64_in(0.0, 63.0), 0..8),
        ) {
            // Zeros where a spectrum has no data (or anything else there) change no score,
            // every score stays in 0..1, and swapping the two gives the same scores.
            let g = grid(64);
            let params = ScoreParams::default_for(Technique::Ir);
            let u = measured_over(&optical(&a, &pa.iter().map(|x| x.round()).collect::<Vec<_>>()), lo_a, hi_a);
            let r = measured_over(&optical(&b, &pb.iter().map(|x| x.round()).collect::<Vec<_>>()), lo_b, hi_b);
            let mut filled = r.clone();
            for (i, v) in filled.vector.iter_mut().enumerate() {
                if i < lo_b || i > hi_b {
                    *v = filler[i];
                }
            }
            let s = score(&u, &r, &g, &params);
            prop_assert_eq!(&s, &score(&u, &filled, &g, &params));
            let t = score(&r, &u, &g, &params);
            prop_assert!((s.combined - t.combined).abs() < 1e-12 && (s.cosine - t.cosine).abs() < 1e-12);
            prop_assert!((s.correlation.unwrap() - t.correlation.unwrap()).abs() < 1e-12);
            prop_assert!((s.derivative.unwrap() - t.derivative.unwrap()).abs() < 1e-12);
            prop_assert_eq!(s.peak_overlap.jaccard, t.peak_overlap.jaccard);
            for v in [s.combined, s.cosine, s.correlation.unwrap(), s.derivative.unwrap(), s.peak_overlap.jaccard] {
                prop_assert!(in_unit(v), "{s:?}");
            }
        }

        #[test]
        fn preparation_then_cosine_ignores_y_scale(k in f64_in(0.01, 100.0)) {
            // Scaling the raw y of an absorbance spectrum leaves the prepared vector's direction,
            // and so every cosine against it, unchanged.
            let recipe = Recipe::default_for(Technique::Ir);
            let pts: Vec<(f64, f64)> = (0..=900).map(|i| {
                let x = 400.0 + 4.0 * f64::from(i);
                (x, 0.02 + (-((x - 1715.0) / 12.0).powi(2)).exp() + 0.4 * (-((x - 2950.0) / 20.0).powi(2)).exp())
            }).collect();
            let scaled: Vec<(f64, f64)> = pts.iter().map(|&(x, y)| (x, y * k)).collect();
            let cond = crate::prepare::Conditions { y_unit: Some(YUnit::Absorbance), solvent: None };
            let a = crate::prepare::prepare(std::path::Path::new("a"), &recipe, &pts, &cond).unwrap();
            let b = crate::prepare::prepare(std::path::Path::new("b"), &recipe, &scaled, &cond).unwrap();
            prop_assert!((cosine(&a.vector, &b.vector) - 1.0).abs() < 1e-6);
        }
    }
}
