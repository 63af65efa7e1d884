//! Whether a new file's y values can be what its technique and unit say: refused where they
//! cannot be a spectrum of that kind, a warning where they may be legitimate but usually mean
//! a wrong unit or a processed export. Run on new input only (an import, a search's unknown),
//! never on stored spectra prepared again, which were accepted under the rules of their day.

use std::path::Path;

use super::optical::{detect_optical_y_unit, unit_is_ambiguous};
use crate::error::{Error, Location, Result};
use crate::spectrum::{ParsedPoints, YUnit};
use crate::technique::Technique;

/// The highest absorbance a spectrometer measures: at A = 5 the sample passes 1e-5 of the
/// light (A = -log10(T), Beer-Lambert; IUPAC Gold Book, "absorbance"), below the stray light
/// of any dispersive or FT-IR instrument, whose photometric range ends near A = 3-4 (common
/// practice). Higher values are a scaled export or another unit.
const MAX_ABSORBANCE: f64 = 5.0;

/// Percent transmittance beyond which the values cannot be transmittance: a sample passes at
/// most the light of the reference (T <= 1), and a drifting background puts a baseline a few
/// percent above 100, not more (common practice). As a fraction: 1.1.
const MAX_PERCENT_T: f64 = 110.0;

/// Percent transmittance below which the values cannot be transmittance: detector noise at a
/// fully absorbing band reads a little below 0 %T, not more (common practice). As a fraction:
/// -0.05.
const MIN_PERCENT_T: f64 = -5.0;

