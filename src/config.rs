//! A library's own settings: `whorl.toml` in the library folder.
//!
//! Every key is optional and the file itself is optional: without it whorl uses the defaults
//! documented in the README. A value outside its range, a key whorl does not know, or a
//! malformed file is an [`Error::Input`] naming the file and line, so a typo is never
//! silently ignored.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Deserializer, Serialize};

use crate::error::{Error, Location, Result};
use crate::prepare::Solvent;
use crate::technique::Technique;

/// The settings file inside a library folder.
pub const CONFIG_FILE: &str = "whorl.toml";

/// What a library's `whorl.toml` says, with defaults filled in.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Config {
    /// Defaults for every search.
    pub search: SearchDefaults,
    /// Per-technique options, overriding `search` and the technique's built-in defaults.
    pub technique: TechniqueTable,
    /// When a hit list warns.
    pub thresholds: Thresholds,
    /// HTML reports.
    pub report: ReportDefaults,
    /// What `identify` requires before it reports the evidence as meeting the library's
    /// identification criteria.
    #[serde(deserialize_with = "identity_policy")]
    pub identity: IdentityPolicy,
    /// The audit trail's witness.
    pub audit: AuditSettings,
}

/// `[audit]`: where every write appends the audit chain's head.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct AuditSettings {
    /// A witness file outside the library: when set, every command that writes to the library
    /// (and every write of the lab server) appends the chain's new head to it, as
    /// `whorl witness write FILE` does. An absolute path.
    #[serde(
        deserialize_with = "absolute_path",
        skip_serializing_if = "Option::is_none"
    )]
    pub witness: Option<PathBuf>,
}

/// Defaults for every search.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct SearchDefaults {
    /// Hits listed when `--top` is not given.
    #[serde(deserialize_with = "at_least_one")]
    pub top: usize,
}

impl Default for SearchDefaults {
    fn default() -> SearchDefaults {
        SearchDefaults { top: 10 }
    }
}

/// One table per technique: `[technique.ir]`, `[technique.raman]`, `[technique.ms-ei]`,
/// `[technique.nmr-1h]`.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct TechniqueTable {
    /// IR.
    pub ir: TechniqueOptions,
    /// Raman.
    pub raman: TechniqueOptions,
    /// EI-MS.
    #[serde(rename = "ms-ei")]
    pub ms_ei: TechniqueOptions,
    /// 1H NMR.
    #[serde(rename = "nmr-1h")]
    pub nmr_1h: TechniqueOptions,
    /// 13C NMR.
    #[serde(rename = "nmr-13c")]
    pub nmr_13c: TechniqueOptions,
}

impl TechniqueTable {
    /// The options of one technique.
    pub fn get(&self, technique: Technique) -> &TechniqueOptions {
        match technique {
            Technique::Ir => &self.ir,
            Technique::Raman => &self.raman,
            Technique::MsEi => &self.ms_ei,
            Technique::Nmr1h => &self.nmr_1h,
            Technique::Nmr13c => &self.nmr_13c,
        }
    }
}

/// Search options of one technique; each unset one keeps its default.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct TechniqueOptions {
    /// Hits listed when `--top` is not given.
    #[serde(
        skip_serializing_if = "Option::is_none",
        deserialize_with = "some_at_least_one"
    )]
    pub top: Option<usize>,
    /// Weight of the spectral measure in the combined score (0..1).
    #[serde(
        skip_serializing_if = "Option::is_none",
        deserialize_with = "some_unit_interval"
    )]
    pub spectral_weight: Option<f64>,
    /// One-to-one peak matching tolerance in x units (cm-1, m/z, ppm).
    #[serde(
        skip_serializing_if = "Option::is_none",
        deserialize_with = "some_positive"
    )]
    pub peak_tolerance: Option<f64>,
    /// The unknown's solvent when `--solvent` is not given (1H NMR).
    #[serde(
        skip_serializing_if = "Option::is_none",
        deserialize_with = "some_solvent"
    )]
    pub solvent: Option<String>,
}

/// When a hit list warns: the `[thresholds]` table, overriding the thresholds derived by the
/// evaluation for each technique and measure (`None` keeps the derived value). A saved search
/// records the overrides it ran with in the same form.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Thresholds {
    /// Below this combined score the best hit is reported as a weak match (0..1); unset keeps
    /// the threshold derived for the technique and measure.
    #[serde(
        default,
        deserialize_with = "some_unit_interval",
        skip_serializing_if = "Option::is_none"
    )]
    pub weak_score: Option<f64>,
    /// Top hits of different compounds closer than this are too close to call (0..1); unset
    /// keeps the derived threshold.
    #[serde(
        default,
        deserialize_with = "some_unit_interval",
        skip_serializing_if = "Option::is_none"
    )]
    pub close_margin: Option<f64>,
    /// At or above this combined score (and clear of other compounds by the close margin) the
    /// best hit is a strong candidate (0..1); unset keeps the derived threshold.
    #[serde(
        default,
        deserialize_with = "some_unit_interval",
        skip_serializing_if = "Option::is_none"
    )]
    pub strong_score: Option<f64>,
}

