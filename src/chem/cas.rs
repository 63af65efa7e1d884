//! CAS Registry Number syntax and check digit.

use crate::error::{Error, Result};

/// Checks a CAS RN (`NNNNNNN-NN-N`, two to seven digits in the first part) and its check
/// digit, and returns it trimmed. The check digit is the sum of every other digit times its
/// position counted from the right (1 for the digit before the check digit), modulo 10
/// (CAS, "CAS Registry Number verification", published format rule).
pub fn check_cas(text: &str) -> Result<String> {
    let cas = text.trim();
    let parts: Vec<&str> = cas.split('-').collect();
    let shape_ok = parts.len() == 3
        && (2..=7).contains(&parts[0].len())
        && parts[1].len() == 2
        && parts[2].len() == 1
        && parts.iter().all(|p| p.bytes().all(|b| b.is_ascii_digit()));
    if !shape_ok {
        return Err(Error::invalid(
            format!("'{cas}' is not a CAS RN"),
            "a CAS RN looks like 108-88-3: 2-7 digits, 2 digits, 1 check digit",
        ));
    }
    let digits: Vec<u32> = format!("{}{}", parts[0], parts[1])
        .bytes()
        .map(|b| u32::from(b - b'0'))
        .collect();
    let sum: u32 = digits
        .iter()
        .rev()
        .enumerate()
        .map(|(i, d)| (i as u32 + 1) * d)
        .sum();
    let expected = sum % 10;
    let given = u32::from(parts[2].as_bytes()[0] - b'0');
    if expected != given {
        return Err(Error::invalid(
            format!("CAS RN {cas} fails its check digit (the digits give {expected}, not {given})"),
            "check the number against the supplier's certificate",
        ));
    }
    Ok(cas.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn check_digits() {
        // The worked example of the check-digit rule uses water, 7732-18-5 (CAS; common practice).
        assert!(check_cas("7732-18-5").is_ok());
        assert!(check_cas("64-17-5").is_ok()); // ethanol, from memory
        assert!(check_cas("108-88-3").is_ok()); // toluene, from memory
        assert!(
            check_cas("7732-18-4")
                .unwrap_err()
                .to_string()
                .contains("check digit")
        );
        assert!(check_cas("7732185").is_err());
        assert!(check_cas("1-18-5").is_err());
    }
}
