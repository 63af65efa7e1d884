//! The seed tables (`seed-library/compounds.json`) as the evaluation reads them.

use std::path::Path;

use serde_json::Value;
use whorl::prepare::Solvent;

pub struct Band {
    pub pos: f64,
    pub height: f64,
    pub fwhm: f64,
}

pub struct Signal {
    pub ppm: f64,
    pub n: f64,
    pub mult: String,
    pub j: f64,
}

pub struct Carbon {
    pub ppm: f64,
    pub n: f64,
    pub quaternary: bool,
}

pub struct Compound {
    pub name: String,
    pub ir: Vec<Band>,
    pub raman: Vec<Band>,
    pub ms: Vec<(f64, f64)>,
    pub h_solvent: Solvent,
    pub h: Vec<Signal>,
    pub c_solvent: Solvent,
    pub c: Vec<Carbon>,
}

pub fn f(v: &Value, k: &str) -> f64 {
    v[k].as_f64().unwrap_or_else(|| panic!("{k} in {v}"))
}

pub fn load(seed: &Path) -> Vec<Compound> {
    let text = std::fs::read_to_string(seed.join("compounds.json")).expect("compounds.json");
    let v: Value = serde_json::from_str(&text).expect("valid JSON");
    let bands = |x: &Value| -> Vec<Band> {
        x["bands"]
            .as_array()
            .unwrap()
            .iter()
            .map(|b| Band {
                pos: f(b, "pos"),
                height: f(b, "height"),
                fwhm: f(b, "fwhm"),
            })
            .collect()
    };
    v["compounds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| Compound {
            name: c["name"].as_str().unwrap().to_string(),
            ir: bands(&c["ir"]),
            raman: bands(&c["raman"]),
            ms: c["ms"]["peaks"]
                .as_array()
                .unwrap()
                .iter()
                .map(|p| (f(p, "mz"), f(p, "rel")))
                .collect(),
            h_solvent: c["nmr_1h"]["solvent"].as_str().unwrap().parse().unwrap(),
            h: c["nmr_1h"]["signals"]
                .as_array()
                .unwrap()
                .iter()
                .map(|s| Signal {
                    ppm: f(s, "ppm"),
                    n: f(s, "nH"),
                    mult: s["mult"].as_str().unwrap().to_string(),
                    j: f(s, "J_hz"),
                })
                .collect(),
            c_solvent: c["nmr_13c"]["solvent"].as_str().unwrap().parse().unwrap(),
            c: c["nmr_13c"]["signals"]
                .as_array()
                .unwrap()
                .iter()
                .map(|s| Carbon {
                    ppm: f(s, "ppm"),
                    n: f(s, "nC"),
                    quaternary: s["kind"] == "q",
                })
                .collect(),
        })
        .collect()
}
