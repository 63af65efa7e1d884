//! The mirrored stick plot of two EI mass spectra: the first above the axis, the second below.

use std::collections::HashSet;

use plotters::prelude::*;

use crate::error::Result;
use crate::prepare::Prepared;

use super::axis::{Axis, frame, tick};
use super::labels::{Candidate, draw_labels, pick_labels};
use super::render::{Swatch, render};
use super::{BLUE, INK};

/// A mirrored stick plot: the first spectrum above the axis, the second below, ions present
/// in both marked at both tips.
pub(super) fn mirror(
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

#[cfg(test)]
mod tests {
    use crate::report::fixtures::{ions, svg_texts as texts};
    use crate::report::plot::overlay;
    use crate::technique::Technique;

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
}
