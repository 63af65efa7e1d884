//! Line shapes and noise-free spectra, as in `scripts/seedgen/synthesis.py` (the generator of
//! the seed library). `evaluate --print-shapes` prints them for a range of inputs, and
//! `scripts/check_line_shapes.py` compares the printout with the generator's own functions, so
//! the two cannot drift apart unnoticed.

use serde_json::{Value, json};
use whorl::prepare::Solvent;

use crate::seed::{Band, Compound, Signal};

/// Lorentzian of full width at half maximum `w`, height 1 at `x0`.
pub fn lorentz(x: f64, x0: f64, w: f64) -> f64 {
    let d = (x - x0) / (w / 2.0);
    1.0 / (1.0 + d * d)
}

/// Gaussian of full width at half maximum `w`, height 1 at `x0`.
pub fn gauss(x: f64, x0: f64, w: f64) -> f64 {
    let d = (x - x0) / w;
    (-4.0 * std::f64::consts::LN_2 * d * d).exp()
}

/// Pseudo-Voigt: 0.6 Lorentzian + 0.4 Gaussian of the same width.
pub fn pvoigt(x: f64, x0: f64, w: f64) -> f64 {
    0.6 * lorentz(x, x0, w) + 0.4 * gauss(x, x0, w)
}

/// Lines `(ppm, area, width)` of one first-order 1H signal at 400 MHz (as the generator).
pub fn h_lines(s: &Signal) -> Vec<(f64, f64, f64)> {
    if s.mult == "br" {
        return vec![(s.ppm, s.n, 0.05)];
    }
    let (weights, step): (Vec<f64>, f64) = if s.mult == "m" {
        (
            vec![1.0, 3.0, 4.0, 3.0, 1.0],
            (if s.j > 0.0 { s.j } else { 7.0 }) / 400.0 / 2.0,
        )
    } else {
        let n = match s.mult.as_str() {
            "s" => 1,
            "d" => 2,
            "t" => 3,
            "q" => 4,
            "quint" => 5,
            "sext" => 6,
            "sept" => 7,
            other => panic!("multiplicity {other}"),
        };
        let w = (0..n)
            .map(|k| (0..k).fold(1.0, |acc, i| acc * (n - 1 - i) as f64 / (i + 1) as f64))
            .collect();
        (w, s.j / 400.0)
    };
    let total: f64 = weights.iter().sum();
    let n = weights.len() as f64;
    weights
        .iter()
        .enumerate()
        .map(|(k, w)| {
            (
                s.ppm + (k as f64 - (n - 1.0) / 2.0) * step,
                s.n * w / total,
                0.006,
            )
        })
        .collect()
}

/// IR absorbance at `x` of the bands other than those in `skip`, shifted by `shift`: each band
/// a pseudo-Voigt, taken within 40 widths of its centre (the generator's `ir_absorbance`).
pub fn ir_absorbance(bands: &[Band], x: f64, shift: f64, skip: &[usize]) -> f64 {
    let mut a = 0.0;
    for (k, b) in bands.iter().enumerate() {
        if !skip.contains(&k) && (x - b.pos - shift).abs() < 40.0 * b.fwhm {
            a += b.height * pvoigt(x, b.pos + shift, b.fwhm);
        }
    }
    a
}

/// Raman signal at `x` of the bands other than those in `skip`, shifted by `shift`: Lorentzian
/// bands (the generator's `raman_signal`).
pub fn raman_signal(bands: &[Band], x: f64, shift: f64, skip: &[usize]) -> f64 {
    bands
        .iter()
        .enumerate()
        .filter(|(k, _)| !skip.contains(k))
        .map(|(_, b)| b.height * lorentz(x, b.pos + shift, b.fwhm))
        .sum()
}

/// A fluorescence-like Raman background of about `scale` counts at most: rising towards high
/// shift, with a broad hump (the generator's `fluorescence`).
pub fn fluorescence(x: f64, scale: f64) -> f64 {
    scale * (1.0 - (-(x - 100.0) / 1400.0).exp()) + 0.15 * scale * gauss(x, 2600.0, 2500.0)
}

/// The x values of the generator's Raman spectra: 100 to 3500 cm-1 by 2.
pub fn raman_xs() -> Vec<f64> {
    (0..=1700).map(|i| 100.0 + 2.0 * i as f64).collect()
}

