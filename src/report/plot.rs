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
//! silhouette with a thin blue edge, and further spectra in a multi-spectrum plot get dash
//! patterns as well as colours.

use std::collections::HashSet;

use plotters::coord::Shift;
use plotters::coord::types::RangedCoordf64;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::error::{Error, Result};
use crate::prepare::Prepared;
use crate::technique::{Grid, Technique};

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
        chart.draw_series(
            AreaSeries::new(shown(&cr), 0.0, SKY.mix(0.35))
                .border_style(ShapeStyle::from(BLUE).stroke_width(1)),
        )?;
        chart.draw_series(LineSeries::new(
            shown(&cu),
            ShapeStyle::from(INK).stroke_width(2),
        ))?;
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

/// The x range shown and its direction.
#[derive(Debug, Clone, Copy)]
struct Axis {
    technique: Technique,
    lo: f64,
    hi: f64,
    descending: bool,
}

impl Axis {
    fn for_curves(technique: Technique, grid: &Grid, curves: &[&Vec<(f64, f64)>]) -> Axis {
        let (lo, hi) = match technique {
            // The trade's usual 12..0 ppm window, widened to take in any stronger signal
            // beyond it (the grid runs from -1 to 14 ppm).
            Technique::Nmr1h => {
                let xs = curves
                    .iter()
                    .flat_map(|c| c.iter().filter(|p| p.1 > 0.1).map(|p| p.0));
                let (a, b) = xs.fold((0.0f64, 12.0f64), |(a, b), x| (a.min(x), b.max(x)));
                (
                    ((a - 0.5) * 2.0).floor() / 2.0,
                    ((b + 0.5) * 2.0).ceil() / 2.0,
                )
            }
            _ => (grid.start, grid.stop),
        };
        Axis {
            technique,
            lo: lo.max(grid.start),
            hi: hi.min(grid.stop),
            descending: true,
        }
    }

    fn for_ions(spectra: &[&Prepared]) -> Axis {
        let xs = spectra.iter().flat_map(|p| p.peaks.iter().map(|k| k.x));
        let (a, b) = xs.fold((f64::MAX, f64::MIN), |(a, b), x| (a.min(x), b.max(x)));
        let (a, b) = if a > b { (0.0, 100.0) } else { (a, b) };
        let pad = ((b - a) * 0.05).max(5.0);
        Axis {
            technique: Technique::MsEi,
            lo: (((a - pad) / 10.0).floor() * 10.0).max(0.0),
            hi: ((b + pad) / 10.0).ceil() * 10.0,
            descending: false,
        }
    }

    fn to_plot(self, x: f64) -> f64 {
        if self.descending { -x } else { x }
    }

    fn plot_range(self) -> (f64, f64) {
        if self.descending {
            (-self.hi, -self.lo)
        } else {
            (self.lo, self.hi)
        }
    }

    fn contains(self, x: f64) -> bool {
        x >= self.lo && x <= self.hi
    }

    fn span(self) -> f64 {
        self.hi - self.lo
    }
}

type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;
type Area<'b> = DrawingArea<SVGBackend<'b>, Shift>;
type DrawResult<T = ()> = std::result::Result<T, Box<dyn std::error::Error>>;

/// What a legend row shows beside its text.
#[derive(Debug, Clone, Copy)]
enum Swatch {
    Line(RGBColor, Option<(u32, u32)>),
    Area,
    Stick(RGBColor),
    Marker(RGBColor),
}

