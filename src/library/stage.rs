//! Reading and preparing a submission before anything touches the database. Pure and
//! thread-safe, so a bulk import stages files in parallel.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::chem::{Formula, check_cas, check_inchikey, ihd, ms_formula_warnings, parse_formula};
use crate::error::{Error, Result};
use crate::library::Metadata;
use crate::prepare::{Conditions, Prepared, Recipe, Solvent, plausibility, prepare};
use crate::spectrum::{RawSpectrum, XUnit, YUnit, check_points, read_points};
use crate::technique::Technique;

/// The recipes of a library, one per technique.
pub type Recipes = BTreeMap<Technique, Recipe>;

/// One spectrum file and what the submitter says about it.
#[derive(Debug, Clone)]
pub struct Submission {
    /// Where to read the file.
    pub path: PathBuf,
    /// The technique.
    pub technique: Technique,
    /// Metadata as given.
    pub metadata: Metadata,
    /// x unit, when not the technique's usual one.
    pub x_unit: Option<XUnit>,
    /// y unit, when declared.
    pub y_unit: Option<YUnit>,
    /// Who submits it.
    pub submitted_by: String,
}

/// A submission read, checked and prepared, ready to store.
#[derive(Debug, Clone)]
pub struct Staged {
    /// The submission, with its metadata normalised.
    pub submission: Submission,
    /// The raw points as read.
    pub raw: RawSpectrum,
    /// The prepared form.
    pub prepared: Prepared,
}

/// The x unit a technique's files use unless told otherwise.
pub fn usual_x_unit(technique: Technique) -> XUnit {
    match technique {
        Technique::Ir | Technique::Raman => XUnit::Wavenumber,
        Technique::MsEi => XUnit::MassToCharge,
        Technique::Nmr1h | Technique::Nmr13c => XUnit::Ppm,
    }
}

/// Reads, checks and prepares one spectrum file with a recipe: the single path every library
/// spectrum and every unknown goes through.
pub fn read_and_prepare(
    path: &Path,
    recipe: &Recipe,
    x_unit: Option<XUnit>,
    y_unit: Option<YUnit>,
    solvent: Option<Solvent>,
) -> Result<(RawSpectrum, Prepared)> {
    let technique = recipe.technique;
    let usual = usual_x_unit(technique);
    let x_unit = x_unit.unwrap_or(usual);
    let allowed = x_unit == usual
        || (technique == Technique::Ir && matches!(x_unit, XUnit::Micrometre | XUnit::Nanometre));
    if !allowed {
        return Err(Error::invalid(
            format!("x unit {x_unit} does not apply to {technique} spectra"),
            format!(
                "{technique} files use {usual}; only IR accepts um or nm, which are converted to cm-1"
            ),
        ));
    }
    let parsed = read_points(path, technique)?;
    let converted = check_points(path, &parsed, technique, x_unit)?;
    let plausible = plausibility(path, &parsed, technique, y_unit)?;
    let conditions = Conditions { y_unit, solvent };
    let mut prepared = prepare(path, recipe, &converted, &conditions)?;
    prepared.warnings.splice(0..0, plausible);
    let raw = RawSpectrum {
        points: parsed.points,
        x_unit,
        y_unit: prepared.y_unit,
        file_sha256: parsed.file_sha256,
    };
    Ok((raw, prepared))
}

/// The extra field that holds a compound's InChIKey.
pub const INCHIKEY: &str = "inchikey";

