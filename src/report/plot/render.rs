//! Drawing into an SVG string: the legend band above the plot area, and the shading of the
//! grid's masked regions.

use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::error::{Error, Result};
use crate::technique::Grid;

use super::axis::Axis;
use super::{
    AXIS_SIZE, Area, BLUE, Chart, DrawResult, FONT, INK, LEGEND_ROW, MASK_FILL, MUTED, PEAK_SIZE,
    PLOT_HEIGHT, SKY, WIDTH,
};

/// What a legend row shows beside its text.
#[derive(Debug, Clone, Copy)]
pub(super) enum Swatch {
    Line(RGBColor, Option<(u32, u32)>),
    Area,
    Stick(RGBColor),
    Marker(RGBColor),
}

/// Draws a legend band and a plot below it into an SVG string.
pub(super) fn render(
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

/// Shades the grid's masked regions (zeroed before scoring) and says so.
pub(super) fn masks(chart: &mut Chart<'_, '_>, axis: &Axis, grid: &Grid) -> DrawResult {
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

/// `s` cut to at most `most` characters, the last of them an ellipsis when it was longer.
/// Legend text: control characters escaped (XML 1.0 allows none but tab and line breaks,
/// and plotters escapes only the markup characters), at most `most` characters.
fn shorten(s: &str, most: usize) -> String {
    crate::error::excerpt(s, most - 1)
}

#[cfg(test)]
mod tests {
    use crate::report::fixtures::ions;
    use crate::report::plot::{Series, spectra};
    use crate::technique::Technique;

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
}
