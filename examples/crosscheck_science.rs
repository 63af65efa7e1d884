//! Prints whorl's Savitzky-Golay coefficients, first derivatives, derivative correlations
//! and Pearson correlations for the cases in a JSON file, so that
//! `scripts/crosscheck_science.py` can compare them with numpy and scipy.
//!
//! Input: `{"cases": [{"a": [..], "b": [..], "window": 11, "order": 2}, ...]}`.
//! Output: one JSON object per case with `coefficients`, `derivative_a` (null where the
//! window does not fit), `derivative_correlation` and `pearson`.

use serde_json::{Value, json};
use whorl::score::{
    DerivativeParams, derivative_correlation, first_derivative, pearson, savgol_coefficients,
};

fn floats(v: &Value) -> Vec<f32> {
    v.as_array()
        .expect("an array of numbers")
        .iter()
        .map(|x| x.as_f64().expect("a number") as f32)
        .collect()
}

fn main() {
    let path = std::env::args()
        .nth(1)
        .expect("usage: crosscheck_science CASES.json");
    let input: Value =
        serde_json::from_str(&std::fs::read_to_string(&path).expect("readable file"))
            .expect("JSON");
    let mut out = Vec::new();
    for case in input["cases"].as_array().expect("cases") {
        let (a, b) = (floats(&case["a"]), floats(&case["b"]));
        let params = DerivativeParams {
            window: case["window"].as_u64().expect("window") as usize,
            order: case["order"].as_u64().expect("order") as usize,
        };
        params.validate().expect("valid window and order");
        let skip = vec![false; a.len()];
        out.push(json!({
            "coefficients": savgol_coefficients(params.window, params.order, 1),
            "derivative_a": first_derivative(&a, &params, &skip),
            "derivative_correlation": derivative_correlation(&a, &b, &params, &skip),
            "pearson": pearson(&a, &b, None),
        }));
    }
    println!("{}", serde_json::to_string(&out).expect("serialisable"));
}