/// Normalises and checks metadata: a name is required, a formula is rewritten in Hill order,
/// a CAS RN must pass its check digit, an InChIKey (extra field `inchikey`) must have the
/// published form, an NMR solvent must be one whorl knows.
pub fn normalise_metadata(technique: Technique, mut m: Metadata) -> Result<Metadata> {
    m.name = m.name.trim().to_string();
    if m.name.is_empty() {
        return Err(Error::invalid(
            "the compound name is empty",
            "give the compound's name (--name or the name column)",
        ));
    }
    let trim_opt = |v: &mut Option<String>| {
        *v = v
            .take()
            .map(|s| s.trim().to_string())
            .filter(|s| !s.is_empty());
    };
    for v in [
        &mut m.formula,
        &mut m.cas,
        &mut m.solvent,
        &mut m.source,
        &mut m.instrument,
        &mut m.acquired,
        &mut m.notes,
    ] {
        trim_opt(v);
    }
    m.synonyms = m
        .synonyms
        .iter()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .collect();
    m.tags = m
        .tags
        .iter()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .collect();
    if let Some(f) = &m.formula {
        let parsed = parse_formula(f)?;
        check_formula_exists(&parsed)?;
        m.formula = Some(parsed.to_string());
    }
    if let Some(d) = &m.acquired {
        check_date(d, chrono::Utc::now().date_naive())?;
    }
    if let Some(c) = &m.cas {
        m.cas = Some(check_cas(c)?);
    }
    // An InChIKey (a manifest column or `--set inchikey=...`) is part of the compound's
    // identity when there is no CAS RN, so its form is checked and its case made one.
    if let Some(k) = m.extra.get(INCHIKEY) {
        let key = check_inchikey(k)?;
        m.extra.insert(INCHIKEY.into(), key);
    }
    if let Some(s) = &m.solvent {
        let solvent: Solvent = s.parse()?;
        m.solvent = Some(solvent.name().to_string());
    } else if technique == Technique::Nmr1h {
        // Allowed, but the residual signals then stay in; `prepare` warns.
    }
    check_characters(&m)?;
    check_extra_keys(&m)?;
    Ok(m)
}

/// Refuses a formula no structure can have: a negative index of hydrogen deficiency
/// ([`ihd`]) means more hydrogen (or halogen) atoms than the other atoms' valences can bind,
/// such as C3H60, a zero typed for the O of C3H6O. A half-integer IHD (a radical or an ion)
/// is kept: references of salts and ions exist.
fn check_formula_exists(formula: &Formula) -> Result<()> {
    let ihd = ihd(formula)?;
    if ihd < 0.0 {
        return Err(Error::invalid(
            format!(
                "formula {formula} has an index of hydrogen deficiency of {ihd}: no structure \
                 can bind that many hydrogen and halogen atoms"
            ),
            "check the counts (a zero typed for an O, as in C3H60 for C3H6O, is a common slip); \
             `whorl formula` shows what a formula implies",
        ));
    }
    Ok(())
}

/// Checks an acquisition date: ISO 8601 calendar dates as RFC 3339 profiles them, a whole
/// date (2025-05-28), a month (2025-05) or a year (2025), or a date and time with or without
/// an offset (2025-05-28T14:30, 2025-05-28T14:30:00Z, 2025-05-28T14:30:00+02:00); nothing
/// after `today` (allowing a day for time zones).
fn check_date(value: &str, today: chrono::NaiveDate) -> Result<()> {
    use chrono::{DateTime, NaiveDate, NaiveDateTime};
    let bad = |why: &str| {
        Error::invalid(
            format!("acquired date '{}' {why}", crate::error::excerpt(value, 40)),
            "write the date as ISO 8601: YYYY-MM-DD (or YYYY-MM, YYYY, or YYYY-MM-DDTHH:MM with an \
             optional offset such as Z or +02:00)",
        )
    };
    let digits = |s: &str, n: usize| s.len() == n && s.bytes().all(|b| b.is_ascii_digit());
    let date = if let Ok(d) = NaiveDate::parse_from_str(value, "%Y-%m-%d")
        && digits(&value[..4], 4)
        && value.len() == 10
    {
        d
    } else if value.len() == 7
        && digits(&value[..4], 4)
        && &value[4..5] == "-"
        && digits(&value[5..], 2)
    {
        NaiveDate::parse_from_str(&format!("{value}-01"), "%Y-%m-%d")
            .map_err(|_| bad("is not a month of the calendar"))?
    } else if digits(value, 4) {
        NaiveDate::parse_from_str(&format!("{value}-01-01"), "%Y-%m-%d")
            .map_err(|_| bad("is not a year"))?
    } else if let Ok(t) = DateTime::parse_from_rfc3339(value) {
        t.date_naive()
    } else if let Some(t) = ["%Y-%m-%dT%H:%M:%S", "%Y-%m-%dT%H:%M"]
        .iter()
        .find_map(|f| NaiveDateTime::parse_from_str(value, f).ok())
    {
        t.date()
    } else {
        return Err(bad("is not an ISO 8601 date"));
    };
    if date > today + chrono::Days::new(1) {
        return Err(bad("lies in the future"));
    }
    Ok(())
}

