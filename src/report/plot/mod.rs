//! SVG plots of prepared spectra: an unknown laid over a reference, and any number of
//! spectra on one axis.
//!
//! Drawing uses plotters' SVG backend without its `ttf` feature. Without it plotters needs no
//! font library (no fontconfig, no FreeType): it estimates text extents from the character
//! count, which is all the layout here relies on (the label areas have fixed sizes), and writes
//! every piece of text as an SVG `<text>` element, escaped, that the browser sets in its own
//! sans-serif font. The build stays free of system libraries and the text stays selectable.
//!
//! Axes follow the trade: wavenumber and Raman shift decrease from left to right, so do
//! chemical shifts, and an EI mass spectrum of an unknown against a reference is a mirrored
//! stick plot, unknown above the axis and reference below it. Descending axes are drawn by
//! plotting `-x` and labelling the ticks with `x`.
//!
//! Colours come from the Okabe-Ito palette, which stays distinct for the common forms of
//! colour blindness, and each role differs in more than hue so that a greyscale print still
//! tells them apart: the unknown is a heavy near-black line, the reference a pale filled
//! silhouette with a thin blue edge drawn translucent over that line (so a close match hides
//! neither), and further spectra in a multi-spectrum plot get dash patterns as well as
//! colours.
//!
//! `overlay` and `spectra` here choose what to draw; `axis` holds the x range, its direction,
//! the frame and the tick text; `render` the SVG canvas with its legend band and the masked
//! regions; `labels` which peaks get a label; `mirror` the EI-MS mirror plot.

mod axis;
mod labels;
mod mirror;
mod render;

use plotters::prelude::*;

use crate::error::{Error, Result};
use crate::prepare::Prepared;
use crate::technique::{Grid, Technique};

use axis::{Axis, frame, tick};
use labels::{Candidate, draw_labels, peak_candidates, pick_labels, pick_labels_by};
use mirror::mirror;
use render::{Swatch, masks, render};

/// The chart, drawing area and result types every part of the plot draws with.
pub(super) type Chart<'a, 'b> = ChartContext<
    'a,
    SVGBackend<'b>,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;
pub(super) type Area<'b> = DrawingArea<SVGBackend<'b>, plotters::coord::Shift>;
pub(super) type DrawResult<T = ()> = std::result::Result<T, Box<dyn std::error::Error>>;

/// Width of every plot in SVG pixels; the page scales it down on narrow screens.
pub const WIDTH: u32 = 1000;
const PLOT_HEIGHT: u32 = 390;
const LEGEND_ROW: u32 = 24;
const FONT: &str = "sans-serif";
// plotters writes font-size = size / 1.24, so these are about 14.5, 15.3 and 12.9 px.
const TICK_SIZE: f64 = 18.0;
const AXIS_SIZE: f64 = 19.0;
const PEAK_SIZE: f64 = 16.0;
/// Height of a peak label in y units of a 0..1.18 plot (16 px of about 320), with room to spare.
const LINE: f64 = 0.09;

/// Text and axes, and the unknown's line.
pub const INK: RGBColor = RGBColor(0x1A, 0x1A, 0x1A);
/// Okabe-Ito blue: the reference's edge and sticks.
pub const BLUE: RGBColor = RGBColor(0x00, 0x72, 0xB2);
/// Okabe-Ito sky blue: the reference's silhouette, drawn pale.
pub const SKY: RGBColor = RGBColor(0x56, 0xB4, 0xE9);
/// Okabe-Ito vermilion: marks matched ions.
pub const VERMILION: RGBColor = RGBColor(0xD5, 0x5E, 0x00);
const GRID_LINE: RGBColor = RGBColor(0xE4, 0xE4, 0xE4);
const MASK_FILL: RGBColor = RGBColor(0xF1, 0xF1, 0xF1);
const MUTED: RGBColor = RGBColor(0x6B, 0x6B, 0x6B);

/// Colours of the spectra of a multi-spectrum plot, in order (Okabe-Ito, yellow left out as
/// too faint on white).
const SERIES: [RGBColor; 7] = [
    INK,
    BLUE,
    VERMILION,
    RGBColor(0x00, 0x9E, 0x73),
    RGBColor(0xCC, 0x79, 0xA7),
    RGBColor(0xE6, 0x9F, 0x00),
    SKY,
];
/// Dash length and gap in pixels of the spectra of a multi-spectrum plot; the first is solid.
const DASHES: [Option<(u32, u32)>; 4] = [None, Some((9, 5)), Some((3, 4)), Some((16, 5))];