/// What a lab asks of the evidence before a fused result may be reported as meeting its
/// identification criteria: the `[identity]` table of `whorl.toml`.
///
/// A technique *supports* the fused list's first compound when its own hit list puts that
/// compound first with a confident hit (not weak and not too close to another compound, by
/// the technique's thresholds). It *speaks against* it when the library holds a reference of
/// the compound for that technique and either another compound is confidently first, or the
/// compound's own score is below the technique's weak-match threshold: the measured spectrum
/// does not look like the reference. A technique without a reference of the compound is
/// silent. The default asks for two supporting techniques and none against, following the
/// common practice of confirming an identification by a second, independent technique. Labs
/// set their own rule from their accredited procedures; whorl only reports whether it is met.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct IdentityPolicy {
    /// Techniques that must support the first compound.
    pub min_techniques: usize,
    /// Whether techniques that speak against the compound may be outvoted.
    pub allow_contradiction: bool,
}

impl Default for IdentityPolicy {
    fn default() -> IdentityPolicy {
        IdentityPolicy {
            min_techniques: 2,
            allow_contradiction: false,
        }
    }
}

impl IdentityPolicy {
    /// The rule in words, as recorded with every verdict.
    pub fn rule(&self) -> String {
        format!(
            "at least {} technique{} must each rank the compound first with a confident hit{}",
            self.min_techniques,
            if self.min_techniques == 1 { "" } else { "s" },
            if self.allow_contradiction {
                ""
            } else {
                ", and no technique holding a reference of it may speak against it"
            }
        )
    }
}

/// HTML report settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct ReportDefaults {
    /// How many top hits get an overlay plot.
    pub plots: usize,
}

impl Default for ReportDefaults {
    fn default() -> ReportDefaults {
        ReportDefaults { plots: 5 }
    }
}

impl Config {
    /// The settings file of a library folder.
    pub fn path(library: &Path) -> PathBuf {
        library.join(CONFIG_FILE)
    }

    /// Reads `whorl.toml` from a library folder; the defaults when there is none.
    pub fn load(library: &Path) -> Result<Config> {
        let path = Config::path(library);
        match std::fs::read_to_string(&path) {
            Ok(text) => Config::parse(&text, &path),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(Config::default()),
            Err(e) => Err(Error::io(format!("reading {}", path.display()), e)),
        }
    }

    /// Parses the text of a settings file; `path` names it in errors.
    pub fn parse(text: &str, path: &Path) -> Result<Config> {
        toml::from_str(text).map_err(|e| {
            let line = e
                .span()
                .map(|s| text[..s.start.min(text.len())].matches('\n').count() + 1);
            let at = match line {
                Some(l) => Location::line(path, l),
                None => Location::file(path),
            };
            Error::input(
                at,
                e.message().trim().to_string(),
                format!(
                    "fix or remove that line of {CONFIG_FILE}; the README section \"Configuration\" lists every key, and without the file whorl uses its defaults"
                ),
            )
        })
    }

    /// Hits listed for a technique when `--top` is not given.
    pub fn top(&self, technique: Technique) -> usize {
        self.technique.get(technique).top.unwrap_or(self.search.top)
    }

    /// The default solvent of a technique's unknowns, if the file sets one.
    pub fn solvent(&self, technique: Technique) -> Option<Solvent> {
        self.technique
            .get(technique)
            .solvent
            .as_deref()
            .and_then(|s| s.parse().ok())
    }

    /// The spectral weight of a technique's combined score, if the file sets one.
    pub fn spectral_weight(&self, technique: Technique) -> Option<f64> {
        self.technique.get(technique).spectral_weight
    }

    /// The peak-matching tolerance of a technique, if the file sets one.
    pub fn peak_tolerance(&self, technique: Technique) -> Option<f64> {
        self.technique.get(technique).peak_tolerance
    }
}

fn check<'de, D: Deserializer<'de>, T>(
    value: T,
    ok: bool,
    what: impl FnOnce(&T) -> String,
) -> std::result::Result<T, D::Error> {
    if ok {
        Ok(value)
    } else {
        Err(serde::de::Error::custom(what(&value)))
    }
}

fn unit<'de, D: Deserializer<'de>>(v: f64) -> std::result::Result<f64, D::Error> {
    check::<D, _>(v, (0.0..=1.0).contains(&v), |v| {
        format!("{v} is not between 0 and 1")
    })
}

fn at_least_one<'de, D: Deserializer<'de>>(d: D) -> std::result::Result<usize, D::Error> {
    let v = usize::deserialize(d)?;
    check::<D, _>(v, v >= 1, |_| "must be 1 or more".to_string())
}

fn some_at_least_one<'de, D: Deserializer<'de>>(
    d: D,
) -> std::result::Result<Option<usize>, D::Error> {
    at_least_one(d).map(Some)
}

fn some_unit_interval<'de, D: Deserializer<'de>>(
    d: D,
) -> std::result::Result<Option<f64>, D::Error> {
    unit::<D>(f64::deserialize(d)?).map(Some)
}