/// Refuses control characters in metadata: a newline in a name would forge a line in
/// `whorl log`, an ESC would drive the terminal or break an SVG. Notes may hold line breaks
/// and tabs, nothing else of the kind.
fn check_characters(m: &Metadata) -> Result<()> {
    let mut fields: Vec<(String, &str)> = vec![("name".into(), m.name.as_str())];
    fields.extend(m.text_fields().map(|(f, v)| (f.to_string(), v)));
    fields.extend(m.synonyms.iter().map(|s| ("synonym".into(), s.as_str())));
    fields.extend(m.tags.iter().map(|s| ("tag".into(), s.as_str())));
    for (k, v) in &m.extra {
        fields.push((k.clone(), v.as_str()));
        fields.push(("a metadata key".into(), k.as_str()));
    }
    let notes = m.notes.iter().map(|n| ("notes".to_string(), n.as_str()));
    for (field, value) in fields.into_iter().chain(notes) {
        let allowed = |c: char| field == "notes" && matches!(c, '\n' | '\t');
        if let Some(c) = value.chars().find(|&c| c.is_control() && !allowed(c)) {
            return Err(Error::invalid(
                format!(
                    "{} holds a control character (U+{:04X}): '{}'",
                    crate::error::excerpt(&field, 40),
                    u32::from(c),
                    crate::error::excerpt(value, 60)
                ),
                "remove line breaks, escape sequences and other control characters from the metadata",
            ));
        }
    }
    Ok(())
}

/// Refuses extra metadata keys that are empty, that spell one of the manifest's own columns
/// in another case or with spaces (`Name`, `submitted by`), or that take the prefix of the
/// columns whorl writes into bundles (`whorl_status`): each would be read back as something
/// it is not, or lost.
fn check_extra_keys(m: &Metadata) -> Result<()> {
    for key in m.extra.keys() {
        let folded: String = key
            .trim()
            .to_lowercase()
            .chars()
            .map(|c| if c == ' ' || c == '-' { '_' } else { c })
            .collect();
        let reason = if folded.is_empty() {
            Some("is empty".to_string())
        } else if folded.starts_with(super::manifest::PROVENANCE_PREFIX) {
            Some(format!(
                "starts with '{}', which whorl keeps for the columns it writes",
                super::manifest::PROVENANCE_PREFIX
            ))
        } else if super::manifest::KNOWN_COLUMNS.contains(&folded.as_str()) {
            Some(format!("is the '{folded}' field in another spelling"))
        } else {
            None
        };
        if let Some(reason) = reason {
            return Err(Error::invalid(
                format!(
                    "the metadata key '{}' {reason}",
                    crate::error::excerpt(key, 40)
                ),
                "give the value through its own option or column, or name the key differently",
            ));
        }
    }
    Ok(())
}

/// Stages one submission: metadata checked, file read and prepared with the library's recipe.
/// An EI mass spectrum with a formula is also checked against it (`chem::ms_formula_warnings`);
/// what does not fit becomes a warning in the prepared spectrum, stored with it.
pub fn stage(recipes: &Recipes, mut submission: Submission) -> Result<Staged> {
    let recipe = recipes.get(&submission.technique).ok_or_else(|| {
        Error::invalid(
            format!("this library has no recipe for {}", submission.technique),
            "re-create the library with `whorl init`",
        )
    })?;
    submission.metadata = normalise_metadata(submission.technique, submission.metadata)?;
    let solvent = submission
        .metadata
        .solvent
        .as_deref()
        .map(str::parse::<Solvent>)
        .transpose()?;
    let (raw, mut prepared) = read_and_prepare(
        &submission.path,
        recipe,
        submission.x_unit,
        submission.y_unit,
        solvent,
    )?;
    if submission.technique == Technique::MsEi
        && let Some(formula) = &submission.metadata.formula
    {
        // A base peak or a molecular ion the formula cannot give is worth a warning, not a
        // refusal: the formula may be wrong, or the spectrum may hold background ions.
        let formula = parse_formula(formula)?;
        let peaks: Vec<(f64, f64)> = prepared.peaks.iter().map(|p| (p.x, p.height)).collect();
        prepared
            .warnings
            .extend(ms_formula_warnings(&formula, &peaks));
    }
    Ok(Staged {
        submission,
        raw,
        prepared,
    })
}