/// Draws a legend band and a plot below it into an SVG string.
fn render(
    legend: &[(Swatch, String)],
    plot: impl FnOnce(&Area<'_>) -> DrawResult,
) -> Result<String> {
    let band = 10 + LEGEND_ROW * legend.len() as u32;
    let mut svg = String::new();
    let drawn: DrawResult = (|| {
        let root =
            SVGBackend::with_string(&mut svg, (WIDTH, band + PLOT_HEIGHT)).into_drawing_area();
        root.fill(&WHITE)?;
        let (top, bottom) = root.split_vertically(band);
        for (i, (swatch, text)) in legend.iter().enumerate() {
            let y = 8 + (LEGEND_ROW * i as u32 + LEGEND_ROW / 2) as i32;
            let x = 80;
            match *swatch {
                Swatch::Line(c, None) => {
                    top.draw(&PathElement::new(
                        vec![(x, y), (x + 36, y)],
                        ShapeStyle::from(c).stroke_width(3),
                    ))?;
                }
                Swatch::Line(c, Some((size, gap))) => {
                    top.draw(&DashedPathElement::new(
                        vec![(x, y), (x + 36, y)],
                        size,
                        gap,
                        ShapeStyle::from(c).stroke_width(3),
                    ))?;
                }
                Swatch::Area => {
                    top.draw(&Rectangle::new(
                        [(x, y - 7), (x + 36, y + 7)],
                        SKY.mix(0.35).filled(),
                    ))?;
                    top.draw(&Rectangle::new(
                        [(x, y - 7), (x + 36, y + 7)],
                        ShapeStyle::from(BLUE).stroke_width(1),
                    ))?;
                }
                Swatch::Stick(c) => {
                    for dx in [6, 18, 30] {
                        top.draw(&PathElement::new(
                            vec![(x + dx, y + 8), (x + dx, y - 8 + dx / 3)],
                            ShapeStyle::from(c).stroke_width(2),
                        ))?;
                    }
                }
                Swatch::Marker(c) => {
                    top.draw(&Circle::new((x + 18, y), 5, c.filled()))?;
                }
            }
            top.draw(&Text::new(
                shorten(text, 110),
                (x + 48, y),
                (FONT, AXIS_SIZE)
                    .into_font()
                    .color(&INK)
                    .pos(Pos::new(HPos::Left, VPos::Center)),
            ))?;
        }
        plot(&bottom)?;
        root.present()?;
        Ok(())
    })();
    drawn.map_err(|e| {
        Error::invalid(
            format!("drawing a plot failed: {e}"),
            "this is a fault in whorl, not in the data; please report it with the command line",
        )
    })?;
    Ok(svg)
}

/// The axes, ticks and titles of one plot.
fn frame<'a, 'b>(area: &'a Area<'b>, axis: &Axis, y: (f64, f64)) -> DrawResult<Chart<'a, 'b>> {
    let (x0, x1) = axis.plot_range();
    let mut chart = ChartBuilder::on(area)
        .margin_left(8)
        .margin_right(28)
        .margin_top(6)
        .margin_bottom(6)
        .x_label_area_size(58)
        .y_label_area_size(72)
        .build_cartesian_2d(x0..x1, y.0..y.1)?;
    let mirrored = y.0 < 0.0;
    let y_title = if mirrored {
        format!("{}  (reference below)", axis.technique.y_axis_title())
    } else {
        axis.technique.y_axis_title().to_string()
    };
    let descending = axis.descending;
    let x_fmt = move |v: &f64| tick(if descending { -v } else { *v });
    let y_fmt = move |v: &f64| {
        if axis.technique == Technique::MsEi {
            format!("{:.0}", (v * 100.0).abs())
        } else {
            tick(*v)
        }
    };
    chart
        .configure_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(GRID_LINE)
        .axis_style(ShapeStyle::from(INK).stroke_width(1))
        .x_labels(12)
        .y_labels(if mirrored { 9 } else { 6 })
        .x_label_formatter(&x_fmt)
        .y_label_formatter(&y_fmt)
        .label_style((FONT, TICK_SIZE).into_font().color(&INK))
        .axis_desc_style((FONT, AXIS_SIZE).into_font().color(&INK))
        .x_desc(axis.technique.x_axis_title())
        .y_desc(y_title)
        .draw()?;
    Ok(chart)
}

/// Shades the grid's masked regions (zeroed before scoring) and says so.
fn masks(chart: &mut Chart<'_, '_>, axis: &Axis, grid: &Grid) -> DrawResult {
    for &(lo, hi) in &grid.masks {
        if hi < axis.lo || lo > axis.hi {
            continue;
        }
        let (a, b) = (axis.to_plot(lo), axis.to_plot(hi));
        chart.draw_series(std::iter::once(Rectangle::new(
            [(a, 1.18), (b, 0.0)],
            MASK_FILL.filled(),
        )))?;
        chart.draw_series(std::iter::once(Text::new(
            "masked",
            ((a + b) / 2.0, 1.16),
            (FONT, PEAK_SIZE)
                .into_font()
                .color(&MUTED)
                .pos(Pos::new(HPos::Center, VPos::Top)),
        )))?;
    }
    Ok(())
}

/// A mirrored stick plot: the first spectrum above the axis, the second below, ions present
/// in both marked at both tips.
fn mirror(
    spectra: [(&str, &Prepared); 2],
    swatches: [Swatch; 3],
    unknown_and_reference: bool,
) -> Result<String> {
    let [(a_name, a), (b_name, b)] = spectra;
    let axis = Axis::for_ions(&[a, b]);
    let colour = |s: Swatch| match s {
        Swatch::Stick(c) | Swatch::Marker(c) | Swatch::Line(c, _) => c,
        Swatch::Area => BLUE,
    };
    let (ca, cb, cm) = (
        colour(swatches[0]),
        colour(swatches[1]),
        colour(swatches[2]),
    );
    let nominal =
        |p: &Prepared| -> HashSet<i64> { p.peaks.iter().map(|k| k.x.round() as i64).collect() };
    let common: HashSet<i64> = nominal(a).intersection(&nominal(b)).copied().collect();
    let (above, below) = if unknown_and_reference {
        (
            format!("unknown (above): {a_name}"),
            format!("reference (below): {b_name}"),
        )
    } else {
        (format!("above: {a_name}"), format!("below: {b_name}"))
    };
    let legend = [
        (swatches[0], above),
        (swatches[1], below),
        (
            swatches[2],
            format!("m/z present in both ({} ions)", common.len()),
        ),
    ];
    render(&legend, |area| {
        let mut chart = frame(area, &axis, (-1.24, 1.24))?;
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(axis.lo, 0.0), (axis.hi, 0.0)],
            ShapeStyle::from(INK).stroke_width(1),
        )))?;
        for (p, sign, c) in [(a, 1.0, ca), (b, -1.0, cb)] {
            chart.draw_series(p.peaks.iter().map(|k| {
                PathElement::new(
                    vec![(k.x, 0.0), (k.x, sign * k.height)],
                    ShapeStyle::from(c).stroke_width(2),
                )
            }))?;
            chart.draw_series(
                p.peaks
                    .iter()
                    .filter(|k| common.contains(&(k.x.round() as i64)))
                    .map(|k| Circle::new((k.x, sign * k.height), 3, cm.filled())),
            )?;
        }
        let cands = |p: &Prepared, c: RGBColor, below: bool| -> Vec<Candidate> {
            p.peaks
                .iter()
                .map(|k| Candidate {
                    x: k.x,
                    y: if below { -k.height } else { k.height },
                    text: tick(k.x),
                    colour: c,
                    below,
                })
                .collect()
        };
        let gap = axis.span() * 0.03;
        let mut labels = pick_labels(cands(a, ca, false), gap, 9);
        labels.extend(pick_labels(cands(b, cb, true), gap, 9));
        draw_labels(&mut chart, &axis, labels)?;
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