/// One spectrum of a multi-spectrum plot and the legend text it goes by: a line, or sticks
/// for EI-MS.
#[derive(Debug, Clone)]
pub struct Series<'a> {
    /// What the legend calls it.
    pub label: String,
    /// The spectrum as prepared with the library's recipe.
    pub prepared: &'a Prepared,
}

/// An unknown laid over one reference, both prepared on the same grid: a curve overlay for
/// IR, Raman and 1H NMR, a mirrored stick plot for EI-MS with ions present in both marked.
/// `tolerance` is the peak-matching tolerance, used to label reference peaks the unknown
/// lacks.
pub fn overlay(
    grid: &Grid,
    unknown: (&str, &Prepared),
    reference: (&str, &Prepared),
    tolerance: f64,
) -> Result<String> {
    let technique = unknown.1.technique;
    if technique == Technique::MsEi {
        return mirror(
            [unknown, reference],
            [
                Swatch::Stick(INK),
                Swatch::Stick(BLUE),
                Swatch::Marker(VERMILION),
            ],
            true,
        );
    }
    let (u, r) = (unknown.1, reference.1);
    let cu = curve(grid, u);
    let cr = curve(grid, r);
    let axis = Axis::for_curves(technique, grid, &[&cu, &cr]);
    let legend = [
        (Swatch::Line(INK, None), format!("unknown: {}", unknown.0)),
        (Swatch::Area, format!("reference: {}", reference.0)),
    ];
    render(&legend, |area| {
        let mut chart = frame(area, &axis, (0.0, 1.18))?;
        masks(&mut chart, &axis, grid)?;
        let shown = |c: &Vec<(f64, f64)>| -> Vec<(f64, f64)> {
            c.iter()
                .filter(|p| axis.contains(p.0))
                .map(|&(x, y)| (axis.to_plot(x), y))
                .collect()
        };
        // The unknown first, the reference's translucent silhouette over it: where the two
        // coincide (a good match) the unknown's heavy line would otherwise cover the
        // reference's fill and edge; drawn this way both stay visible, the line tinted blue.
        chart.draw_series(LineSeries::new(
            shown(&cu),
            ShapeStyle::from(INK).stroke_width(2),
        ))?;
        chart.draw_series(
            AreaSeries::new(shown(&cr), 0.0, SKY.mix(0.35))
                .border_style(ShapeStyle::from(BLUE).stroke_width(1)),
        )?;
        // The unknown's strongest peaks, then the reference's strongest peaks that have no
        // partner in the unknown: those are the differences an analyst looks for.
        let mut cands = peak_candidates(grid, u, &cu, &axis, INK);
        let unknown_x: Vec<f64> = u.peaks.iter().map(|p| p.x).collect();
        let mut missing = peak_candidates(grid, r, &cr, &axis, BLUE);
        missing.retain(|c| unknown_x.iter().all(|&x| (x - c.x).abs() > tolerance));
        missing.truncate(4);
        cands.extend(missing);
        draw_labels(
            &mut chart,
            &axis,
            pick_labels_by(cands, axis.span() * 0.04, LINE, 12),
        )?;
        Ok(())
    })
}

