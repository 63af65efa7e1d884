//! Accounts of the lab server, their roles, passwords and bearer tokens.
//!
//! Every change (an account added or disabled, a password set, a lock-out, a token created or
//! revoked) is written in one transaction with its audit event, so the trail says who changed
//! which account and when. Account names go through [`Person`]: the stored key is unique, so a
//! case variant or a look-alike of an existing name cannot make a second account.
//!
//! Passwords are hashed with Argon2id (Biryukov, Dinu, Khovratovich and Josefsson, RFC 9106,
//! "Argon2 Memory-Hard Function for Password Hashing and Proof-of-Work Applications", 2021)
//! through the RustCrypto `argon2` crate, stored as PHC strings, with the parameters of
//! [`PASSWORD_PARAMS`].

use argon2::password_hash::{PasswordHash, PasswordHasher, PasswordVerifier, SaltString};
use argon2::{Algorithm, Argon2, Params, Version};
use rusqlite::{Connection, OptionalExtension, params};
use serde::Serialize;

use super::events::append_event;
use super::identity::Person;
use super::{Library, now};
use crate::error::{Error, Result};
use crate::spectrum::sha256_hex;

/// The shortest password accepted, in characters.
pub const MIN_PASSWORD_CHARS: usize = 12;
/// The longest password accepted, in characters (a bound on the work one sign-in can ask for).
pub const MAX_PASSWORD_CHARS: usize = 256;

/// Argon2id parameters: memory 19 MiB (19,456 KiB), 2 iterations, 1 degree of parallelism,
/// the first of the equivalent configurations in OWASP's Password Storage Cheat Sheet
/// (section "Argon2id"; OWASP Cheat Sheet Series, consulted 2024). Chosen over RFC 9106's
/// second recommended option (64 MiB, t = 3, p = 4; section 4) because the server may verify
/// several sign-ins at once on a small lab machine. Each hash records its own parameters (PHC
/// string), so a later change of these values still verifies older hashes.
pub const PASSWORD_PARAMS: (u32, u32, u32) = (19_456, 2, 1);

/// What a role lets an account do.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Capability {
    /// Search, browse, read the trail and the reports.
    View,
    /// Add and import spectra.
    Submit,
    /// Sign off (review) pending spectra.
    SignOff,
    /// Revise, withdraw, reinstate, change recipes.
    Curate,
    /// Manage accounts, tokens and policies.
    Administer,
}

/// An account's role. Roles grow from `reader` to `admin`, except that `submitter` and
/// `signer` are kept apart: one submits, the other signs off, so the four-eyes rule has two
/// kinds of people to rest on. A `curator` holds both (the self-review rule still refuses a
/// curator's sign-off of their own submission) and an `admin` holds everything.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Role {
    /// View only.
    Reader,
    /// View and submit.
    Submitter,
    /// View and sign off.
    Signer,
    /// View, submit, sign off, curate.
    Curator,
    /// Everything, including accounts and policies.
    Admin,
}

impl Role {
    /// All roles, in order of what they allow.
    pub const ALL: [Role; 5] = [
        Role::Reader,
        Role::Submitter,
        Role::Signer,
        Role::Curator,
        Role::Admin,
    ];

    /// The name stored and typed.
    pub fn as_str(self) -> &'static str {
        match self {
            Role::Reader => "reader",
            Role::Submitter => "submitter",
            Role::Signer => "signer",
            Role::Curator => "curator",
            Role::Admin => "admin",
        }
    }

    /// Parses a role name.
    pub fn parse(s: &str) -> Result<Role> {
        Role::ALL
            .into_iter()
            .find(|r| r.as_str() == s.trim())
            .ok_or_else(|| {
                Error::invalid(
                    format!("'{s}' is not a role"),
                    "use reader, submitter, signer, curator or admin",
                )
            })
    }

    /// Whether the role grants a capability.
    pub fn allows(self, c: Capability) -> bool {
        use Capability::*;
        match self {
            Role::Reader => c == View,
            Role::Submitter => matches!(c, View | Submit),
            Role::Signer => matches!(c, View | SignOff),
            Role::Curator => matches!(c, View | Submit | SignOff | Curate),
            Role::Admin => true,
        }
    }
}

