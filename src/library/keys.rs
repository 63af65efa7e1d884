//! Lab keys: the ed25519 key pair a lab signs its bundles with, and the public keys a library
//! trusts bundles from.
//!
//! Signatures are Ed25519 (Josefsson & Liusvaara, RFC 8032, "Edwards-Curve Digital Signature
//! Algorithm (EdDSA)", 2017, section 5.1) through the `ed25519-dalek` crate of the dalek
//! cryptography project. A bundle is signed over the exact bytes of its `SHA256SUMS`, which
//! name every other file of the bundle with its SHA-256, so one signature covers the manifest,
//! `bundle.json` and every spectrum file.
//!
//! Files are one line of text each: `whorl-ed25519-secret NAME HEX` (the 32-byte seed; written
//! with mode 0600), `whorl-ed25519-public NAME HEX` (the 32-byte public key) and, in a bundle,
//! `SIGNATURE`: `whorl-ed25519-signature NAME PUBLIC-HEX SIGNATURE-HEX`.

use std::io::Write as _;
use std::path::{Path, PathBuf};

use ed25519_dalek::{Signature, Signer, SigningKey, VerifyingKey};
use rusqlite::params;
use serde::Serialize;

use super::events::append_event;
use super::{Library, now};
use crate::error::{Error, Location, Result};

const SECRET_TAG: &str = "whorl-ed25519-secret";
const PUBLIC_TAG: &str = "whorl-ed25519-public";
const SIGNATURE_TAG: &str = "whorl-ed25519-signature";

/// The file in a bundle that holds its signature.
pub const SIGNATURE_FILE: &str = "SIGNATURE";

/// A lab's signing key (private).
pub struct KeyPair {
    name: String,
    signing: SigningKey,
}

/// A public key with the name its lab gave it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PublicKey {
    name: String,
    key: VerifyingKey,
}

/// A public key the library trusts, as recorded by `whorl key trust`.
#[derive(Debug, Clone, Serialize)]
pub struct TrustedKey {
    /// The name its lab gave it.
    pub name: String,
    /// The public key, 64 hex digits.
    pub public_key: String,
    /// Who trusted it.
    pub trusted_by: String,
    /// When (UTC).
    pub trusted_at: String,
    /// Why.
    pub reason: String,
}

/// A bundle's `SIGNATURE` file, read.
#[derive(Debug, Clone)]
pub struct BundleSignature {
    /// The key that signed, as the file names it.
    pub key: PublicKey,
    signature: Signature,
}

fn check_name(name: &str) -> Result<()> {
    if name.is_empty()
        || name.len() > 64
        || !name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '-' | '_'))
    {
        return Err(Error::invalid(
            format!("'{name}' is not a key name"),
            "name a key with 1-64 letters, digits, '.', '-' or '_', e.g. the lab's short name",
        ));
    }
    Ok(())
}

fn unhex<const N: usize>(text: &str) -> Option<[u8; N]> {
    hex::decode(text).ok()?.try_into().ok()
}

impl KeyPair {
    /// A key pair from its 32-byte seed (the RFC 8032 private key).
    pub fn from_seed(name: &str, seed: [u8; 32]) -> Result<KeyPair> {
        check_name(name)?;
        Ok(KeyPair {
            name: name.to_string(),
            signing: SigningKey::from_bytes(&seed),
        })
    }

    /// A new key pair from the operating system's random number generator.
    pub fn generate(name: &str) -> Result<KeyPair> {
        let mut seed = [0u8; 32];
        getrandom::fill(&mut seed).map_err(|e| {
            Error::invalid(
                format!("the operating system gave no random bytes: {e}"),
                "run the command again; if it persists, check the system's entropy source",
            )
        })?;
        KeyPair::from_seed(name, seed)
    }

    /// The key's name.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The public half.
    pub fn public(&self) -> PublicKey {
        PublicKey {
            name: self.name.clone(),
            key: self.signing.verifying_key(),
        }
    }

