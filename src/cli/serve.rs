//! `whorl serve`: the command line of the lab server. The server itself is its own face
//! (`src/server/`); `main.rs` hands `cli::run` the function that starts it, so neither face
//! imports the other.

use std::net::SocketAddr;
use std::path::PathBuf;

use clap::Args;

#[derive(Debug, Args)]
pub struct ServeArgs {
    /// Address to listen on; a port of 0 picks a free one (printed on stdout)
    #[arg(long, default_value = "127.0.0.1:8480")]
    pub address: SocketAddr,
    /// A TLS-terminating reverse proxy sits in front: allows a non-loopback address and marks
    /// cookies Secure
    #[arg(long, conflicts_with = "tls_cert")]
    pub behind_tls_proxy: bool,
    /// Serve HTTPS with this certificate chain (PEM; rustls, TLS 1.2 and 1.3): allows a
    /// non-loopback address and marks cookies Secure
    #[arg(long, value_name = "FILE", requires = "tls_key")]
    pub tls_cert: Option<PathBuf>,
    /// The private key of --tls-cert (PEM: PKCS #8, PKCS #1 or SEC1)
    #[arg(long, value_name = "FILE", requires = "tls_cert")]
    pub tls_key: Option<PathBuf>,
    /// Watch this drop folder: a manifest NAME.csv and its files, then an empty NAME.ready
    /// written last, are imported (all or nothing) as --inbox-account and moved to done/NAME/
    /// or failed/NAME/ with NAME.result.json
    #[arg(long, value_name = "DIR", requires = "inbox_account")]
    pub inbox: Option<PathBuf>,
    /// The account drops are imported as (submitter, curator or admin)
    #[arg(long, value_name = "NAME", requires = "inbox")]
    pub inbox_account: Option<String>,
    /// Minutes without a request after which a session ends
    #[arg(long, default_value_t = 30, value_name = "MINUTES")]
    pub idle_timeout: u64,
    /// Hours after sign-in after which a session ends, however used
    #[arg(long, default_value_t = 12, value_name = "HOURS")]
    pub session_lifetime: u64,
    /// Largest request body accepted, in MiB
    #[arg(long, default_value_t = 32, value_name = "MIB")]
    pub max_body: usize,
    /// Longest a request may take, in seconds
    #[arg(long, default_value_t = 120, value_name = "SECONDS")]
    pub request_timeout: u64,
    /// Print the routes (method, path, who may call) as JSON and exit
    #[arg(long, hide = true)]
    pub print_routes: bool,
}

impl ServeArgs {
    /// Idle timeout, lifetime, body limit and request timeout checked for sense.
    pub fn check(&self) -> anyhow::Result<()> {
        if self.idle_timeout == 0 || self.session_lifetime == 0 || self.max_body == 0 {
            return Err(whorl::Error::invalid(
                "--idle-timeout, --session-lifetime and --max-body must be above 0",
                "give a number of minutes, hours and MiB",
            )
            .into());
        }
        if self.idle_timeout > self.session_lifetime * 60 {
            return Err(whorl::Error::invalid(
                "--idle-timeout is longer than --session-lifetime",
                "a session's idle timeout must fit in its lifetime",
            )
            .into());
        }
        Ok(())
    }

    /// Where to serve from.
    pub fn library(&self, ctx: &super::Context) -> PathBuf {
        ctx.library.clone()
    }
}