impl std::str::FromStr for Role {
    type Err = Error;
    fn from_str(s: &str) -> Result<Role> {
        Role::parse(s)
    }
}

impl std::fmt::Display for Role {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// An account as stored (without its password hash).
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Account {
    /// Row id.
    pub id: i64,
    /// The name as typed, NFKC.
    pub name: String,
    /// The comparison key (see [`Person`]).
    pub key: String,
    /// The role.
    pub role: Role,
    /// Whether a password has been set.
    pub has_password: bool,
    /// When the account was made (UTC).
    pub created_at: String,
    /// When it was disabled, if it was.
    pub disabled_at: Option<String>,
    /// Why it was disabled.
    pub disabled_reason: Option<String>,
    /// Until when a lock-out refuses sign-ins (UTC), if one was recorded.
    pub locked_until: Option<String>,
}

impl Account {
    /// Whether the account may act at all.
    pub fn is_active(&self) -> bool {
        self.disabled_at.is_none()
    }

    /// Whether the account's role grants a capability (a disabled account has none).
    pub fn can(&self, c: Capability) -> bool {
        self.is_active() && self.role.allows(c)
    }
}

/// A bearer token as listed (never its secret).
#[derive(Debug, Clone, Serialize)]
pub struct Token {
    /// Row id, the token's public name in logs.
    pub id: i64,
    /// The account it acts as.
    pub account: String,
    /// What it is for.
    pub label: String,
    /// When it was made (UTC).
    pub created_at: String,
    /// When it stops working (UTC).
    pub expires_at: String,
    /// When it was revoked, if it was.
    pub revoked_at: Option<String>,
}

/// Whether a password meets the length rules (at least [`MIN_PASSWORD_CHARS`] characters, at
/// most [`MAX_PASSWORD_CHARS`]), checked before a password is hashed or anything is written.
pub fn check_password_rules(password: &str) -> Result<()> {
    let n = password.chars().count();
    if n < MIN_PASSWORD_CHARS {
        return Err(Error::invalid(
            format!("the password has {n} characters; at least {MIN_PASSWORD_CHARS} are needed"),
            "choose a longer password, e.g. a phrase of several words",
        ));
    }
    if n > MAX_PASSWORD_CHARS {
        return Err(Error::invalid(
            format!("the password is longer than {MAX_PASSWORD_CHARS} characters"),
            "choose a shorter password",
        ));
    }
    Ok(())
}

/// The hasher with [`PASSWORD_PARAMS`].
fn hasher() -> Argon2<'static> {
    let (m, t, p) = PASSWORD_PARAMS;
    let params = Params::new(m, t, p, None).expect("the documented Argon2id parameters are valid");
    Argon2::new(Algorithm::Argon2id, Version::V0x13, params)
}

/// `n` random bytes from the operating system.
pub fn random_bytes(n: usize) -> Result<Vec<u8>> {
    let mut buf = vec![0u8; n];
    getrandom::fill(&mut buf).map_err(|e| {
        Error::io(
            "reading random bytes from the operating system",
            std::io::Error::other(e.to_string()),
        )
    })?;
    Ok(buf)
}

/// An Argon2id PHC string for a password, with a fresh 16-byte salt (RFC 9106 section 3.1
/// recommends 16 bytes).
pub fn hash_password(password: &str) -> Result<String> {
    check_password_rules(password)?;
    let salt = SaltString::encode_b64(&random_bytes(16)?).map_err(hash_error)?;
    Ok(hasher()
        .hash_password(password.as_bytes(), &salt)
        .map_err(hash_error)?
        .to_string())
}

/// Whether a password matches a stored PHC string (its own parameters are used).
pub fn verify_password(password: &str, phc: &str) -> bool {
    match PasswordHash::new(phc) {
        Ok(parsed) => Argon2::default()
            .verify_password(password.as_bytes(), &parsed)
            .is_ok(),
        Err(_) => false,
    }
}