    /// The Ed25519 signature of `message` (RFC 8032 section 5.1.6).
    pub fn sign(&self, message: &[u8]) -> [u8; 64] {
        self.signing.sign(message).to_bytes()
    }

    /// Writes `NAME.key` (mode 0600, refused if it exists) and `NAME.pub` into `dir`, which
    /// is created (mode 0700) if missing. Returns the two paths.
    pub fn write(&self, dir: &Path) -> Result<(PathBuf, PathBuf)> {
        let io = |what: &Path| {
            let what = what.display().to_string();
            move |e| Error::io(format!("writing {what}"), e)
        };
        let mut builder = std::fs::DirBuilder::new();
        builder.recursive(true);
        #[cfg(unix)]
        std::os::unix::fs::DirBuilderExt::mode(&mut builder, 0o700);
        builder.create(dir).map_err(io(dir))?;
        let secret = dir.join(format!("{}.key", self.name));
        let public = dir.join(format!("{}.pub", self.name));
        if secret.exists() || public.exists() {
            return Err(Error::invalid(
                format!(
                    "a key named {} already exists in {}",
                    self.name,
                    dir.display()
                ),
                "choose another name, or keep using the existing key",
            ));
        }
        let mut options = std::fs::OpenOptions::new();
        options.write(true).create_new(true);
        #[cfg(unix)]
        std::os::unix::fs::OpenOptionsExt::mode(&mut options, 0o600);
        let mut f = options.open(&secret).map_err(io(&secret))?;
        writeln!(
            f,
            "{SECRET_TAG} {} {}",
            self.name,
            hex::encode(self.signing.to_bytes())
        )
        .and_then(|()| f.sync_all())
        .map_err(io(&secret))?;
        std::fs::write(&public, self.public().line()).map_err(io(&public))?;
        Ok((secret, public))
    }

    /// Reads a private key file written by [`KeyPair::write`].
    pub fn read(path: &Path) -> Result<KeyPair> {
        let text = read_key_file(path)?;
        let bad = || {
            Error::input(
                Location::file(path),
                "not a whorl private key",
                "give the NAME.key file written by `whorl key create`",
            )
        };
        let mut parts = text.split_whitespace();
        let (Some(SECRET_TAG), Some(name), Some(seed), None) =
            (parts.next(), parts.next(), parts.next(), parts.next())
        else {
            return Err(bad());
        };
        KeyPair::from_seed(name, unhex(seed).ok_or_else(bad)?)
    }
}

fn read_key_file(path: &Path) -> Result<String> {
    let meta = std::fs::metadata(path).map_err(|e| {
        Error::input(
            Location::file(path),
            format!("cannot read the key file: {e}"),
            "check the path of the key file",
        )
    })?;
    if !meta.is_file() || meta.len() > 4096 {
        return Err(Error::input(
            Location::file(path),
            "not a key file",
            "give a file written by `whorl key create`",
        ));
    }
    std::fs::read_to_string(path).map_err(|e| {
        Error::input(
            Location::file(path),
            format!("cannot read the key file: {e}"),
            "give a file written by `whorl key create`",
        )
    })
}

impl PublicKey {
    /// The key's name.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The key as 64 hex digits.
    pub fn hex(&self) -> String {
        hex::encode(self.key.to_bytes())
    }

    /// The text of a `.pub` file.
    pub fn line(&self) -> String {
        format!("{PUBLIC_TAG} {} {}\n", self.name, self.hex())
    }

    /// Whether `signature` is this key's Ed25519 signature of `message` (RFC 8032 section
    /// 5.1.7, with the stricter checks of `verify_strict`).
    pub fn verifies(&self, message: &[u8], signature: &[u8; 64]) -> bool {
        self.key
            .verify_strict(message, &Signature::from_bytes(signature))
            .is_ok()
    }

