//! Properties: the reader never panics, whatever the bytes.

use super::*;
use crate::spectrum::XUnit;
use proptest::prelude::*;

/// Cases per property: 60k each, so that CI feeds the reader 120k inputs
/// (random bytes and near-valid CSV). `PROPTEST_CASES` overrides it for a quick local run.
fn cases() -> u32 {
    std::env::var("PROPTEST_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(60_000)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: cases(), failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn the_reader_never_panics(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        for t in [Technique::Ir, Technique::Nmr13c] {
            let _ = read_points_from_bytes(Path::new("fuzz.csv"), &bytes, t);
        }
    }

    #[test]
    fn the_reader_never_panics_on_near_valid_text(lines in prop::collection::vec("[0-9.,;eE+\\-\\t #a-z]{0,24}", 0..30)) {
        let text = lines.join("\n");
        if let Ok(p) = read_points_from_bytes(Path::new("fuzz.csv"), text.as_bytes(), Technique::Nmr13c) {
            prop_assert!(p.points.iter().all(|(x, y)| x.is_finite() && y.is_finite()));
            for t in Technique::ALL {
                let _ = check_points(Path::new("fuzz.csv"), &p, t, XUnit::Wavenumber);
            }
        }
    }
}
