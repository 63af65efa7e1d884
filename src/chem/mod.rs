//! Chemistry the library needs to validate metadata: formulas and CAS Registry Numbers.

mod cas;
mod formula;

pub use cas::check_cas;
pub use formula::{Formula, parse_formula};