    /// Reads a public key file written by `whorl key create`.
    pub fn read(path: &Path) -> Result<PublicKey> {
        let text = read_key_file(path)?;
        let mut parts = text.split_whitespace();
        let bad = |why: &str| {
            Error::input(
                Location::file(path),
                format!("not a whorl public key: {why}"),
                "give the NAME.pub file written by `whorl key create` (never the .key file)",
            )
        };
        match (parts.next(), parts.next(), parts.next(), parts.next()) {
            (Some(PUBLIC_TAG), Some(name), Some(key), None) => {
                check_name(name)?;
                let bytes = unhex::<32>(key).ok_or_else(|| bad("the key is not 64 hex digits"))?;
                let key = VerifyingKey::from_bytes(&bytes)
                    .map_err(|_| bad("the key is not a point of the curve"))?;
                Ok(PublicKey {
                    name: name.to_string(),
                    key,
                })
            }
            (Some(SECRET_TAG), ..) => Err(bad("this is a private key; share only the .pub file")),
            _ => Err(bad("the first word is not whorl-ed25519-public")),
        }
    }
}

/// The text of a bundle's `SIGNATURE` file: `key`'s signature of `sums` (the bytes of
/// `SHA256SUMS`).
pub(super) fn signature_line(key: &KeyPair, sums: &[u8]) -> String {
    format!(
        "{SIGNATURE_TAG} {} {} {}\n",
        key.name,
        key.public().hex(),
        hex::encode(key.sign(sums))
    )
}

/// Reads a bundle's `SIGNATURE` file; `Ok(None)` when the bundle has none.
pub(super) fn read_signature(dir: &Path) -> Result<Option<BundleSignature>> {
    let path = dir.join(SIGNATURE_FILE);
    if !path.exists() {
        return Ok(None);
    }
    let text = read_key_file(&path)?;
    let bad = || {
        Error::input(
            Location::file(&path),
            "not a bundle signature",
            "export the bundle again with --sign, or import it with --untrusted",
        )
    };
    let mut parts = text.split_whitespace();
    let (Some(SIGNATURE_TAG), Some(name), Some(key), Some(sig), None) = (
        parts.next(),
        parts.next(),
        parts.next(),
        parts.next(),
        parts.next(),
    ) else {
        return Err(bad());
    };
    let key = VerifyingKey::from_bytes(&unhex::<32>(key).ok_or_else(bad)?).map_err(|_| bad())?;
    Ok(Some(BundleSignature {
        key: PublicKey {
            name: name.to_string(),
            key,
        },
        signature: Signature::from_bytes(&unhex::<64>(sig).ok_or_else(bad)?),
    }))
}

impl BundleSignature {
    /// Whether it signs `sums`.
    pub fn signs(&self, sums: &[u8]) -> bool {
        self.key.verifies(sums, &self.signature.to_bytes())
    }
}

impl Library {
    /// Records that bundles signed by `key` are trusted, with the reason, as one audited write.
    pub fn trust_key(&mut self, key: &PublicKey, reason: &str, actor: &str) -> Result<TrustedKey> {
        let reason = reason.trim();
        if reason.is_empty() {
            return Err(Error::invalid(
                "trusting a key needs a reason",
                "say whose key it is and how you checked it, e.g. --reason \"partner lab, fingerprint read over the phone\"",
            ));
        }
        let hex = key.hex();
        if self.trusted_keys()?.iter().any(|k| k.public_key == hex) {
            return Err(Error::invalid(
                format!("key {} ({hex}) is already trusted", key.name),
                "see `whorl key list`",
            ));
        }
        let trusted = TrustedKey {
            name: key.name.clone(),
            public_key: hex,
            trusted_by: actor.to_string(),
            trusted_at: now(),
            reason: reason.to_string(),
        };
        self.write(|tx| {
            tx.execute(
                "INSERT INTO trusted_key (name, public_key, trusted_by, trusted_at, reason) VALUES (?1, ?2, ?3, ?4, ?5)",
                params![trusted.name, trusted.public_key, trusted.trusted_by, trusted.trusted_at, trusted.reason],
            )?;
            append_event(
                tx,
                actor,
                "key-trust",
                &format!("key:{}", trusted.public_key),
                &serde_json::to_value(&trusted)?,
            )?;
            Ok((trusted.clone(), vec![]))
        })
    }

