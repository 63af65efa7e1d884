//! The state every handler shares: the library folder, the sessions, the sign-in back-off.

use std::collections::HashMap;
use std::path::PathBuf;
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use whorl::cache::VectorCache;
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
    /// The vector caches the requests have mapped, the newest of each technique and kind,
    /// handed to the next request's `Library` (each is checked against the database before
    /// use, as always).
    pub caches: Arc<Mutex<Vec<Arc<VectorCache>>>>,
    /// Held by each write for its whole length: the server's writers take SQLite's write lock
    /// one after another anyway, and so never contend for the text index's writer lock (a
    /// writer kept from it would leave the index behind for everyone).
    pub writes: Arc<Mutex<()>>,
}

impl AppState {
    /// State for a server over `options.library`.
    pub fn new(options: Options) -> AppState {
        AppState {
            options: Arc::new(options),
            sessions: Arc::default(),
            failures: Arc::default(),
            caches: Arc::default(),
            writes: Arc::default(),
        }
    }

    /// Runs `f` on a library opened for this request, on tokio's blocking pool: SQLite and the
    /// scan never run on the async threads. Each request opens its own `Library`, so it sees
    /// the recipes as they are now, also after a CLI command changed them; readers never wait
    /// (WAL) and writers take the lock as the CLI does. The vector caches earlier requests
    /// mapped are handed over (and checked against the database before use), so a search
    /// does not map a cache file and verify its checksums again.
    ///
    /// A reading request does not rebuild a text index that is behind (see
    /// [`Library::open_without_text_refresh`]); writes do, one at a time.
    pub async fn with_library<T, F>(&self, f: F) -> Result<T, ApiError>
    where
        T: Send + 'static,
        F: FnOnce(&mut Library) -> Result<T, ApiError> + Send + 'static,
    {
        self.run(false, f).await
    }

    async fn run<T, F>(&self, write: bool, f: F) -> Result<T, ApiError>
    where
        T: Send + 'static,
        F: FnOnce(&mut Library) -> Result<T, ApiError> + Send + 'static,
    {
        let root = self.options.library.clone();
        let shared = self.caches.clone();
        let writes = self.writes.clone();
        tokio::task::spawn_blocking(move || {
            let _one = write.then(|| writes.lock().unwrap_or_else(|e| e.into_inner()));
            let mut lib = if write {
                Library::open(&root)?
            } else {
                Library::open_without_text_refresh(&root)?
            };
            lib.adopt_caches(shared.lock().unwrap_or_else(|e| e.into_inner()).clone());
            let out = f(&mut lib);
            {
                let mut kept = shared.lock().unwrap_or_else(|e| e.into_inner());
                for c in lib.mapped_caches() {
                    match kept
                        .iter_mut()
                        .find(|k| (k.technique, k.kind) == (c.technique, c.kind))
                    {
                        // Another request may have kept a newer one meanwhile.
                        Some(k) if k.built_from.generation <= c.built_from.generation => *k = c,
                        Some(_) => {}
                        None => kept.push(c),
                    }
                }
            }
            let out = out?;
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
        self.run(true, move |lib| {
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
