//! A plot on a page: the report layer's static SVG (what a browser without JavaScript, a
//! printout and the printable report show) and the same spectra as JSON in a `data-plot`
//! attribute, which `assets/plot.js` draws again with zoom and pan, stacking, a difference
//! trace and peak labels. Curves are sent as their grid start, step and values scaled to their
//! own maximum (as the static plot scales them) with their picked peaks' positions, EI spectra
//! as their sticks.

use serde::Serialize;
use whorl::prepare::Prepared;
use whorl::report::Series;
use whorl::technique::{Grid, Technique};

use super::super::error::ApiError;

/// One plot as the template shows it.
pub struct PlotView {
    /// Element id.
    pub id: String,
    /// The caption.
    pub caption: String,
    /// The static SVG (escaped by the report layer).
    pub svg: String,
    /// The spectra as JSON, for the interactive plot.
    pub data: String,
}

#[derive(Serialize)]
struct Data<'a> {
    /// The x quantity and unit.
    x: &'a str,
    /// "down" where the trade draws x decreasing to the right (wavenumbers, chemical
    /// shifts), "up" for m/z.
    dir: &'static str,
    /// Two EI spectra: the first above the axis, the second below.
    mirror: bool,
    /// Decimals of a peak label, as the report layer writes them.
    digits: u8,
    series: Vec<SeriesData<'a>>,
}

#[derive(Serialize)]
struct SeriesData<'a> {
    label: &'a str,
    #[serde(skip_serializing_if = "Option::is_none")]
    x0: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    dx: Option<f64>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    y: Vec<f32>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    sticks: Vec<(f64, f64)>,
    /// A curve's picked peaks (positions on x).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    peaks: Vec<f64>,
}

/// Decimals of a peak position as the trade writes it and the report layer labels it: 0.01
/// ppm for 1H, 0.1 ppm for 13C, whole wavenumbers and m/z (common practice).
pub fn label_digits(t: Technique) -> u8 {
    match t {
        Technique::Nmr1h => 2,
        Technique::Nmr13c => 1,
        _ => 0,
    }
}

/// The trade's direction of x: wavenumber, Raman shift and chemical shift decrease to the
/// right, m/z increases (common practice; the report layer's axes do the same).
pub fn descending(t: Technique) -> bool {
    !matches!(t, Technique::MsEi)
}

fn data(grid: &Grid, series: &[(&str, &Prepared)]) -> Result<String, ApiError> {
    let technique = series
        .first()
        .map(|s| s.1.technique)
        .unwrap_or(Technique::Ir);
    let sticks = technique == Technique::MsEi;
    let out = Data {
        x: technique.x_label(),
        dir: if descending(technique) { "down" } else { "up" },
        mirror: sticks && series.len() == 2,
        digits: label_digits(technique),
        series: series
            .iter()
            .map(|(label, p)| {
                if sticks {
                    SeriesData {
                        label,
                        x0: None,
                        dx: None,
                        y: Vec::new(),
                        sticks: p.peaks.iter().map(|k| (k.x, round(k.height))).collect(),
                        peaks: Vec::new(),
                    }
                } else {
                    let max = p.vector.iter().copied().fold(0f32, f32::max);
                    let scale = if max > 0.0 { 1.0 / max } else { 0.0 };
                    SeriesData {
                        label,
                        x0: Some(grid.start),
                        dx: Some(grid.step),
                        y: p.vector
                            .iter()
                            .map(|v| (v.max(0.0) * scale * 1000.0).round() / 1000.0)
                            .collect(),
                        sticks: Vec::new(),
                        peaks: p.peaks.iter().map(|k| round(k.x)).collect(),
                    }
                }
            })
            .collect(),
    };
    Ok(serde_json::to_string(&out).map_err(whorl::Error::from)?)
}

fn round(v: f64) -> f64 {
    (v * 1000.0).round() / 1000.0
}

/// An unknown laid over one reference (a mirror plot for EI-MS), as the search report draws it.
pub fn overlay(
    id: String,
    caption: String,
    grid: &Grid,
    unknown: (&str, &Prepared),
    reference: (&str, &Prepared),
    tolerance: f64,
) -> Result<PlotView, ApiError> {
    let svg = whorl::report::overlay(grid, unknown, reference, tolerance)?;
    Ok(PlotView {
        id,
        caption,
        svg,
        data: data(grid, &[unknown, reference])?,
    })
}

/// Spectra of one technique on one axis, the first drawn as the main one.
pub fn spectra(
    id: String,
    caption: String,
    grid: &Grid,
    series: &[(&str, &Prepared)],
) -> Result<PlotView, ApiError> {
    let list: Vec<Series<'_>> = series
        .iter()
        .map(|(label, p)| Series {
            label: label.to_string(),
            prepared: p,
        })
        .collect();
    let svg = whorl::report::spectra(grid, &list)?;
    Ok(PlotView {
        id,
        caption,
        svg,
        data: data(grid, series)?,
    })
}