fn absolute_path<'de, D: Deserializer<'de>>(
    d: D,
) -> std::result::Result<Option<PathBuf>, D::Error> {
    let p = PathBuf::deserialize(d)?;
    if !p.is_absolute() {
        return Err(serde::de::Error::custom(format!(
            "the witness file must be an absolute path outside the library, not {}",
            crate::error::excerpt(&p.display().to_string(), 120)
        )));
    }
    Ok(Some(p))
}

fn identity_policy<'de, D: Deserializer<'de>>(
    d: D,
) -> std::result::Result<IdentityPolicy, D::Error> {
    let p = IdentityPolicy::deserialize(d)?;
    check::<D, _>(p, p.min_techniques >= 1, |_| {
        "min_techniques must be 1 or more".to_string()
    })
}

fn some_positive<'de, D: Deserializer<'de>>(d: D) -> std::result::Result<Option<f64>, D::Error> {
    let v = f64::deserialize(d)?;
    check::<D, _>(v, v > 0.0 && v.is_finite(), |v| {
        format!("{v} is not a positive number")
    })
    .map(Some)
}

fn some_solvent<'de, D: Deserializer<'de>>(d: D) -> std::result::Result<Option<String>, D::Error> {
    let s = String::deserialize(d)?;
    match s.parse::<Solvent>() {
        Ok(solvent) => Ok(Some(solvent.name().to_string())),
        Err(e) => Err(serde::de::Error::custom(format!(
            "{e}{}",
            e.hint().map(|h| format!(" ({h})")).unwrap_or_default()
        ))),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<Config> {
        Config::parse(text, Path::new("lib/whorl.toml"))
    }

    #[test]
    fn an_empty_file_gives_the_defaults() {
        let c = parse("").unwrap();
        assert_eq!(c, Config::default());
        assert_eq!(c.top(Technique::Ir), 10);
        assert_eq!(c.thresholds, Thresholds::default());
        assert_eq!(c.report.plots, 5);
    }

    #[test]
    fn technique_options_override_the_search_defaults() {
        let c = parse(
            "[search]\ntop = 7\n\n[technique.nmr-1h]\ntop = 3\nsolvent = \"cdcl3\"\npeak_tolerance = 0.05\n\n[technique.ms-ei]\nspectral_weight = 0.9\n",
        )
        .unwrap();
        assert_eq!(c.top(Technique::Nmr1h), 3);
        assert_eq!(c.top(Technique::Ir), 7);
        assert_eq!(c.solvent(Technique::Nmr1h), Some(Solvent::Cdcl3));
        assert_eq!(c.peak_tolerance(Technique::Nmr1h), Some(0.05));
        assert_eq!(c.peak_tolerance(Technique::Ir), None);
        assert_eq!(c.spectral_weight(Technique::MsEi), Some(0.9));
    }

    #[test]
    fn a_bad_value_names_the_file_and_line() {
        let err =
            parse("[search]\ntop = 5\n\n[technique.ir]\nspectral_weight = 1.5\n").unwrap_err();
        let msg = err.to_string();
        assert!(msg.starts_with("lib/whorl.toml:5: "), "{msg}");
        assert!(msg.contains("not between 0 and 1"), "{msg}");
        assert!(err.hint().unwrap().contains("Configuration"));
    }

    #[test]
    fn an_unknown_key_is_refused_not_ignored() {
        let err = parse("[technique.ir]\npeak_tolerence = 4\n").unwrap_err();
        let msg = err.to_string();
        assert!(msg.starts_with("lib/whorl.toml:2: "), "{msg}");
        assert!(msg.contains("peak_tolerance"), "{msg}");
    }

    #[test]
    fn malformed_toml_and_bad_thresholds_and_solvents_are_refused() {
        let cases = [
            ("[search\ntop = 1\n", 1),
            ("\n[thresholds]\nweak_score = 2\n", 3),
            ("[technique.nmr-1h]\n\nsolvent = \"chloroform-z\"\n", 3),
            ("[search]\ntop = 0\n", 2),
            ("[technique.raman]\npeak_tolerance = -1\n", 2),
            ("[technique.uv]\ntop = 1\n", 1),
        ];
        for (text, line) in cases {
            let msg = parse(text).unwrap_err().to_string();
            assert!(
                msg.starts_with(&format!("lib/whorl.toml:{line}: ")),
                "{text:?} -> {msg}"
            );
        }
    }

    #[test]
    fn a_missing_file_gives_the_defaults() {
        let dir = tempfile::tempdir().unwrap();
        assert_eq!(Config::load(dir.path()).unwrap(), Config::default());
    }
}

#[cfg(test)]
mod policy_tests {
    use super::*;

    #[test]
    fn the_review_policy_is_not_a_file_setting() {
        // Self-review is a library policy recorded in the audit trail (`whorl policy`); a text
        // file that anyone can edit unrecorded must not weaken review.
        let err = Config::parse(
            "[identity]\nallow_self_review = true\n",
            Path::new("lib/whorl.toml"),
        )
        .unwrap_err();
        assert!(
            err.to_string()
                .contains("unknown field `allow_self_review`"),
            "{err}"
        );
    }
}
