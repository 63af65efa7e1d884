//! The library state hash: a name for an exact state of the searchable content.
//!
//! Each searchable spectrum contributes the SHA-256 of its canonical record; the
//! contributions are added modulo 2^256 (an incremental multiset hash, so that adding,
//! revising or withdrawing one spectrum updates the sum without reading the others), and the
//! state hash is the SHA-256 of the recipes and that sum. `check` recomputes the sum from
//! scratch. The audit trail, not the state hash, is what makes tampering evident.

use sha2::{Digest, Sha256};

/// A 256-bit running sum, big-endian.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct ContentSum(pub [u8; 32]);

impl ContentSum {
    /// Adds a record hash.
    pub fn add(&mut self, h: &[u8; 32]) {
        let mut carry = 0u16;
        for i in (0..32).rev() {
            let s = u16::from(self.0[i]) + u16::from(h[i]) + carry;
            self.0[i] = s as u8;
            carry = s >> 8;
        }
    }

    /// Removes a record hash that was added before.
    pub fn remove(&mut self, h: &[u8; 32]) {
        // Subtracting is adding the two's complement.
        let mut neg = [0u8; 32];
        for i in 0..32 {
            neg[i] = !h[i];
        }
        let mut one = [0u8; 32];
        one[31] = 1;
        let mut t = ContentSum(neg);
        t.add(&one);
        self.add(&t.0);
    }

    /// Hex form for storage.
    pub fn to_hex(self) -> String {
        hex::encode(self.0)
    }

    /// Reads the hex form; `None` when malformed.
    pub fn from_hex(s: &str) -> Option<ContentSum> {
        let bytes = hex::decode(s).ok()?;
        Some(ContentSum(bytes.try_into().ok()?))
    }
}

/// SHA-256 of the canonical encoding of one searchable record: what is searched (technique,
/// raw points, current metadata) and whether it is searched by default (status). Local ids and
/// revision numbers are left out, so that a library rebuilt from an exported bundle has the
/// same state hash as the library it came from.
pub fn record_hash(
    technique: &str,
    status: &str,
    raw_sha256: &str,
    metadata_json: &str,
) -> [u8; 32] {
    let canonical = serde_json::json!([technique, status, raw_sha256, metadata_json]).to_string();
    Sha256::digest(canonical.as_bytes()).into()
}

/// The state hash: SHA-256 over a format tag, the recipes (JSON, in technique order) and the sum.
pub fn state_hash(recipes_json: &str, sum: ContentSum) -> String {
    let mut h = Sha256::new();
    // The format tag keeps the word the hash was first called by: changing it would change
    // every state hash, and with it every saved search and bundle made before.
    h.update(b"whorl fingerprint v1\n");
    h.update(recipes_json.as_bytes());
    h.update(b"\n");
    h.update(sum.0);
    hex::encode(h.finalize())
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Pins the record hash, the sum and the state hash, which existing libraries and
    /// bundles record. The values were computed independently with Python: `hashlib.sha256`
    /// over `json.dumps([technique, status, raw_sha256, metadata_json], separators=(",", ":"))`,
    /// the two record hashes added as 256-bit big-endian integers modulo 2^256, and SHA-256
    /// over `b"whorl fingerprint v1\n" + recipes + b"\n" + sum`.
    #[test]
    fn hashes_and_state_hash_match_their_documented_encoding() {
        let a = record_hash("ir", "verified", &"ab".repeat(32), r#"{"name":"acetone"}"#);
        assert_eq!(
            hex::encode(a),
            "599510fbb46e94303ba161b4c70df2fc4877318d8d99e7c3203f61de93f4e050"
        );
        let b = record_hash(
            "ms-ei",
            "pending",
            &"cd".repeat(32),
            r#"{"name":"ethanol"}"#,
        );
        let mut sum = ContentSum::default();
        sum.add(&a);
        sum.add(&b);
        assert_eq!(
            sum.to_hex(),
            "806f8f52776edad2290ba9698e7cabe425ff31f4bb03fc2ed1177b9c65e80356"
        );
        assert_eq!(ContentSum::from_hex(&sum.to_hex()), Some(sum));
        assert_eq!(
            state_hash(r#"[{"technique":"ir"}]"#, sum),
            "0c918d886831f71b2cef9953e2e635d653e37e8c219f00381d7e9edf373483f6"
        );
    }

    proptest! {
        #[test]
        fn sum_is_order_free_and_removable(a in any::<[u8; 32]>(), b in any::<[u8; 32]>(), c in any::<[u8; 32]>()) {
            let mut x = ContentSum::default();
            x.add(&a); x.add(&b); x.add(&c);
            let mut y = ContentSum::default();
            y.add(&c); y.add(&a); y.add(&b);
            prop_assert_eq!(x, y);
            y.remove(&b);
            let mut z = ContentSum::default();
            z.add(&a); z.add(&c);
            prop_assert_eq!(y, z);
        }
    }
}