/// A peak label waiting for a place.
#[derive(Debug, Clone, PartialEq)]
struct Candidate {
    x: f64,
    y: f64,
    text: String,
    colour: RGBColor,
    below: bool,
}

/// A spectrum's peaks as label candidates, strongest first, at the height of the drawn curve.
fn peak_candidates(
    grid: &Grid,
    p: &Prepared,
    curve: &[(f64, f64)],
    axis: &Axis,
    colour: RGBColor,
) -> Vec<Candidate> {
    let mut c: Vec<Candidate> = p
        .peaks
        .iter()
        .filter(|k| axis.contains(k.x))
        .filter_map(|k| {
            let i = grid.index_of(k.x)?;
            let y = curve.get(i)?.1;
            // Weaker peaks are mostly noise at this scale, and labels on them only clutter.
            (y >= 0.1).then(|| Candidate {
                x: k.x,
                y,
                text: tick_for(axis.technique, k.x),
                colour,
                below: false,
            })
        })
        .collect();
    c.sort_by(|a, b| b.y.total_cmp(&a.y).then(a.x.total_cmp(&b.x)));
    c
}

/// Chooses labels strongest first, keeping those that would not overprint one already chosen:
/// two labels clash when they are closer than `min_gap` (x units) across and, for curves, at
/// about the same height.
fn pick_labels(cands: Vec<Candidate>, min_gap: f64, most: usize) -> Vec<Candidate> {
    pick_labels_by(cands, min_gap, f64::INFINITY, most)
}

