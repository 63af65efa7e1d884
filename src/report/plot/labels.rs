//! Peak labels: which peaks get one (strongest first, none overprinting another) and drawing
//! them at their peaks.

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use crate::prepare::Prepared;
use crate::technique::Grid;

use super::axis::{Axis, tick_for};
use super::{Chart, DrawResult};
use super::{FONT, PEAK_SIZE};

/// A peak label waiting for a place.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Candidate {
    pub(super) x: f64,
    pub(super) y: f64,
    pub(super) text: String,
    pub(super) colour: RGBColor,
    pub(super) below: bool,
}

/// A spectrum's peaks as label candidates, strongest first, at the height of the drawn curve.
pub(super) fn peak_candidates(
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
pub(super) fn pick_labels(cands: Vec<Candidate>, min_gap: f64, most: usize) -> Vec<Candidate> {
    pick_labels_by(cands, min_gap, f64::INFINITY, most)
}

/// [`pick_labels`] where labels more than `height_gap` (y units) apart in height never clash.
pub(super) fn pick_labels_by(
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

pub(super) fn draw_labels(
    chart: &mut Chart<'_, '_>,
    axis: &Axis,
    labels: Vec<Candidate>,
) -> DrawResult {
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::plot::{INK, axis::tick};

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
}