/// Several spectra of one technique on one axis, for `whorl plot`. Two EI-MS spectra are
/// mirrored like an overlay; more are drawn side by side around each nominal mass.
pub fn spectra(grid: &Grid, series: &[Series<'_>]) -> Result<String> {
    let Some(first) = series.first() else {
        return Err(Error::invalid(
            "nothing to plot",
            "name at least one library id or spectrum file",
        ));
    };
    let technique = first.prepared.technique;
    if let Some(t) = series.iter().find(|t| t.prepared.technique != technique) {
        return Err(Error::invalid(
            format!(
                "'{}' is a {} spectrum, '{}' is {}: one plot holds one technique",
                t.label, t.prepared.technique, first.label, technique
            ),
            "plot each technique separately",
        ));
    }
    if technique == Technique::MsEi && series.len() == 2 {
        return mirror(
            [
                (&series[0].label, series[0].prepared),
                (&series[1].label, series[1].prepared),
            ],
            [
                Swatch::Stick(SERIES[0]),
                Swatch::Stick(SERIES[1]),
                Swatch::Marker(VERMILION),
            ],
            false,
        );
    }
    let style = |i: usize| (SERIES[i % SERIES.len()], DASHES[i % DASHES.len()]);
    let legend: Vec<(Swatch, String)> = series
        .iter()
        .enumerate()
        .map(|(i, t)| {
            let (c, d) = style(i);
            let swatch = if technique == Technique::MsEi {
                Swatch::Stick(c)
            } else {
                Swatch::Line(c, d)
            };
            (swatch, t.label.clone())
        })
        .collect();
    if technique == Technique::MsEi {
        let all: Vec<&Prepared> = series.iter().map(|t| t.prepared).collect();
        let axis = Axis::for_ions(&all);
        let n = series.len() as f64;
        return render(&legend, |area| {
            let mut chart = frame(area, &axis, (0.0, 1.18))?;
            let mut cands = Vec::new();
            for (i, t) in series.iter().enumerate() {
                let (c, _) = style(i);
                let dx = (i as f64 - (n - 1.0) / 2.0) * 0.6 / n.max(1.0);
                chart.draw_series(t.prepared.peaks.iter().map(|p| {
                    PathElement::new(
                        vec![(p.x + dx, 0.0), (p.x + dx, p.height)],
                        ShapeStyle::from(c).stroke_width(2),
                    )
                }))?;
                cands.extend(t.prepared.peaks.iter().map(|p| Candidate {
                    x: p.x,
                    y: p.height,
                    text: tick(p.x),
                    colour: c,
                    below: false,
                }));
            }
            draw_labels(
                &mut chart,
                &axis,
                pick_labels(cands, axis.span() * 0.03, 12),
            )?;
            Ok(())
        });
    }
    let curves: Vec<Vec<(f64, f64)>> = series.iter().map(|t| curve(grid, t.prepared)).collect();
    let refs: Vec<&Vec<(f64, f64)>> = curves.iter().collect();
    let axis = Axis::for_curves(technique, grid, &refs);
    render(&legend, |area| {
        let mut chart = frame(area, &axis, (0.0, 1.18))?;
        masks(&mut chart, &axis, grid)?;
        let mut cands = Vec::new();
        for (i, (t, c)) in series.iter().zip(&curves).enumerate() {
            let (colour, dash) = style(i);
            let pts: Vec<(f64, f64)> = c
                .iter()
                .filter(|p| axis.contains(p.0))
                .map(|&(x, y)| (axis.to_plot(x), y))
                .collect();
            let line = ShapeStyle::from(colour).stroke_width(2);
            match dash {
                None => {
                    chart.draw_series(LineSeries::new(pts, line))?;
                }
                Some((size, gap)) => {
                    chart.draw_series(DashedLineSeries::new(pts, size, gap, line))?;
                }
            }
            let mut own = peak_candidates(grid, t.prepared, c, &axis, colour);
            own.truncate(6);
            cands.extend(own);
        }
        draw_labels(
            &mut chart,
            &axis,
            pick_labels_by(cands, axis.span() * 0.04, LINE, 14),
        )?;
        Ok(())
    })
}

/// A prepared vector as (x, y) on its grid, scaled so that its largest value is 1.
fn curve(grid: &Grid, p: &Prepared) -> Vec<(f64, f64)> {
    let max = p.vector.iter().copied().fold(0f32, f32::max);
    let scale = if max > 0.0 { 1.0 / f64::from(max) } else { 0.0 };
    p.vector
        .iter()
        .enumerate()
        .map(|(i, &v)| (grid.x(i), f64::from(v).max(0.0) * scale))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::fixtures::{ions, ir};

    #[test]
    fn one_plot_holds_one_technique() {
        let a = ions(&[(43.0, 1.0)]);
        let b = ir(&[(1715.0, 1.0)]);
        let err = spectra(
            &Technique::Ir.default_grid(),
            &[
                Series {
                    label: "a".into(),
                    prepared: &a,
                },
                Series {
                    label: "b".into(),
                    prepared: &b,
                },
            ],
        )
        .unwrap_err();
        assert!(err.to_string().contains("one technique"), "{err}");
    }

    #[test]
    fn the_reference_silhouette_is_drawn_over_the_unknowns_line() {
        // SVG paints in document order (SVG 1.1, section 3.3 "Rendering order"), so the
        // translucent reference area must come after the unknown's polyline to stay visible
        // where the two coincide.
        let u = ir(&[(1715.0, 1.0), (2950.0, 0.6)]);
        let r = ir(&[(1712.0, 0.9), (2950.0, 0.5)]);
        let grid = Technique::Ir.default_grid();
        let svg = overlay(&grid, ("u", &u), ("r", &r), 8.0).unwrap();
        let first = |tag: &str, colour: &str| {
            svg.match_indices(tag)
                .map(|(i, _)| i)
                .find(|&i| svg[i..].split('>').next().unwrap().contains(colour))
        };
        let line = first("<polyline", "#1A1A1A").expect("the unknown's line");
        let area = first("<polygon", "#56B4E9").expect("the reference's silhouette");
        assert!(area > line, "the silhouette comes before the line");
    }
}