/// [`pick_labels`] where labels more than `height_gap` (y units) apart in height never clash.
fn pick_labels_by(
    mut cands: Vec<Candidate>,
    min_gap: f64,
    height_gap: f64,
    most: usize,
) -> Vec<Candidate> {
    cands.sort_by(|a, b| b.y.abs().total_cmp(&a.y.abs()).then(a.x.total_cmp(&b.x)));
    let mut kept: Vec<Candidate> = Vec::new();
    for c in cands {
        if kept.len() >= most {
            break;
        }
        if kept
            .iter()
            .all(|k| (k.x - c.x).abs() >= min_gap || (k.y - c.y).abs() >= height_gap)
        {
            kept.push(c);
        }
    }
    kept
}

fn draw_labels(chart: &mut Chart<'_, '_>, axis: &Axis, labels: Vec<Candidate>) -> DrawResult {
    chart.draw_series(labels.into_iter().map(|l| {
        let (v, dy) = if l.below {
            (VPos::Top, -0.02)
        } else {
            (VPos::Bottom, 0.02)
        };
        Text::new(
            l.text,
            (axis.to_plot(l.x), l.y + dy),
            (FONT, PEAK_SIZE)
                .into_font()
                .color(&l.colour)
                .pos(Pos::new(HPos::Center, v)),
        )
    }))?;
    Ok(())
}