/// The noise-free 1H spectrum `(ppm, y)` on the generator's grid (12.5 to -0.5 ppm by 0.004),
/// scaled to a tallest point of 1000: the signals' lines shifted by `shift` and at least `lw`
/// wide, the solvent's residual peak (area 0.05), its water peak (0.15, 0.02 ppm wide) and TMS
/// (0.12) at 0 ppm, each an area-normalised Lorentzian (the generator's `nmr_spectrum`).
pub fn nmr_spectrum<'a>(
    signals: impl Iterator<Item = &'a Signal>,
    solvent: Solvent,
    shift: f64,
    lw: f64,
) -> Vec<(f64, f64)> {
    let mut lines: Vec<(f64, f64, f64)> = Vec::new();
    for s in signals {
        for (p, a, w) in h_lines(s) {
            lines.push((p + shift, a, w.max(lw)));
        }
    }
    if let Some(r) = solvent.residual_ppm() {
        lines.push((r, 0.05, lw));
    }
    lines.push((solvent.water_ppm(), 0.15, 0.02));
    lines.push((0.0, 0.12, lw));
    let xs: Vec<f64> = (0..3251).map(|i| (12500 - 4 * i) as f64 / 1000.0).collect();
    let ys: Vec<f64> = xs
        .iter()
        .map(|&x| {
            lines
                .iter()
                .filter(|l| (x - l.0).abs() < 2.5)
                .map(|&(p, a, w)| {
                    a * (w / (2.0 * std::f64::consts::PI)) / ((x - p).powi(2) + (w / 2.0).powi(2))
                })
                .sum()
        })
        .collect();
    let top = ys.iter().copied().fold(0.0, f64::max);
    xs.into_iter()
        .zip(ys)
        .map(|(x, y)| (x, 1000.0 * y / top))
        .collect()
}

/// Every shape above for a range of inputs, as JSON for `scripts/check_line_shapes.py`: the
/// three peak shapes at points around their centres, the 1H lines of every signal of the seed
/// tables and of one signal of each multiplicity, and the IR, Raman and 1H spectra of every
/// compound (the 1H spectrum of the first compound in every solvent).
pub fn print_shapes(compounds: &[Compound]) {
    let mut peaks: Vec<Value> = Vec::new();
    for (x0, w) in [(0.0, 1.0), (1715.0, 12.0), (2900.0, 350.0), (3.5, 0.006)] {
        for t in [
            -40.0, -5.0, -2.0, -1.0, -0.5, -0.25, 0.0, 0.1, 0.5, 1.0, 3.0, 40.0,
        ] {
            let x = x0 + t * w;
            peaks.push(json!({
                "x": x, "x0": x0, "w": w,
                "lorentz": lorentz(x, x0, w), "gauss": gauss(x, x0, w), "pvoigt": pvoigt(x, x0, w),
            }));
        }
    }
    let lines = |s: &Signal| -> Vec<[f64; 3]> {
        h_lines(s).into_iter().map(|(p, a, w)| [p, a, w]).collect()
    };
    let mut table_lines: Vec<Value> = Vec::new();
    for c in compounds {
        for (i, s) in c.h.iter().enumerate() {
            table_lines.push(json!({"compound": c.name, "index": i, "lines": lines(s)}));
        }
    }
    let mut multiplet_lines: Vec<Value> = Vec::new();
    for (mult, j) in [
        ("s", 0.0),
        ("d", 7.1),
        ("t", 7.1),
        ("q", 7.1),
        ("quint", 6.9),
        ("sext", 7.3),
        ("sept", 6.8),
        ("m", 0.0),
        ("m", 6.5),
        ("br", 0.0),
    ] {
        let s = Signal {
            ppm: 2.345,
            n: 3.0,
            mult: mult.to_string(),
            j,
        };
        multiplet_lines.push(json!({
            "signal": {"ppm": s.ppm, "nH": s.n, "mult": mult, "J_hz": j},
            "lines": lines(&s),
        }));
    }
    let mut ir = Vec::new();
    let mut raman = Vec::new();
    let mut nmr = Vec::new();
    for (k, c) in compounds.iter().enumerate() {
        // Shifted, so that the shift enters as on the generator's side.
        let ys: Vec<f64> = (0..=1800)
            .map(|i| ir_absorbance(&c.ir, 4000.0 - 2.0 * i as f64, 3.0, &[]))
            .collect();
        ir.push(json!({"compound": c.name, "shift": 3.0, "y": ys}));
        let ys: Vec<f64> = raman_xs()
            .into_iter()
            .map(|x| raman_signal(&c.raman, x, -2.0, &[]))
            .collect();
        raman.push(json!({"compound": c.name, "shift": -2.0, "y": ys}));
        let solvents: Vec<Solvent> = if k == 0 {
            Solvent::ALL.to_vec()
        } else {
            vec![c.h_solvent]
        };
        for solvent in solvents {
            let (shift, lw) = (0.01, 0.008);
            let ys: Vec<f64> = nmr_spectrum(c.h.iter(), solvent, shift, lw)
                .into_iter()
                .map(|p| p.1)
                .collect();
            nmr.push(json!({
                "compound": c.name, "solvent": solvent.name(), "shift": shift, "lw": lw, "y": ys,
            }));
        }
    }
    let background: Vec<Value> = [4000.0, 9000.0]
        .into_iter()
        .map(|scale| {
            let ys: Vec<f64> = raman_xs()
                .into_iter()
                .map(|x| fluorescence(x, scale))
                .collect();
            json!({"scale": scale, "y": ys})
        })
        .collect();
    let out = json!({
        "peaks": peaks,
        "h_lines": table_lines,
        "multiplets": multiplet_lines,
        "ir": ir,
        "raman": raman,
        "fluorescence": background,
        "nmr": nmr,
    });
    println!("{out}");
}
