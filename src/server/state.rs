//! The state every handler shares: the library folder, the sessions, the sign-in back-off.

use std::collections::HashMap;
use std::path::PathBuf;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use whorl::library::Library;

use super::error::ApiError;

/// The server's settings, resolved from the command line.
#[derive(Debug, Clone)]
pub struct Options {
    /// The library folder served.
    pub library: PathBuf,
    /// The address to listen on.
    pub address: std::net::SocketAddr,
    /// A TLS-terminating proxy sits in front (cookies are then marked Secure).
    pub behind_tls_proxy: bool,
    /// The server terminates TLS itself: certificate chain and private key (PEM files).
    pub tls: Option<(PathBuf, PathBuf)>,
    /// The drop folder watched, and the account its drops are imported as.
    pub inbox: Option<super::inbox::Inbox>,
    /// A session ends after this long without a request.
    pub idle_timeout: Duration,
    /// A session ends this long after sign-in, whatever its use.
    pub session_lifetime: Duration,
    /// The largest request body accepted, in bytes.
    pub max_body: usize,
    /// The longest a request may take.
    pub request_timeout: Duration,
}

/// One signed-in browser session, kept in the server's memory (a restart signs everyone out).
#[derive(Debug, Clone)]
pub struct Session {
    /// The account it belongs to.
    pub account_id: i64,
    /// When it was made.
    pub created: Instant,
    /// When it was last used.
    pub last_seen: Instant,
}

/// Failed sign-ins of one account or one address.
#[derive(Debug, Clone, Copy)]
pub struct Failures {
    /// Failures since the last success (or since they were forgotten).
    pub count: u32,
    /// When the last one happened.
    pub last: Instant,
}

/// What the handlers share.
#[derive(Clone)]
pub struct AppState {
    /// Settings.
    pub options: Arc<Options>,
    /// Sessions by the SHA-256 of their cookie value.
    pub sessions: Arc<Mutex<HashMap<String, Session>>>,
    /// Failed sign-ins by `account:KEY` and `address:IP`.
    pub failures: Arc<Mutex<HashMap<String, Failures>>>,
}

impl AppState {
    /// State for a server over `options.library`.
    pub fn new(options: Options) -> AppState {
        AppState {
            options: Arc::new(options),
            sessions: Arc::default(),
            failures: Arc::default(),
        }
    }

    /// Runs `f` on a library opened for this request, on tokio's blocking pool: SQLite and the
    /// scan never run on the async threads. Each request opens its own `Library`, so it sees
    /// the recipes and caches as they are now, also after a CLI command changed them; readers
    /// never wait (WAL) and writers take the lock as the CLI does.
    pub async fn with_library<T, F>(&self, f: F) -> Result<T, ApiError>
    where
        T: Send + 'static,
        F: FnOnce(&mut Library) -> Result<T, ApiError> + Send + 'static,
    {
        let root = self.options.library.clone();
        tokio::task::spawn_blocking(move || {
            let mut lib = Library::open(&root)?;
            let out = f(&mut lib)?;
            // `[audit] witness` in whorl.toml: a write's new head goes to the witness file
            // (nothing is appended when the request wrote nothing).
            if let Some(file) = whorl::config::Config::load(&root)?.audit.witness {
                lib.witness_new_head(&file)?;
            }
            Ok(out)
        })
        .await?
    }

    /// As [`AppState::with_library`], for a write made as a signed-in caller: every event the
    /// write appends says `signed-in`.
    pub async fn write_as<T, F>(&self, f: F) -> Result<T, ApiError>
    where
        T: Send + 'static,
        F: FnOnce(&mut Library) -> Result<T, ApiError> + Send + 'static,
    {
        self.with_library(move |lib| {
            lib.act_signed_in()?;
            f(lib)
        })
        .await
    }

    /// Whether cookies must be marked Secure (the client reaches us over TLS).
    pub fn secure_cookies(&self) -> bool {
        self.options.behind_tls_proxy || self.options.tls.is_some()
    }
}
