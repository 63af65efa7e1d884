//! The InChIKey's published form (IUPAC InChI Technical Manual, section "InChIKey"): 27
//! characters, `AAAAAAAAAAAAAA-BBBBBBBBFV-P`: 14 upper-case letters hashing the skeleton, a
//! hyphen, 8 upper-case letters hashing the other layers, the flag `S` (standard) or `N`
//! (non-standard), the version letter (`A` for version 1), a hyphen and the protonation letter
//! (`N` neutral, `M` and below or `O` and above for protons removed or added).

use crate::error::{Error, Result};

/// The InChIKey `text` names, upper-cased and trimmed, or why it is not one. Only the form is
/// checked: the key is a hash, so no digit or letter of it can be verified without the InChI.
pub fn check_inchikey(text: &str) -> Result<String> {
    let key = text.trim().to_ascii_uppercase();
    let b = key.as_bytes();
    let letters = |r: std::ops::Range<usize>| b[r].iter().all(u8::is_ascii_uppercase);
    let ok = b.len() == 27
        && letters(0..14)
        && b[14] == b'-'
        && letters(15..23)
        && matches!(b[23], b'S' | b'N')
        && b[24].is_ascii_uppercase()
        && b[25] == b'-'
        && b[26].is_ascii_uppercase();
    if !ok {
        return Err(Error::invalid(
            format!(
                "'{}' is not an InChIKey",
                crate::error::excerpt(text.trim(), 60)
            ),
            "an InChIKey has 27 characters, 14 letters, a hyphen, 10 letters (the ninth S or N), a hyphen and one letter, e.g. YXFVVABEGXRONW-UHFFFAOYSA-N",
        ));
    }
    Ok(key)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_published_form_is_accepted_and_others_refused() {
        // Keys as PubChem lists them for toluene and acetone (from memory); the form is the
        // IUPAC InChI Technical Manual's.
        assert_eq!(
            check_inchikey(" yxfvvabegxronw-uhfffaoysa-n ").unwrap(),
            "YXFVVABEGXRONW-UHFFFAOYSA-N"
        );
        assert!(check_inchikey("CSCPPACGZOOCGX-UHFFFAOYSA-N").is_ok());
        // A non-standard key (flag N) has the same form.
        assert!(check_inchikey("CSCPPACGZOOCGX-UHFFFAOYNA-N").is_ok());
        for bad in [
            "",
            "YXFVVABEGXRONW-UHFFFAOYSA",      // no protonation letter
            "YXFVVABEGXRONWUHFFFAOYSAN",      // no hyphens
            "YXFVVABEGXRON1-UHFFFAOYSA-N",    // a digit
            "YXFVVABEGXRONW-UHFFFAOYXA-N",    // flag neither S nor N
            "YXFVVABEGXRONW-UHFFFAOYSA-NN",   // 28 characters
            "InChI=1S/C7H8/c1-7-5-3-2-4-6-7", // an InChI, not its key
        ] {
            let err = check_inchikey(bad).unwrap_err().to_string();
            assert!(err.contains("not an InChIKey"), "{bad}: {err}");
        }
    }
}
