//! Spectra as read from files: raw points, units, and the hashes that name them.

mod metadata;
mod reader;
mod units;

pub use metadata::{Metadata, Status, csv_cell, csv_cell_restored, extra_fields};
pub use reader::{ParsedPoints, check_points, looks_like, read_points, read_points_from_bytes};
pub use units::{XUnit, YUnit};

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

/// A spectrum exactly as it was read: the points in file order and the units they carry.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RawSpectrum {
    /// `(x, y)` pairs in the order the file gave them.
    pub points: Vec<(f64, f64)>,
    /// The unit of x as given.
    pub x_unit: XUnit,
    /// The unit of y as given or detected.
    pub y_unit: YUnit,
    /// SHA-256 of the original file bytes, hex.
    pub file_sha256: String,
}

impl RawSpectrum {
    /// The canonical encoding of the raw points: each x then y as little-endian f64, in file order.
    pub fn canonical_bytes(&self) -> Vec<u8> {
        encode_points(&self.points)
    }

    /// SHA-256 of [`RawSpectrum::canonical_bytes`], hex. Two imports of the same
    /// measurement have the same raw hash whatever the file's delimiter or decimal mark.
    pub fn raw_sha256(&self) -> String {
        sha256_hex(&self.canonical_bytes())
    }
}

/// Encodes points as little-endian f64 pairs.
pub fn encode_points(points: &[(f64, f64)]) -> Vec<u8> {
    let mut out = Vec::with_capacity(points.len() * 16);
    for &(x, y) in points {
        out.extend_from_slice(&x.to_le_bytes());
        out.extend_from_slice(&y.to_le_bytes());
    }
    out
}

/// Decodes what [`encode_points`] wrote; `None` when the length is not a multiple of 16.
pub fn decode_points(bytes: &[u8]) -> Option<Vec<(f64, f64)>> {
    if !bytes.len().is_multiple_of(16) {
        return None;
    }
    let f = |b: &[u8]| f64::from_le_bytes(b.try_into().expect("8 bytes"));
    Some(
        bytes
            .chunks_exact(16)
            .map(|c| (f(&c[..8]), f(&c[8..])))
            .collect(),
    )
}

/// SHA-256 of bytes as lowercase hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex::encode(Sha256::digest(bytes))
}

/// SHA-256 of everything `reader` gives, hex, read in blocks (never held whole in memory).
pub fn sha256_hex_of(mut reader: impl std::io::Read) -> std::io::Result<String> {
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 16];
    loop {
        let n = reader.read(&mut buf)?;
        if n == 0 {
            return Ok(hex::encode(h.finalize()));
        }
        h.update(&buf[..n]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn points_round_trip_through_their_encoding() {
        let pts = vec![(4000.0, 0.01), (3998.0, -0.002), (1715.5, 0.9)];
        assert_eq!(decode_points(&encode_points(&pts)).unwrap(), pts);
        assert!(decode_points(&[0u8; 15]).is_none());
    }

    #[test]
    fn sha256_of_empty_input_matches_the_published_digest() {
        // FIPS 180-4 test vector: SHA-256("") (NIST CSRC example values).
        assert_eq!(
            sha256_hex(b""),
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
        );
        // SHA-256("abc"), the FIPS 180-2 appendix B.1 example.
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }
}
