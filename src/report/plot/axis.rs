//! The x range a plot shows and its direction, the frame of axes, ticks and titles, and how
//! tick and peak positions are written.

use plotters::prelude::*;

use crate::prepare::Prepared;
use crate::technique::{Grid, Technique};

use super::{AXIS_SIZE, Area, Chart, DrawResult, FONT, GRID_LINE, INK, TICK_SIZE};

/// The x range shown and its direction.
#[derive(Debug, Clone, Copy)]
pub(super) struct Axis {
    pub(super) technique: Technique,
    pub(super) lo: f64,
    pub(super) hi: f64,
    pub(super) descending: bool,
}

impl Axis {
    pub(super) fn for_curves(
        technique: Technique,
        grid: &Grid,
        curves: &[&Vec<(f64, f64)>],
    ) -> Axis {
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

    pub(super) fn for_ions(spectra: &[&Prepared]) -> Axis {
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

    pub(super) fn to_plot(self, x: f64) -> f64 {
        if self.descending { -x } else { x }
    }

    pub(super) fn plot_range(self) -> (f64, f64) {
        if self.descending {
            (-self.hi, -self.lo)
        } else {
            (self.lo, self.hi)
        }
    }

    pub(super) fn contains(self, x: f64) -> bool {
        x >= self.lo && x <= self.hi
    }

    pub(super) fn span(self) -> f64 {
        self.hi - self.lo
    }
}

/// The axes, ticks and titles of one plot.
pub(super) fn frame<'a, 'b>(
    area: &'a Area<'b>,
    axis: &Axis,
    y: (f64, f64),
) -> DrawResult<Chart<'a, 'b>> {
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

/// A tick or peak position as people write it: no trailing zeros, no "-0".
pub(super) fn tick(v: f64) -> String {
    let v = if v.abs() < 1e-9 { 0.0 } else { v };
    let s = format!("{v:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    s.to_string()
}

/// A peak position with the precision of its technique: whole cm-1 and m/z, 0.01 ppm.
pub(super) fn tick_for(technique: Technique, x: f64) -> String {
    match technique {
        Technique::Nmr1h => format!("{x:.2}"),
        Technique::Nmr13c => format!("{x:.1}"),
        _ => format!("{x:.0}"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::prepare::{Recipe, prepare};
    use crate::report::fixtures::{ir, svg_texts as texts};
    use crate::report::plot::overlay;

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
    fn ticks_read_as_people_write_them() {
        for (v, s) in [(-0.0, "0"), (4000.0, "4000"), (7.5, "7.5"), (0.25, "0.25")] {
            assert_eq!(tick(v), s);
        }
    }
}
