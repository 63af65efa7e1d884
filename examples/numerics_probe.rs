//! Runs whorl's numeric kernels on inputs given as JSON, for `scripts/crosscheck.py`, which
//! compares the results with NumPy, SciPy and pybaselines.
//!
//! Reads one request from stdin, `{"cases": [{"op": "cosine", "a": [...], "b": [...]}, ...]}`,
//! and writes `{"results": [...]}` to stdout, one result per case in the same order.
//!
//! ```text
//! echo '{"cases": [{"op": "cosine", "a": [1, 0], "b": [1, 1]}]}' \
//!     | cargo run --quiet --release --example numerics_probe
//! ```

use std::io::Read;

use serde::Deserialize;
use serde_json::{Value, json};
use whorl::prepare::{
    absorbance_from, area_between, asls, despike, find_maxima, resample, rubber_band,
};
use whorl::score::{CompositeParams, cosine, nnls, peak_overlap, pearson, stein_scott};
use whorl::spectrum::YUnit;
use whorl::technique::Grid;

#[derive(Deserialize)]
struct Request {
    cases: Vec<Case>,
}

/// One call of a library function. Field names follow the function's parameters.
#[derive(Deserialize)]
#[serde(tag = "op", rename_all = "snake_case", deny_unknown_fields)]
enum Case {
    /// Returns the parsed values, so that the caller can check the JSON transport is exact.
    Echo {
        values: Vec<f64>,
    },
    Cosine {
        a: Vec<f32>,
        b: Vec<f32>,
    },
    Pearson {
        a: Vec<f32>,
        b: Vec<f32>,
        active: Option<Vec<bool>>,
    },
    FindMaxima {
        y: Vec<f64>,
    },
    Asls {
        y: Vec<f64>,
        lam: f64,
        p: f64,
        max_iter: usize,
        tol: f64,
    },
    RubberBand {
        y: Vec<f64>,
    },
    Absorbance {
        t: Vec<f64>,
        unit: YUnit,
    },
    /// `x` ascending; `grid` as stored in a recipe (`start`, `stop`, `step`, `masks`).
    Resample {
        x: Vec<f64>,
        y: Vec<f64>,
        grid: Grid,
    },
    /// Peaks as `[m/z, abundance]` pairs.
    SteinScott {
        unknown: Vec<(f64, f64)>,
        reference: Vec<(f64, f64)>,
        #[serde(default)]
        params: Option<CompositeParams>,
    },
    PeakOverlap {
        unknown: Vec<f64>,
        reference: Vec<f64>,
        tolerance: f64,
    },
    /// min |A x - b| with x >= 0; A given by its columns, each as long as `b`.
    Nnls {
        columns: Vec<Vec<f64>>,
        b: Vec<f64>,
    },
    /// Raman despiking of `y` with a modified Z-score threshold.
    Despike {
        y: Vec<f64>,
        threshold: f64,
    },
}

fn run(case: Case) -> Value {
    match case {
        Case::Echo { values } => json!({ "values": values }),
        Case::Cosine { a, b } => json!({ "value": cosine(&a, &b) }),
        Case::Pearson { a, b, active } => json!({ "value": pearson(&a, &b, active.as_deref()) }),
        Case::FindMaxima { y } => {
            // x is the sample index, so areas are in height x samples.
            let x: Vec<f64> = (0..y.len()).map(|i| i as f64).collect();
            let maxima: Vec<Value> = find_maxima(&y, 0.0)
                .iter()
                .map(|m| {
                    json!({
                        "index": m.index,
                        "prominence": m.prominence,
                        "left_base": m.left_base,
                        "right_base": m.right_base,
                        "left_half": m.left_half,
                        "right_half": m.right_half,
                        "area": area_between(&x, &y, m.left_half, m.right_half),
                    })
                })
                .collect();
            json!({ "maxima": maxima })
        }
        Case::Asls {
            y,
            lam,
            p,
            max_iter,
            tol,
        } => json!({ "baseline": asls(&y, lam, p, max_iter, tol) }),
        Case::RubberBand { y } => json!({ "baseline": rubber_band(&y) }),
        Case::Absorbance { t, unit } => {
            let a: Vec<f64> = t.iter().map(|&v| absorbance_from(v, unit)).collect();
            json!({ "absorbance": a })
        }
        Case::Resample { x, y, grid } => {
            let points: Vec<(f64, f64)> = x.into_iter().zip(y).collect();
            let gx: Vec<f64> = (0..grid.len()).map(|i| grid.x(i)).collect();
            json!({ "x": gx, "y": resample(&points, &grid) })
        }
        Case::SteinScott {
            unknown,
            reference,
            params,
        } => {
            let c = stein_scott(&unknown, &reference, &params.unwrap_or_default());
            serde_json::to_value(c).expect("Composite serialises")
        }
        Case::PeakOverlap {
            unknown,
            reference,
            tolerance,
        } => serde_json::to_value(peak_overlap(&unknown, &reference, tolerance))
            .expect("Overlap serialises"),
        Case::Nnls { columns, b } => {
            let r = nnls(&columns, &b);
            json!({ "x": r.x, "residual_norm": r.residual_norm, "converged": r.converged })
        }
        Case::Despike { y, threshold } => {
            let (fixed, replaced) = despike(&y, threshold);
            json!({ "y": fixed, "replaced": replaced })
        }
    }
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut input = String::new();
    std::io::stdin().read_to_string(&mut input)?;
    let request: Request = serde_json::from_str(&input)?;
    let results: Vec<Value> = request.cases.into_iter().map(run).collect();
    serde_json::to_writer(std::io::stdout().lock(), &json!({ "results": results }))?;
    println!();
    Ok(())
}