/// Checks the y values of a file just read, in the unit declared (`declared`) or the one an
/// undeclared IR file will be read in. Returns the warnings to show and store; refuses, with
/// the file and line, values that cannot be the technique's spectrum in that unit.
pub fn plausibility(
    path: &Path,
    parsed: &ParsedPoints,
    technique: Technique,
    declared: Option<YUnit>,
) -> Result<Vec<String>> {
    let mut warnings = Vec::new();
    let ys: Vec<f64> = parsed.points.iter().map(|p| p.1).collect();
    let at = |i: usize| Location::line(path, parsed.lines[i]);
    // The line of the largest and the smallest value, for the messages.
    let arg = |better: fn(f64, f64) -> bool| {
        (0..ys.len()).fold(0, |best, i| if better(ys[i], ys[best]) { i } else { best })
    };
    let (hi, lo) = (arg(|a, b| a > b), arg(|a, b| a < b));
    let (max, min) = (ys[hi], ys[lo]);

    // A constant y holds no profile spectrum. Peak lists may have equal heights: a 13C shift
    // list often gives every line the same height, and an EI list of equal abundances is odd
    // but possible.
    let profile = matches!(
        technique,
        Technique::Ir | Technique::Raman | Technique::Nmr1h
    );
    if profile && ys.len() > 1 && max == min {
        return Err(Error::input(
            Location::file(path),
            format!(
                "every y value is {max}: a flat line holds no {technique} spectrum (lines {} to {})",
                parsed.lines[0],
                parsed.lines[parsed.lines.len() - 1]
            ),
            "check the y column: the export may hold a constant (a blank, a fill value) instead of the measured signal",
        ));
    }

    if technique == Technique::Raman && max < 0.0 {
        warnings.push(format!(
            "every Raman intensity is negative (the largest is {max} at line {}): a detector counts photons, so these were offset or sign-flipped after measurement; an offset is removed with the baseline, but a flipped spectrum matches nothing, so export the raw counts if you can",
            parsed.lines[hi]
        ));
    }

    if technique != Technique::Ir {
        return Ok(warnings);
    }
    let sorted_ys = {
        let mut order: Vec<usize> = (0..ys.len()).collect();
        order.sort_by(|&a, &b| parsed.points[a].0.total_cmp(&parsed.points[b].0));
        order.into_iter().map(|i| ys[i]).collect::<Vec<f64>>()
    };
    let unit = declared.unwrap_or_else(|| detect_optical_y_unit(technique, &sorted_ys));
    match unit {
        YUnit::Absorbance if max > MAX_ABSORBANCE => {
            let looks_percent = ys
                .iter()
                .all(|&y| (MIN_PERCENT_T..=MAX_PERCENT_T).contains(&y))
                && detect_optical_y_unit(technique, &sorted_ys) == YUnit::TransmittancePercent;
            if looks_percent {
                return Err(Error::input(
                    at(hi),
                    format!(
                        "absorbance {max} cannot be measured (the sample would pass 1e{:.0} of the light, A = -log10 T), and the values sit near their top with dips, as percent transmittance does",
                        -max.min(999.0)
                    ),
                    "declare the unit as transmittance-percent (--y-unit transmittance-percent, or y_unit in the manifest)",
                ));
            }
            warnings.push(format!(
                "absorbance reaches {max} at line {}, beyond what a spectrometer measures (about {MAX_ABSORBANCE}); read as scaled absorbance: check the unit if the file is not scaled",
                parsed.lines[hi]
            ));
        }
        YUnit::Transmittance | YUnit::TransmittancePercent => {
            let scale = if unit == YUnit::Transmittance {
                0.01
            } else {
                1.0
            };
            let (top, bottom) = (MAX_PERCENT_T * scale, MIN_PERCENT_T * scale);
            let named = if declared.is_some() {
                format!("declared {unit}")
            } else {
                format!("{unit} (detected)")
            };
            if max > top {
                let hint = if unit == YUnit::Transmittance && max <= MAX_PERCENT_T {
                    "these look like percent: declare --y-unit transmittance-percent (or y_unit in the manifest)"
                } else {
                    "check the unit: transmittance cannot exceed what the reference passes; declare absorbance or counts if that is what the file holds"
                };
                return Err(Error::input(
                    at(hi),
                    format!(
                        "{named} of {max} is more than the reference beam passes ({} at most)",
                        if unit == YUnit::Transmittance {
                            "1.1"
                        } else {
                            "110 %"
                        }
                    ),
                    hint,
                ));
            }
            if min < bottom {
                return Err(Error::input(
                    at(lo),
                    format!(
                        "{named} of {min} is below zero by more than detector noise ({bottom} at least): these are not transmittance values"
                    ),
                    "check the unit and the export: declare absorbance if the file holds absorbance",
                ));
            }
            let floor: Vec<usize> = (0..ys.len()).filter(|&i| ys[i] <= 0.0).collect();
            if let Some(&first) = floor.first() {
                warnings.push(format!(
                    "{} value(s) at or below zero transmittance (first at line {}) are read as absorbance 4 (T is taken as at least 1e-4): fully absorbing bands, whose shape is lost; a thinner sample or a shorter path keeps it",
                    floor.len(),
                    parsed.lines[first]
                ));
            }
            if max > 100.0 * scale * 1.02 {
                warnings.push(format!(
                    "transmittance reaches {max} at line {}, above 100 %: the background was probably measured under other conditions; the baseline correction absorbs a small offset",
                    parsed.lines[hi]
                ));
            }
        }
        YUnit::Absorbance if declared.is_none() && unit_is_ambiguous(&sorted_ys) => {
            warnings.push(
                "y unit not declared: the values sit high like transmittance, but the ends of the spectrum (its baseline) sit low, as absorbance does; read as absorbance, declare --y-unit if that is wrong"
                    .to_string(),
            );
        }
        _ => {}
    }
    Ok(warnings)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parsed(ys: &[f64]) -> ParsedPoints {
        ParsedPoints {
            points: ys
                .iter()
                .enumerate()
                .map(|(i, &y)| (400.0 + 2.0 * i as f64, y))
                .collect(),
            // A header line first: data starts on line 2.
            lines: (2..ys.len() + 2).collect(),
            header: Some("x,y".into()),
            file_sha256: String::new(),
            one_column: false,
        }
    }

    fn check(technique: Technique, unit: Option<YUnit>, ys: &[f64]) -> Result<Vec<String>> {
        plausibility(Path::new("f.csv"), &parsed(ys), technique, unit)
    }

    /// A percent-transmittance spectrum: baseline 90 %, one band dipping to `bottom`.
    fn percent_t(bottom: f64) -> Vec<f64> {
        (0..200)
            .map(|i| {
                let d = (f64::from(i) - 100.0) / 6.0;
                90.0 - (90.0 - bottom) * (-d * d).exp()
            })
            .collect()
    }

    #[test]
    fn percent_transmittance_declared_as_absorbance_is_refused_at_its_largest_value() {
        let ys = percent_t(20.0);
        let err = check(Technique::Ir, Some(YUnit::Absorbance), &ys).unwrap_err();
        let text = format!("{err}");
        // The largest value, 90, is the first point: line 2.
        assert!(
            text.contains("f.csv:2") && text.contains("absorbance 90"),
            "{text}"
        );
        assert!(err.hint().unwrap().contains("transmittance-percent"));
        // The same values declared as %T are a spectrum.
        assert!(
            check(Technique::Ir, Some(YUnit::TransmittancePercent), &ys)
                .unwrap()
                .is_empty()
        );
        // Absorbance scaled to 100 (a band on a zero baseline) is a warning, not a refusal.
        let scaled: Vec<f64> = ys.iter().map(|y| 90.0 - y).collect();
        let w = check(Technique::Ir, Some(YUnit::Absorbance), &scaled).unwrap();
        assert!(w[0].contains("scaled absorbance"), "{w:?}");
    }

    #[test]
    fn transmittance_beyond_the_reference_or_far_below_zero_is_refused() {
        // %T up to 300: a sample cannot pass three times the reference beam.
        let mut ys = percent_t(20.0);
        ys[150] = 300.0;
        let err = check(Technique::Ir, Some(YUnit::TransmittancePercent), &ys).unwrap_err();
        assert!(format!("{err}").contains("f.csv:152"), "{err}");
        // A fraction that reaches 90 is percent.
        let err = check(Technique::Ir, Some(YUnit::Transmittance), &percent_t(20.0)).unwrap_err();
        assert!(
            err.hint().unwrap().contains("transmittance-percent"),
            "{err}"
        );
        // -30 %T is not noise.
        let err = check(
            Technique::Ir,
            Some(YUnit::TransmittancePercent),
            &percent_t(-30.0),
        )
        .unwrap_err();
        assert!(
            format!("{err}").contains("f.csv:102") && format!("{err}").contains("-30"),
            "{err}"
        );
    }

    #[test]
    fn transmittance_at_zero_or_a_little_above_100_is_a_warning() {
        // A band bottoming out at -1 %T: noise at total absorption, clipped to A = 4.
        let w = check(
            Technique::Ir,
            Some(YUnit::TransmittancePercent),
            &percent_t(-1.0),
        )
        .unwrap();
        assert!(
            w.iter()
                .any(|w| w.contains("at or below zero") && w.contains("absorbance 4")),
            "{w:?}"
        );
        // Detected, not declared, it is still said.
        let w = check(Technique::Ir, None, &percent_t(-1.0)).unwrap();
        assert!(w.iter().any(|w| w.contains("at or below zero")), "{w:?}");
        let high: Vec<f64> = percent_t(20.0).iter().map(|y| y + 15.0).collect();
        let w = check(Technique::Ir, Some(YUnit::TransmittancePercent), &high).unwrap();
        assert!(w.iter().any(|w| w.contains("above 100 %")), "{w:?}");
    }

    #[test]
    fn a_constant_y_is_refused_and_a_peak_list_of_equal_heights_is_not() {
        for t in [Technique::Ir, Technique::Raman, Technique::Nmr1h] {
            let err = check(t, None, &[0.5; 50]).unwrap_err();
            assert!(format!("{err}").contains("flat line"), "{t}: {err}");
            assert!(format!("{err}").contains("lines 2 to 51"), "{t}: {err}");
        }
        let mut list = parsed(&[1.0; 20]);
        assert!(plausibility(Path::new("l.csv"), &list, Technique::Nmr13c, None).is_ok());
        list.one_column = true;
        assert!(plausibility(Path::new("l.csv"), &list, Technique::Nmr13c, None).is_ok());
        assert!(check(Technique::MsEi, None, &[100.0; 5]).is_ok());
    }

    #[test]
    fn all_negative_raman_counts_are_a_warning() {
        let ys: Vec<f64> = (0..100)
            .map(|i| -500.0 + if i == 40 { 300.0 } else { 0.0 })
            .collect();
        let w = check(Technique::Raman, None, &ys).unwrap();
        assert!(
            w[0].contains("every Raman intensity is negative") && w[0].contains("line 42"),
            "{w:?}"
        );
        let mut some = ys.clone();
        some[10] = 5.0;
        assert!(check(Technique::Raman, None, &some).unwrap().is_empty());
    }

    #[test]
    fn an_undeclared_narrow_absorbance_band_is_read_as_absorbance_with_a_warning() {
        let band: Vec<f64> = (0..61)
            .map(|i| 0.95 * (-((f64::from(i) - 30.0) / 22.0).powi(2)).exp())
            .collect();
        let w = check(Technique::Ir, None, &band).unwrap();
        assert!(w.iter().any(|w| w.contains("read as absorbance")), "{w:?}");
    }
}
