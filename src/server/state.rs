//! The state every handler shares: the library folder, the sessions, the sign-in back-off.

use std::collections::HashMap;
use std::path::PathBuf;
use std::sync::atomic::{AtomicU8, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use axum::extract::{Request, State};
use axum::http::StatusCode;
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use whorl::cache::VectorCache;
use whorl::library::Library;

use super::error::ApiError;

/// Libraries opened for reading kept idle between requests, at most this many (more requests
/// than this at once open the rest afresh and drop them after).
const KEPT_READERS: usize = 32;

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
    /// Libraries opened for reading, kept between requests (each catches up with the database
    /// and the text index before it is used again, [`Library::catch_up`]).
    readers: Arc<Mutex<Vec<Library>>>,
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
            readers: Arc::default(),
        }
    }

    /// Runs `f` on the library, on tokio's blocking pool: SQLite and the scan never run on the
    /// async threads. A reading request takes a `Library` an earlier request left open (or
    /// opens one) and brings it up to date first ([`Library::catch_up`]: the recipes as they
    /// are now, also after a CLI command changed them, the text index's newest commit), so a
    /// request neither opens the database, the text index nor a cache file again; readers never
    /// wait (WAL). The vector caches earlier requests mapped are handed over (and checked
    /// against the database before use), so a search does not map a cache file and verify its
    /// checksums again.
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

    /// Writes open their own `Library` (with the text index brought up to date, as a command
    /// does) and take turns; each marks the request's [`WriteGate`] as writing before it
    /// starts, or gives up if the request has already been answered 408.
    async fn run<T, F>(&self, write: bool, f: F) -> Result<T, ApiError>
    where
        T: Send + 'static,
        F: FnOnce(&mut Library) -> Result<T, ApiError> + Send + 'static,
    {
        let root = self.options.library.clone();
        let shared = self.caches.clone();
        let writes = self.writes.clone();
        let readers = self.readers.clone();
        let gate = if write { WriteGate::current() } else { None };
        tokio::task::spawn_blocking(move || {
            let _one = write.then(|| writes.lock().unwrap_or_else(|e| e.into_inner()));
            if let Some(gate) = &gate
                && !gate.start_writing()
            {
                // The request was answered 408 while this write waited its turn: it must not
                // happen now that the client has been told it did not.
                return Err(ApiError::timed_out());
            }
            let kept = if write {
                None
            } else {
                let idle = readers.lock().unwrap_or_else(|e| e.into_inner()).pop();
                idle.and_then(|mut lib| lib.catch_up().ok().map(|()| lib))
            };
            let mut lib = match kept {
                Some(lib) => lib,
                None if write => Library::open(&root)?,
                None => Library::open_without_text_refresh(&root)?,
            };
            lib.adopt_caches(shared.lock().unwrap_or_else(|e| e.into_inner()).clone());
            let out = f(&mut lib);
            {
                let mut kept = shared.lock().unwrap_or_else(|e| e.into_inner());
                for c in lib.release_caches() {
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
            // `[audit] witness` in whorl.toml: a write's new head goes to the witness file.
            // A reading request wrote nothing, so it does not read the configuration for it.
            if write && let Some(file) = whorl::config::Config::load(&root)?.audit.witness {
                lib.witness_new_head(&file)?;
            }
            if !write {
                // A write's `Library` carries its signed-in mark and is dropped; a reader that
                // ended well is kept for the next request.
                let mut idle = readers.lock().unwrap_or_else(|e| e.into_inner());
                if idle.len() < KEPT_READERS {
                    idle.push(lib);
                }
            }
            Ok(out)
        })
        .await?
    }

    /// As [`AppState::with_library`], for a write the server makes of its own accord (a
    /// lock-out after repeated failed sign-ins): it takes its turn with the other writes and
    /// keeps the request's 408 promise (nothing is written once the request was answered 408).
    pub async fn write_as_server<T, F>(&self, f: F) -> Result<T, ApiError>
    where
        T: Send + 'static,
        F: FnOnce(&mut Library) -> Result<T, ApiError> + Send + 'static,
    {
        self.run(true, f).await
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

tokio::task_local! {
    /// The gate of the request being served, set by [`timeout_unless_writing`].
    static GATE: Arc<WriteGate>;
}

/// Whether a request's write has begun, or the request has been answered 408 first: exactly
/// one of the two happens, so a 408 always means nothing was written, and a write that has
/// begun is always answered with its outcome.
#[derive(Debug, Default)]
pub struct WriteGate(AtomicU8);

const GATE_OPEN: u8 = 0;
const GATE_WRITING: u8 = 1;
const GATE_TIMED_OUT: u8 = 2;

impl WriteGate {
    /// The gate of the request this task serves, if any.
    fn current() -> Option<Arc<WriteGate>> {
        GATE.try_with(Arc::clone).ok()
    }

    /// Marks the request as writing; false when it was answered 408 first.
    fn start_writing(&self) -> bool {
        match self
            .0
            .compare_exchange(GATE_OPEN, GATE_WRITING, Ordering::SeqCst, Ordering::SeqCst)
        {
            Ok(_) => true,
            Err(now) => now == GATE_WRITING,
        }
    }

    /// Marks the request as timed out; false when a write has begun.
    fn time_out(&self) -> bool {
        self.0
            .compare_exchange(
                GATE_OPEN,
                GATE_TIMED_OUT,
                Ordering::SeqCst,
                Ordering::SeqCst,
            )
            .is_ok()
    }
}

/// The request timeout (`--request-timeout`): a request not answered in time is answered 408,
/// unless one of its writes has begun, which then runs to its end and is answered with its
/// outcome (a 408 that hid a stored write would have the client submit it again).
pub async fn timeout_unless_writing(
    State(limit): State<Duration>,
    request: Request,
    next: Next,
) -> Response {
    let gate = Arc::new(WriteGate::default());
    let run = GATE.scope(gate.clone(), next.run(request));
    tokio::pin!(run);
    tokio::select! {
        answer = &mut run => answer,
        () = tokio::time::sleep(limit) => {
            if gate.time_out() {
                StatusCode::REQUEST_TIMEOUT.into_response()
            } else {
                tracing::info!("past the request timeout with a write under way: answered when it ends");
                run.await
            }
        }
    }
}