    /// The keys the library trusts, oldest first.
    pub fn trusted_keys(&self) -> Result<Vec<TrustedKey>> {
        let mut stmt = self.conn.prepare(
            "SELECT name, public_key, trusted_by, trusted_at, reason FROM trusted_key ORDER BY id",
        )?;
        let rows = stmt.query_map([], |r| {
            Ok(TrustedKey {
                name: r.get(0)?,
                public_key: r.get(1)?,
                trusted_by: r.get(2)?,
                trusted_at: r.get(3)?,
                reason: r.get(4)?,
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 8032 section 7.1, TEST 1 (empty message) and TEST 2 (the one byte 0x72): secret
    /// key, public key, message and signature as published.
    const RFC8032: [(&str, &str, &str, &str); 2] = [
        (
            "9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60",
            "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a",
            "",
            "e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e065224901555fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b",
        ),
        (
            "4ccd089b28ff96da9db6c346ec114e0f5b8a319f35aba624da8cf6ed4fb8a6fb",
            "3d4017c3e843895a92b70aa74d1b7ebc9c982ccf2ec4968cc0cd55f12af4660c",
            "72",
            "92a009a9f0d4cab8720e820b5f642540a2b27b5416503f8fb3762223ebdb69da085ac1e43e15996e458f3613d0f11d8c387b2eaeb4302aeeb00d291612bb0c00",
        ),
    ];

    #[test]
    fn signing_gives_the_rfc_8032_test_vectors() {
        for (secret, public, message, signature) in RFC8032 {
            let pair = KeyPair::from_seed("rfc", unhex(secret).unwrap()).unwrap();
            assert_eq!(pair.public().hex(), public);
            let message = hex::decode(message).unwrap();
            let signed = pair.sign(&message);
            assert_eq!(hex::encode(signed), signature);
            assert!(pair.public().verifies(&message, &signed));
            let mut flipped = signed;
            flipped[0] ^= 1;
            assert!(!pair.public().verifies(&message, &flipped));
            assert!(!pair.public().verifies(b"other", &signed));
        }
    }

    #[test]
    fn a_written_key_pair_reads_back_and_the_secret_is_private() {
        let tmp = tempfile::tempdir().unwrap();
        let pair = KeyPair::generate("lab-a").unwrap();
        let (secret, public) = pair.write(&tmp.path().join("keys")).unwrap();
        let again = KeyPair::read(&secret).unwrap();
        assert_eq!(again.public(), pair.public());
        assert_eq!(PublicKey::read(&public).unwrap(), pair.public());
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let mode = std::fs::metadata(&secret).unwrap().permissions().mode();
            assert_eq!(mode & 0o777, 0o600);
        }
        // Never overwritten; a private key is not accepted as a public one.
        assert!(pair.write(&tmp.path().join("keys")).is_err());
        let err = PublicKey::read(&secret).unwrap_err().to_string();
        assert!(err.contains("private key"), "{err}");
    }

    #[test]
    fn trusting_a_key_needs_a_reason_and_is_audited() {
        let mut lib = Library::in_memory("t").unwrap();
        let key = KeyPair::generate("lab-a").unwrap().public();
        assert!(lib.trust_key(&key, "  ", "admin").is_err());
        lib.trust_key(&key, "partner lab", "admin").unwrap();
        assert_eq!(lib.trusted_keys().unwrap()[0].public_key, key.hex());
        let event = lib.events(None).unwrap().pop().unwrap();
        assert_eq!(
            (event.action.as_str(), event.actor.as_str()),
            ("key-trust", "admin")
        );
        assert_eq!(event.payload["reason"], "partner lab");
        assert!(lib.trust_key(&key, "again", "admin").is_err());
    }
}