/// A tick or peak position as people write it: no trailing zeros, no "-0".
fn tick(v: f64) -> String {
    let v = if v.abs() < 1e-9 { 0.0 } else { v };
    let s = format!("{v:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

/// A peak position with the precision of its technique: whole cm-1 and m/z, 0.01 ppm.
fn tick_for(technique: Technique, x: f64) -> String {
    match technique {
        Technique::Nmr1h => format!("{x:.2}"),
        Technique::Nmr13c => format!("{x:.1}"),
        _ => format!("{x:.0}"),
    }
}

fn shorten(s: &str, most: usize) -> String {
    if s.chars().count() <= most {
        s.to_string()
    } else {
        let head: String = s.chars().take(most - 1).collect();
        format!("{head}\u{2026}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prepare::{Recipe, prepare};
    use crate::report::fixtures::{ions, ir};

    /// (x, y, text) of every `<text>` element.
    fn texts(svg: &str) -> Vec<(f64, f64, String)> {
        svg.split("<text ")
            .skip(1)
            .map(|t| {
                let head = format!(" {}", &t[..t.find('>').unwrap()]);
                let attr = |name: &str| -> f64 {
                    let key = format!(" {name}=\"");
                    let rest = &head[head.find(&key).unwrap() + key.len()..];
                    rest[..rest.find('"').unwrap()].parse().unwrap()
                };
                let body = &t[t.find('>').unwrap() + 1..t.find("</text>").unwrap()];
                (attr("x"), attr("y"), body.trim().to_string())
            })
            .collect()
    }

    #[test]
    fn wavenumbers_decrease_from_left_to_right() {
        let u = ir(&[(1716.0, 1.0), (2950.0, 0.5)]);
        let svg = overlay(
            &Technique::Ir.default_grid(),
            ("u.csv", &u),
            ("ketone", &u),
            6.0,
        )
        .unwrap();
        let t = texts(&svg);
        let x_of = |s: &str| t.iter().find(|(_, _, b)| b == s).map(|p| p.0);
        let (hi, lo) = (x_of("3500").unwrap(), x_of("1000").unwrap());
        assert!(
            hi < lo,
            "3500 cm-1 at x={hi} should be left of 1000 at x={lo}"
        );
        // The strongest band is labelled.
        assert!(x_of("1716").is_some(), "{t:?}");
        // The CO2 mask is shaded and named.
        assert!(svg.contains(">\nmasked\n<"));
    }

    #[test]
    fn chemical_shifts_decrease_from_left_to_right() {
        let recipe = Recipe::default_for(Technique::Nmr1h);
        let pts: Vec<(f64, f64)> = (0..=6000)
            .map(|i| {
                let x = -0.5 + 0.002 * f64::from(i);
                let line = |c: f64| (-((x - c) / 0.01).powi(2)).exp();
                (x, line(1.2) + 0.6 * line(7.3))
            })
            .collect();
        let p = prepare(
            std::path::Path::new("n"),
            &recipe,
            &pts,
            &Default::default(),
        )
        .unwrap();
        let svg = overlay(&recipe.grid, ("u", &p), ("r", &p), 0.03).unwrap();
        let t = texts(&svg);
        let x_of = |s: &str| t.iter().find(|(_, _, b)| b == s).map(|p| p.0).unwrap();
        assert!(x_of("10") < x_of("2"), "{t:?}");
        // The usual 12..0 ppm window, not the whole -1..14 ppm grid.
        assert!(x_of("12") < x_of("10"), "{t:?}");
        assert!(t.iter().all(|(_, _, b)| b != "14"), "{t:?}");
        // Both lines are labelled, in ppm to two decimals.
        assert!(t.iter().any(|(_, _, b)| b.starts_with("1.2")), "{t:?}");
        assert!(t.iter().any(|(_, _, b)| b.starts_with("7.3")), "{t:?}");
    }

    #[test]
    fn mass_spectra_mirror_with_the_unknown_above() {
        let u = ions(&[(43.0, 1.0), (58.0, 0.4), (71.0, 0.1)]);
        let r = ions(&[(43.0, 0.8), (58.0, 1.0), (99.0, 0.3)]);
        let svg = overlay(&Technique::MsEi.default_grid(), ("u", &u), ("r", &r), 0.5).unwrap();
        // Sticks are polylines from the baseline: find the 71 (unknown only) and 99
        // (reference only) labels and compare their heights with the 0 tick.
        let t = texts(&svg);
        let y_of = |s: &str| t.iter().find(|(_, _, b)| b == s).map(|p| p.1).unwrap();
        assert!(
            y_of("71") < y_of("99"),
            "unknown label above the reference label"
        );
        // Two ions (43 and 58) are in both: four markers, one at each tip.
        assert_eq!(
            svg.matches("<circle").count() - 1,
            4,
            "one legend marker + 4"
        );
        assert!(svg.contains("2 ions"));
    }

    #[test]
    fn labels_never_crowd_each_other() {
        let c = |x: f64, y: f64| Candidate {
            x,
            y,
            text: tick(x),
            colour: INK,
            below: false,
        };
        let kept = pick_labels(
            vec![
                c(1000.0, 0.5),
                c(1010.0, 0.9),
                c(1500.0, 0.2),
                c(1040.0, 0.3),
            ],
            30.0,
            10,
        );
        let xs: Vec<f64> = kept.iter().map(|k| k.x).collect();
        assert_eq!(xs, [1010.0, 1040.0, 1500.0]);
    }

    #[test]
    fn ticks_read_as_people_write_them() {
        for (v, s) in [(-0.0, "0"), (4000.0, "4000"), (7.5, "7.5"), (0.25, "0.25")] {
            assert_eq!(tick(v), s);
        }
    }

    #[test]
    fn text_in_plots_is_escaped() {
        let u = ions(&[(43.0, 1.0)]);
        let svg = spectra(
            &Technique::MsEi.default_grid(),
            &[Series {
                label: "<script>alert(1)</script>".into(),
                prepared: &u,
            }],
        )
        .unwrap();
        assert!(!svg.contains("<script"));
        assert!(svg.contains("&lt;script&gt;"));
    }

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
}