fn hash_error(e: argon2::password_hash::Error) -> Error {
    Error::invalid(
        format!("the password could not be hashed: {e}"),
        "try again; report the message if it persists",
    )
}

const ACCOUNT_COLUMNS: &str = "id, name, key, role, password IS NOT NULL, created_at, disabled_at, disabled_reason, locked_until";

fn account_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<Account> {
    let role: String = r.get(3)?;
    Ok(Account {
        id: r.get(0)?,
        name: r.get(1)?,
        key: r.get(2)?,
        // The CHECK constraint keeps the column to the five names.
        role: Role::parse(&role).unwrap_or(Role::Reader),
        has_password: r.get(4)?,
        created_at: r.get(5)?,
        disabled_at: r.get(6)?,
        disabled_reason: r.get(7)?,
        locked_until: r.get(8)?,
    })
}

fn account_by_key(conn: &Connection, key: &str) -> Result<Option<Account>> {
    Ok(conn
        .query_row(
            &format!("SELECT {ACCOUNT_COLUMNS} FROM account WHERE key = ?1"),
            [key],
            account_row,
        )
        .optional()?)
}

fn no_account(name: &str) -> Error {
    Error::invalid(
        format!("there is no account '{name}'"),
        "run `whorl account list` to see the accounts",
    )
}

/// Refuses a change (`doing`: "disabling it", "giving it the role reader") that would take
/// the last active administrator away, so that some account can always manage the others.
/// Checked inside the change's write transaction, so two administrators demoting each other
/// at once cannot both succeed.
fn keep_an_administrator(conn: &Connection, account: &Account, doing: &str) -> Result<()> {
    if account.role != Role::Admin || !account.is_active() {
        return Ok(());
    }
    let admins: i64 = conn.query_row(
        "SELECT count(*) FROM account WHERE role = 'admin' AND disabled_at IS NULL",
        [],
        |r| r.get(0),
    )?;
    if admins > 1 {
        return Ok(());
    }
    Err(Error::invalid(
        format!(
            "'{}' is the only active administrator; {doing} would leave no account that can manage accounts",
            account.name
        ),
        "give another account the admin role first (`whorl account role NAME admin --reason ...` or the accounts page), then change this one",
    ))
}

/// The secret's prefix, so a token found in a log or a file is recognisable as one.
pub const TOKEN_PREFIX: &str = "whorl_";

impl Library {
    /// Adds an account with a role (no password yet), audited as `account-add`.
    pub fn add_account(&mut self, name: &str, role: Role, actor: &str) -> Result<Account> {
        let person = Person::new(name, "account")?;
        self.write_trail(|tx| {
            if let Some(existing) = account_by_key(tx, person.key())? {
                return Err(Error::invalid(
                    format!(
                        "the account '{}' already exists as '{}' (names are compared ignoring case and look-alike letters)",
                        person.name(),
                        existing.name
                    ),
                    "choose a name that differs in more than case or look-alike letters",
                ));
            }
            tx.execute(
                "INSERT INTO account (name, key, role, created_at) VALUES (?1, ?2, ?3, ?4)",
                params![person.name(), person.key(), role.as_str(), now()],
            )?;
            let id = tx.last_insert_rowid();
            append_event(
                tx,
                actor,
                "account-add",
                &format!("account:{id}"),
                &serde_json::json!({ "name": person.name(), "role": role.as_str() }),
            )?;
            let account = account_by_key(tx, person.key())?.ok_or_else(|| no_account(name))?;
            Ok(account)
        })
    }