/// Prepares a stored spectrum again from what the library holds of it: its raw blob, the
/// names of its x and y units and its metadata's solvent; `spectrum:ID` names it in errors.
pub fn prepare_stored(
    id: i64,
    recipe: &Recipe,
    raw: &[u8],
    x_unit: &str,
    y_unit: &str,
    solvent: Option<&str>,
) -> Result<Prepared> {
    let points = crate::spectrum::decode_points(raw).ok_or_else(|| {
        Error::invalid(
            format!("the raw points of spectrum {id} cannot be decoded"),
            "run `whorl check`",
        )
    })?;
    let solvent = solvent.map(str::parse::<Solvent>).transpose()?;
    prepare_raw(
        &PathBuf::from(format!("spectrum:{id}")),
        recipe,
        &points,
        x_unit.parse()?,
        y_unit.parse()?,
        solvent,
    )
}

/// Prepares stored raw points again (after a revision changes the solvent, or to verify the
/// stored prepared form). Gives exactly what the import gave, because the y unit stored is the
/// one the import used.
pub fn prepare_raw(
    label: &Path,
    recipe: &Recipe,
    points: &[(f64, f64)],
    x_unit: XUnit,
    y_unit: YUnit,
    solvent: Option<Solvent>,
) -> Result<Prepared> {
    let converted: Vec<(f64, f64)> = points
        .iter()
        .map(|&(x, y)| (x_unit.to_wavenumber(x), y))
        .collect();
    let conditions = Conditions {
        y_unit: Some(y_unit),
        solvent,
    };
    prepare(label, recipe, &converted, &conditions)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn today() -> chrono::NaiveDate {
        chrono::NaiveDate::from_ymd_opt(2026, 12, 3).unwrap()
    }

    #[test]
    fn iso_8601_dates_pass_and_others_are_refused() {
        // ISO 8601-1:2019 calendar dates (complete, reduced to month or year) and RFC 3339
        // date-times; the examples are from memory of both standards' forms.
        for ok in [
            "2025-05-28",
            "2025-05",
            "2025",
            "2024-02-29",
            "2025-05-28T14:30",
            "2025-05-28T14:30:00",
            "2025-05-28T14:30:00Z",
            "2025-05-28T14:30:00+02:00",
            "2026-12-04",
        ] {
            assert!(check_date(ok, today()).is_ok(), "{ok}");
        }
        for bad in [
            "last tuesday",
            "28/05/2025",
            "2025-5-28",
            "2025-13",
            "2025-02-30",
            "2023-02-29",
            "20250528",
            "25-05-28",
            "2025-05-28 junk",
            "2026-12-06",
            "3025",
        ] {
            let e = check_date(bad, today()).unwrap_err().to_string();
            assert!(e.contains("acquired date"), "{bad}: {e}");
        }
    }

    #[test]
    fn a_formula_with_a_negative_ihd_is_refused() {
        // IHD = C - H/2 + N/2 + 1 (common practice): C3H6O has 1, C3H60 has -26, CH4 has 0,
        // and C2H7 (more H than two carbons can bind) has -0.5.
        for (f, ok) in [
            ("C3H6O", true),
            ("CH4", true),
            ("C6H6", true),
            ("C2H3NaO2", true),
            ("CH3", true),
            ("C3H60", false),
            ("C2H7", false),
            ("CH5", false),
        ] {
            let r = check_formula_exists(&parse_formula(f).unwrap());
            assert_eq!(r.is_ok(), ok, "{f}: {r:?}");
        }
        let e = check_formula_exists(&parse_formula("C3H60").unwrap())
            .unwrap_err()
            .to_string();
        assert!(e.contains("-26"), "{e}");
    }
}
