//! People's names as the library compares them: who submitted, who signed off, which account.
//!
//! A name is stored as typed after Unicode normalisation form NFKC (Unicode Standard Annex
//! #15), so full-width letters and compatibility forms become their plain letters. Two names
//! belong to the same person when their keys agree: the key is the NFKC form, lower-cased,
//! mapped to its confusable skeleton (Unicode Technical Standard #39, "Unicode Security
//! Mechanisms", section 4, through the `unicode-security` crate of the unicode-rs project) and
//! lower-cased again, so that a Cyrillic `а` or a Greek `ο` cannot pass for a Latin `a` or `o`
//! and a change of case cannot make a second person. Names with control characters or
//! invisible format characters (a zero-width space, a bidirectional override) are refused
//! rather than cleaned, since a name that hides characters is not one a reviewer can read.

use unicode_normalization::UnicodeNormalization;
use unicode_security::confusable_detection::skeleton;

use crate::error::{Error, Result};

/// The longest name accepted, in characters.
pub const MAX_NAME_CHARS: usize = 100;

/// A person's name, checked and normalised, with the key that identifies the person.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Person {
    name: String,
    key: String,
}

impl Person {
    /// Checks and normalises a name; `what` says where it came from ("reviewer", "account").
    pub fn new(raw: &str, what: &str) -> Result<Person> {
        let trimmed = raw.trim();
        if trimmed.is_empty() {
            return Err(Error::invalid(
                format!("the {what} name is empty"),
                "give the person's name or account, e.g. --by j.doe",
            ));
        }
        if let Some(c) = trimmed.chars().find(|&c| is_hidden(c)) {
            return Err(Error::invalid(
                format!(
                    "the {what} name contains the invisible or control character U+{:04X}",
                    u32::from(c)
                ),
                "type the name with visible letters only; names are compared as people read them",
            ));
        }
        let name: String = trimmed.nfkc().collect();
        if name.chars().count() > MAX_NAME_CHARS {
            return Err(Error::invalid(
                format!("the {what} name is longer than {MAX_NAME_CHARS} characters"),
                "use a shorter name or an account handle",
            ));
        }
        let key = key_of(&name);
        Ok(Person { name, key })
    }

    /// The name as stored and shown (NFKC).
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The comparison key: equal keys mean the same person.
    pub fn key(&self) -> &str {
        &self.key
    }

    /// Whether two names could be the same person to a reader.
    pub fn same_person(&self, other: &Person) -> bool {
        self.key == other.key
    }
}

/// The comparison key of a name already in NFKC form.
fn key_of(name: &str) -> String {
    let lower: String = name.chars().flat_map(char::to_lowercase).collect();
    skeleton(&lower).flat_map(char::to_lowercase).collect()
}

/// Whether two stored names (trusted to be normalised already, or older rows typed before
/// normalisation) could be the same person.
pub fn same_person(a: &str, b: &str) -> bool {
    let nfkc = |s: &str| s.trim().nfkc().collect::<String>();
    key_of(&nfkc(a)) == key_of(&nfkc(b))
}

/// Control characters (general category Cc), format characters that render as nothing or
/// reorder text (zero-width space and joiners, bidirectional marks and overrides, the word
/// joiner and invisible operators, the byte-order mark, soft hyphen), and other
/// default-ignorable code points.
fn is_hidden(c: char) -> bool {
    c.is_control()
        || matches!(
            c,
            '\u{00AD}'
                | '\u{034F}'
                | '\u{061C}'
                | '\u{115F}'
                | '\u{1160}'
                | '\u{17B4}'
                | '\u{17B5}'
                | '\u{180B}'..='\u{180F}'
                | '\u{200B}'..='\u{200F}'
                | '\u{202A}'..='\u{202E}'
                | '\u{2060}'..='\u{206F}'
                | '\u{3164}'
                | '\u{FE00}'..='\u{FE0F}'
                | '\u{FEFF}'
                | '\u{FFA0}'
                | '\u{FFF0}'..='\u{FFF8}'
                | '\u{1BCA0}'..='\u{1BCA3}'
                | '\u{1D173}'..='\u{1D17A}'
                | '\u{E0000}'..='\u{E0FFF}'
        )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn key(s: &str) -> String {
        Person::new(s, "reviewer").unwrap().key().to_string()
    }

    #[test]
    fn look_alike_letters_are_the_same_person() {
        // Cyrillic small a (U+0430) and c (U+0441) are confusable with Latin a and c in the
        // UTS #39 confusables data.
        assert_eq!(key("dana"), key("d\u{0430}na"));
        assert_eq!(key("cole"), key("\u{0441}ole"));
        // Greek omicron (U+03BF) with Latin o.
        assert_eq!(key("orin"), key("\u{03BF}rin"));
    }

    #[test]
    fn full_width_and_case_variants_are_the_same_person() {
        // Full-width Latin letters (U+FF21..) decompose to ASCII under NFKC (UAX #15).
        let wide = Person::new("\u{FF24}\u{FF41}\u{FF4E}\u{FF41}", "reviewer").unwrap();
        assert_eq!(wide.name(), "Dana");
        assert_eq!(wide.key(), key("dana"));
        assert_eq!(key("DANA"), key("dana"));
        assert_eq!(key("  dana "), key("dana"));
    }

    #[test]
    fn different_names_stay_different() {
        assert_ne!(key("dana"), key("dina"));
        assert_ne!(key("a.lind"), key("a.lund"));
        assert!(!same_person("dana", "dina"));
        assert!(same_person("Dana", "d\u{0430}na"));
    }

    #[test]
    fn hidden_and_empty_names_are_refused() {
        for bad in [
            "",
            "   ",
            "da\u{200B}na",
            "dana\u{202E}",
            "da\nna",
            "\u{FEFF}dana",
            "da\u{1b}[31mna",
        ] {
            let e = Person::new(bad, "reviewer").unwrap_err();
            assert!(
                e.to_string().contains("empty") || e.to_string().contains("U+"),
                "{bad:?}: {e}"
            );
        }
        assert!(Person::new(&"x".repeat(MAX_NAME_CHARS + 1), "reviewer").is_err());
    }
}