    /// All accounts, oldest first.
    pub fn accounts(&self) -> Result<Vec<Account>> {
        let mut stmt = self.conn.prepare(&format!(
            "SELECT {ACCOUNT_COLUMNS} FROM account ORDER BY id"
        ))?;
        let rows = stmt.query_map([], account_row)?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// The account a name (in any case or look-alike spelling) belongs to.
    pub fn account(&self, name: &str) -> Result<Option<Account>> {
        let person = Person::new(name, "account")?;
        account_by_key(&self.conn, person.key())
    }

    /// The account with this id.
    pub fn account_by_id(&self, id: i64) -> Result<Option<Account>> {
        Ok(self
            .conn
            .query_row(
                &format!("SELECT {ACCOUNT_COLUMNS} FROM account WHERE id = ?1"),
                [id],
                account_row,
            )
            .optional()?)
    }

    /// Disables an account with a reason, audited as `account-disable`; its tokens stop
    /// working with it. Refuses to disable the last active administrator.
    pub fn disable_account(&mut self, name: &str, reason: &str, actor: &str) -> Result<Account> {
        let person = Person::new(name, "account")?;
        if reason.trim().is_empty() {
            return Err(Error::invalid(
                "a reason is needed to disable an account",
                "say why, e.g. --reason 'left the lab'",
            ));
        }
        self.write_trail(|tx| {
            let account = account_by_key(tx, person.key())?.ok_or_else(|| no_account(name))?;
            if !account.is_active() {
                return Err(Error::invalid(
                    format!("the account '{}' is already disabled", account.name),
                    "run `whorl account list` to see the accounts",
                ));
            }
            keep_an_administrator(tx, &account, "disabling it")?;
            tx.execute(
                "UPDATE account SET disabled_at = ?1, disabled_reason = ?2 WHERE id = ?3",
                params![now(), reason.trim(), account.id],
            )?;
            append_event(
                tx,
                actor,
                "account-disable",
                &format!("account:{}", account.id),
                &serde_json::json!({ "name": account.name, "reason": reason.trim() }),
            )?;
            let account = account_by_key(tx, person.key())?.ok_or_else(|| no_account(name))?;
            Ok(account)
        })
    }

    /// Changes an account's role with a reason, audited as `account-role` (the role before
    /// and after). Refuses the change that would leave no active administrator.
    pub fn set_role(
        &mut self,
        name: &str,
        role: Role,
        reason: &str,
        actor: &str,
    ) -> Result<Account> {
        let person = Person::new(name, "account")?;
        if reason.trim().is_empty() {
            return Err(Error::invalid(
                "a reason is needed to change an account's role",
                "say why, e.g. --reason 'signs off for the GC group from May'",
            ));
        }
        self.write_trail(|tx| {
            let account = account_by_key(tx, person.key())?.ok_or_else(|| no_account(name))?;
            if !account.is_active() {
                return Err(Error::invalid(
                    format!("the account '{}' is disabled", account.name),
                    "run `whorl account list` to see the accounts",
                ));
            }
            if account.role == role {
                return Err(Error::invalid(
                    format!("the account '{}' already has the role {role}", account.name),
                    "run `whorl account list` to see the roles",
                ));
            }
            keep_an_administrator(tx, &account, &format!("giving it the role {role}"))?;
            tx.execute(
                "UPDATE account SET role = ?1 WHERE id = ?2",
                params![role.as_str(), account.id],
            )?;
            append_event(
                tx,
                actor,
                "account-role",
                &format!("account:{}", account.id),
                &serde_json::json!({
                    "name": account.name, "from": account.role.as_str(),
                    "role": role.as_str(), "reason": reason.trim()
                }),
            )?;
            let account = account_by_key(tx, person.key())?.ok_or_else(|| no_account(name))?;
            Ok(account)
        })
    }

    /// Sets an account's password (Argon2id, see [`PASSWORD_PARAMS`]), audited as
    /// `account-password`; the event holds neither the password nor its hash.
    pub fn set_password(&mut self, name: &str, password: &str, actor: &str) -> Result<()> {
        let person = Person::new(name, "account")?;
        let phc = hash_password(password)?;
        self.write_trail(|tx| {
            let account = account_by_key(tx, person.key())?.ok_or_else(|| no_account(name))?;
            tx.execute(
                "UPDATE account SET password = ?1 WHERE id = ?2",
                params![phc, account.id],
            )?;
            append_event(
                tx,
                actor,
                "account-password",
                &format!("account:{}", account.id),
                &serde_json::json!({ "name": account.name }),
            )?;
            Ok(())
        })
    }

    /// The account a name and password sign in as: `None` when the account does not exist, is
    /// disabled, has no password, or the password does not match. Lock-outs and back-off are
    /// the caller's (the server's) to apply before asking.
    pub fn check_password(&self, name: &str, password: &str) -> Result<Option<Account>> {
        let Ok(person) = Person::new(name, "account") else {
            return Ok(None);
        };
        let stored: Option<(i64, Option<String>)> = self
            .conn
            .query_row(
                "SELECT id, password FROM account WHERE key = ?1 AND disabled_at IS NULL",
                [person.key()],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .optional()?;
        match stored {
            Some((id, Some(phc))) if verify_password(password, &phc) => self.account_by_id(id),
            _ => Ok(None),
        }
    }

    /// Records a lock-out of an account until a time, audited as `account-lockout`.
    pub fn lock_account(&mut self, id: i64, until: &str, failures: u32, by: &str) -> Result<()> {
        self.write_trail(|tx| {
            tx.execute(
                "UPDATE account SET locked_until = ?1 WHERE id = ?2",
                params![until, id],
            )?;
            append_event(
                tx,
                by,
                "account-lockout",
                &format!("account:{id}"),
                &serde_json::json!({ "until": until, "failed_sign_ins": failures }),
            )?;
            Ok(())
        })
    }

    /// Creates a bearer token for an account, valid until `expires_at` (UTC, RFC 3339),
    /// audited as `token-create`. Returns the token's id and its secret, which is shown once:
    /// only its SHA-256 is stored.
    pub fn create_token(
        &mut self,
        name: &str,
        label: &str,
        expires_at: &str,
        actor: &str,
    ) -> Result<(i64, String)> {
        let person = Person::new(name, "account")?;
        if label.trim().is_empty() {
            return Err(Error::invalid(
                "a token needs a label",
                "say what uses it, e.g. --label lims",
            ));
        }
        let secret = format!("{TOKEN_PREFIX}{}", hex::encode(random_bytes(32)?));
        let digest = sha256_hex(secret.as_bytes());
        let id = self.write_trail(|tx| {
            let account = account_by_key(tx, person.key())?.ok_or_else(|| no_account(name))?;
            if !account.is_active() {
                return Err(Error::invalid(
                    format!("the account '{}' is disabled", account.name),
                    "tokens act as an account; choose an active one",
                ));
            }
            tx.execute(
                "INSERT INTO token (account_id, label, sha256, created_at, expires_at)
                 VALUES (?1, ?2, ?3, ?4, ?5)",
                params![account.id, label.trim(), digest, now(), expires_at],
            )?;
            let id = tx.last_insert_rowid();
            append_event(
                tx,
                actor,
                "token-create",
                &format!("token:{id}"),
                &serde_json::json!({
                    "account": account.name, "label": label.trim(), "expires_at": expires_at
                }),
            )?;
            Ok(id)
        })?;
        Ok((id, secret))
    }

    /// All tokens, oldest first (never their secrets).
    pub fn tokens(&self) -> Result<Vec<Token>> {
        let mut stmt = self.conn.prepare(
            "SELECT t.id, a.name, t.label, t.created_at, t.expires_at, t.revoked_at
             FROM token t JOIN account a ON a.id = t.account_id ORDER BY t.id",
        )?;
        let rows = stmt.query_map([], |r| {
            Ok(Token {
                id: r.get(0)?,
                account: r.get(1)?,
                label: r.get(2)?,
                created_at: r.get(3)?,
                expires_at: r.get(4)?,
                revoked_at: r.get(5)?,
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Revokes a token, audited as `token-revoke`.
    pub fn revoke_token(&mut self, id: i64, actor: &str) -> Result<()> {
        self.write_trail(|tx| {
            let revoked: Option<Option<String>> = tx
                .query_row("SELECT revoked_at FROM token WHERE id = ?1", [id], |r| {
                    r.get(0)
                })
                .optional()?;
            match revoked {
                None => return Err(Error::NotFound { kind: "token", id }),
                Some(Some(at)) => {
                    return Err(Error::invalid(
                        format!("token {id} was already revoked at {at}"),
                        "run `whorl token list` to see the tokens",
                    ));
                }
                Some(None) => {}
            }
            tx.execute(
                "UPDATE token SET revoked_at = ?1 WHERE id = ?2",
                params![now(), id],
            )?;
            append_event(
                tx,
                actor,
                "token-revoke",
                &format!("token:{id}"),
                &serde_json::json!({}),
            )?;
            Ok(())
        })
    }

    /// The token id and account a bearer secret acts as: `None` when the secret is unknown,
    /// revoked, expired (compared with `at`, UTC RFC 3339) or its account disabled.
    pub fn account_for_token(&self, secret: &str, at: &str) -> Result<Option<(i64, Account)>> {
        let digest = sha256_hex(secret.as_bytes());
        let found: Option<(i64, i64)> = self
            .conn
            .query_row(
                "SELECT id, account_id FROM token
                 WHERE sha256 = ?1 AND revoked_at IS NULL AND expires_at > ?2",
                params![digest, at],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .optional()?;
        let Some((token, account)) = found else {
            return Ok(None);
        };
        Ok(self
            .account_by_id(account)?
            .filter(Account::is_active)
            .map(|a| (token, a)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// RFC 9106 section 5.3, the Argon2id test vector: password 32 bytes of 0x01, salt 16
    /// bytes of 0x02, secret 8 bytes of 0x03, associated data 12 bytes of 0x04, m = 32 KiB,
    /// t = 3, p = 4, tag length 32. Checks that the crate's Argon2id, version 0x13, the one
    /// [`hasher`] builds, computes the published tag.
    #[test]
    fn argon2id_matches_the_rfc_9106_test_vector() {
        let params = argon2::ParamsBuilder::new()
            .m_cost(32)
            .t_cost(3)
            .p_cost(4)
            .data(argon2::AssociatedData::new(&[4u8; 12]).unwrap())
            .output_len(32)
            .build()
            .unwrap();
        let a = Argon2::new_with_secret(&[3u8; 8], Algorithm::Argon2id, Version::V0x13, params)
            .unwrap();
        let mut tag = [0u8; 32];
        a.hash_password_into(&[1u8; 32], &[2u8; 16], &mut tag)
            .unwrap();
        assert_eq!(
            hex::encode(tag),
            "0d640df58d78766c08c037a34a8b53c9d01ef0452d75b65eb52520e96b01e659"
        );
    }

    #[test]
    fn a_stored_hash_is_argon2id_phc_with_the_documented_parameters() {
        let phc = hash_password("correct horse battery").unwrap();
        // PHC string format (password-hashing competition, "PHC string format", 2017).
        assert!(phc.starts_with("$argon2id$v=19$m=19456,t=2,p=1$"), "{phc}");
        assert!(verify_password("correct horse battery", &phc));
        assert!(!verify_password("correct horse batterz", &phc));
        assert_ne!(phc, hash_password("correct horse battery").unwrap());
    }

    #[test]
    fn short_passwords_are_refused() {
        let e = hash_password("eleven char").unwrap_err();
        assert!(e.to_string().contains("at least 12"), "{e}");
        assert!(hash_password("twelve chars").is_ok());
    }

    #[test]
    fn case_variants_and_look_alikes_cannot_make_a_second_account() {
        let mut lib = Library::in_memory("t").unwrap();
        lib.add_account("Dana", Role::Signer, "admin").unwrap();
        for twin in ["dana", "DANA", "d\u{0430}na", "\u{FF24}ana"] {
            let e = lib.add_account(twin, Role::Reader, "admin").unwrap_err();
            assert!(e.to_string().contains("already exists"), "{twin}: {e}");
        }
        assert_eq!(lib.accounts().unwrap().len(), 1);
        assert_eq!(lib.account("DANA").unwrap().unwrap().name, "Dana");
    }

    #[test]
    fn every_change_is_an_event_and_sign_in_follows_the_state() {
        let mut lib = Library::in_memory("t").unwrap();
        lib.add_account("erin", Role::Curator, "root").unwrap();
        assert!(
            lib.check_password("erin", "whatever long one")
                .unwrap()
                .is_none()
        );
        lib.set_password("erin", "a long enough secret", "root")
            .unwrap();
        assert_eq!(
            lib.check_password("ERIN", "a long enough secret")
                .unwrap()
                .unwrap()
                .name,
            "erin"
        );
        let (id, secret) = lib
            .create_token("erin", "lims", "2999-01-01T00:00:00Z", "root")
            .unwrap();
        let t = "2026-01-01T00:00:00Z";
        assert_eq!(lib.account_for_token(&secret, t).unwrap().unwrap().0, id);
        assert!(
            lib.account_for_token(&secret, "3000-01-01T00:00:00Z")
                .unwrap()
                .is_none()
        );
        lib.revoke_token(id, "root").unwrap();
        assert!(lib.account_for_token(&secret, t).unwrap().is_none());
        lib.disable_account("erin", "left the lab", "root").unwrap();
        assert!(
            lib.check_password("erin", "a long enough secret")
                .unwrap()
                .is_none()
        );
        let actions: Vec<String> = lib
            .events(None)
            .unwrap()
            .into_iter()
            .map(|e| e.action)
            .filter(|a| a.starts_with("account") || a.starts_with("token"))
            .collect();
        assert_eq!(
            actions,
            [
                "account-add",
                "account-password",
                "token-create",
                "token-revoke",
                "account-disable"
            ]
        );
        // No event holds the password or its hash.
        for e in lib.events(None).unwrap() {
            let text = e.payload.to_string();
            assert!(!text.contains("a long enough secret") && !text.contains("argon2"));
        }
    }

    #[test]
    fn the_last_active_administrator_stays() {
        let mut lib = Library::in_memory("t").unwrap();
        lib.add_account("q", Role::Admin, "root").unwrap();
        lib.add_account("r", Role::Reader, "root").unwrap();
        let events = lib.events(None).unwrap().len();
        let e = lib.disable_account("q", "gone", "root").unwrap_err();
        assert!(e.to_string().contains("only active administrator"), "{e}");
        let e = lib.set_role("q", Role::Curator, "why", "root").unwrap_err();
        assert!(e.to_string().contains("only active administrator"), "{e}");
        assert_eq!(lib.events(None).unwrap().len(), events);
        // A disabled administrator does not count as one.
        lib.add_account("s", Role::Admin, "root").unwrap();
        lib.disable_account("s", "gone", "root").unwrap();
        assert!(lib.set_role("q", Role::Reader, "why", "root").is_err());
        lib.set_role("r", Role::Admin, "why", "root").unwrap();
        lib.set_role("q", Role::Reader, "why", "root").unwrap();
        assert!(lib.disable_account("r", "gone", "root").is_err());
    }

    #[test]
    fn roles_grant_what_the_docs_say() {
        use Capability::*;
        assert!(Role::Reader.allows(View) && !Role::Reader.allows(Submit));
        assert!(Role::Submitter.allows(Submit) && !Role::Submitter.allows(SignOff));
        assert!(Role::Signer.allows(SignOff) && !Role::Signer.allows(Submit));
        assert!(Role::Curator.allows(Curate) && !Role::Curator.allows(Administer));
        assert!(Role::Admin.allows(Administer));
    }
}

/// An account or token as its events describe it.
#[derive(Debug, Default, PartialEq)]
struct Replayed {
    name: String,
    role: String,
    has_password: bool,
    disabled: bool,
    locked_until: Option<String>,
}

/// Replays the `account-*` and `token-*` events (action, record, payload) and compares them
/// with the account and token tables; returns (record, problem) for each difference, for
/// `check`.
pub(super) fn replay<'a>(
    conn: &Connection,
    events: impl Iterator<Item = (&'a str, &'a str, &'a str)>,
) -> Result<Vec<(String, String)>> {
    let mut accounts: std::collections::BTreeMap<String, Replayed> = Default::default();
    let mut tokens: std::collections::BTreeMap<String, (String, bool)> = Default::default();
    for (action, record, payload) in events {
        let p: serde_json::Value = serde_json::from_str(payload).unwrap_or_default();
        let text = |k: &str| p[k].as_str().unwrap_or_default().to_string();
        match action {
            "account-add" => {
                accounts.insert(
                    record.to_string(),
                    Replayed {
                        name: text("name"),
                        role: text("role"),
                        ..Default::default()
                    },
                );
            }
            "account-password" => {
                accounts.entry(record.to_string()).or_default().has_password = true
            }
            "account-role" => accounts.entry(record.to_string()).or_default().role = text("role"),
            "account-disable" => accounts.entry(record.to_string()).or_default().disabled = true,
            "account-lockout" => {
                accounts.entry(record.to_string()).or_default().locked_until = Some(text("until"))
            }
            "token-create" => {
                tokens.insert(record.to_string(), (text("account"), false));
            }
            "token-revoke" => tokens.entry(record.to_string()).or_default().1 = true,
            _ => {}
        }
    }
    let mut problems = Vec::new();
    let mut stmt = conn.prepare(&format!("SELECT {ACCOUNT_COLUMNS} FROM account"))?;
    let stored: Vec<Account> = stmt
        .query_map([], account_row)?
        .collect::<rusqlite::Result<_>>()?;
    for a in &stored {
        let record = format!("account:{}", a.id);
        let on_record = Replayed {
            name: a.name.clone(),
            role: a.role.as_str().to_string(),
            has_password: a.has_password,
            disabled: a.disabled_at.is_some(),
            locked_until: a.locked_until.clone(),
        };
        match accounts.remove(&record) {
            None => problems.push((
                record,
                "the account is in the table but no event records it (added outside whorl)".into(),
            )),
            Some(expected) if expected != on_record => problems.push((
                record,
                format!(
                    "the account differs from its events (edited outside whorl): events say {expected:?}, the table {on_record:?}"
                ),
            )),
            Some(_) => {}
        }
    }
    for record in accounts.into_keys() {
        problems.push((
            record,
            "its events record an account the table lacks (deleted)".into(),
        ));
    }
    let mut stmt = conn.prepare(
        "SELECT t.id, a.name, t.revoked_at IS NOT NULL FROM token t JOIN account a ON a.id = t.account_id",
    )?;
    let stored: Vec<(i64, String, bool)> = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))?
        .collect::<rusqlite::Result<_>>()?;
    for (id, account, revoked) in stored {
        let record = format!("token:{id}");
        match tokens.remove(&record) {
            None => problems.push((
                record,
                "the token is in the table but no event records it (added outside whorl)".into(),
            )),
            Some(expected) if expected != (account.clone(), revoked) => problems.push((
                record,
                format!(
                    "the token differs from its events: events say account {} revoked {}, the table account {account} revoked {revoked}",
                    expected.0, expected.1
                ),
            )),
            Some(_) => {}
        }
    }
    for record in tokens.into_keys() {
        problems.push((
            record,
            "its events record a token the table lacks (deleted)".into(),
        ));
    }
    Ok(problems)
}

#[cfg(test)]
mod replay_tests {
    use super::*;

    #[test]
    fn check_finds_an_account_changed_outside_whorl() {
        let mut lib = Library::in_memory("t").unwrap();
        lib.add_account("erin", Role::Reader, "root").unwrap();
        lib.create_token("erin", "lims", "2999-01-01T00:00:00Z", "root")
            .unwrap();
        assert!(lib.check(&|_, _| {}).unwrap().findings.is_empty());
        // A role raised by hand in the database, as someone with the file could.
        lib.conn
            .execute("UPDATE account SET role = 'admin'", [])
            .unwrap();
        lib.conn
            .execute("UPDATE token SET revoked_at = 'x'", [])
            .unwrap();
        let findings = lib.check(&|_, _| {}).unwrap().findings;
        let records: Vec<&str> = findings.iter().map(|f| f.record.as_str()).collect();
        assert_eq!(records, ["account:1", "token:1"], "{findings:?}");
    }
}
