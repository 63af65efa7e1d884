//! Chemistry beside the search: formulas, CAS Registry Numbers, element data, masses, isotope
//! patterns and the sub-formulas that explain EI fragment ions.

mod cas;
mod elements;
mod formula;
mod fragments;
mod inchikey;
mod isotopes;
mod mass;

pub use cas::check_cas;
pub use elements::{ElementData, Isotope, element, supported_elements};
pub use formula::{Formula, parse_formula};
pub use fragments::{
    ELECTRON_MASS, Fragment, explains, molecular_region_top, ms_formula_warnings, parse_mz_list,
    sub_formulas,
};
pub use inchikey::check_inchikey;
pub use isotopes::{IsotopePeak, isotope_pattern, reach_below};
pub use mass::{
    FormulaSummary, NitrogenRule, average_mass, ihd, monoisotopic_mass, nitrogen_rule,
    nominal_mass, summarize,
};
