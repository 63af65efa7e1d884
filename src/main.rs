//! The `whorl` command: parse, dispatch, map errors to exit codes.

mod cli;
mod server;

use std::process::ExitCode;
use std::time::Duration;

use clap::Parser;

fn main() -> ExitCode {
    // With --json, failures are one JSON object on stderr (cli::JsonError), even when the
    // command line itself cannot be parsed.
    let json = cli::json_requested(std::env::args_os());
    let args = match cli::Cli::try_parse() {
        Ok(args) => args,
        Err(err) if json && err.use_stderr() => {
            let e = cli::JsonError::from_usage(&err);
            eprintln!("{}", e.line());
            return ExitCode::from(e.exit_code);
        }
        Err(err) => err.exit(),
    };
    let paint = cli::stderr_paint(args.global.color);
    match cli::run(args, serve) {
        Ok(code) => code,
        Err(err) => {
            if is_broken_pipe(&err) {
                return ExitCode::SUCCESS;
            }
            if json {
                let e = cli::JsonError::from_error(&err);
                eprintln!("{}", e.line());
                return ExitCode::from(e.exit_code);
            }
            // Messages may quote names and file content: control characters are escaped, so
            // nothing forges a line or reaches the terminal as an escape sequence.
            let message = whorl::error::excerpt(&format!("{err:#}"), usize::MAX);
            let hint = whorl::error::excerpt(&cli::hint(&err), usize::MAX);
            eprintln!("{} {message}", paint.error("error:"));
            eprintln!("{} {hint}", paint.bold("hint:"));
            ExitCode::from(cli::exit_code(&err))
        }
    }
}

/// Starts the lab server for `whorl serve`: the command line's face hands its arguments to
/// the server's face here, so the two never import each other.
fn serve(args: cli::serve::ServeArgs, ctx: &cli::Context) -> anyhow::Result<ExitCode> {
    if args.print_routes {
        let routes = server::route_list();
        println!("{}", serde_json::to_string_pretty(&routes)?);
        return Ok(ExitCode::SUCCESS);
    }
    let options = server::Options {
        library: args.library(ctx),
        address: args.address,
        behind_tls_proxy: args.behind_tls_proxy,
        tls: args.tls_cert.clone().zip(args.tls_key.clone()),
        inbox: args
            .inbox
            .clone()
            .zip(args.inbox_account.clone())
            .map(|(dir, account)| server::Inbox { dir, account }),
        idle_timeout: Duration::from_secs(args.idle_timeout * 60),
        session_lifetime: Duration::from_secs(args.session_lifetime * 3600),
        max_body: args.max_body << 20,
        request_timeout: Duration::from_secs(args.request_timeout),
    };
    server::check_address(&options)?;
    server::run(options)?;
    Ok(ExitCode::SUCCESS)
}

fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|e| {
        // serde_json wraps the io::Error of a failed write without exposing it as a
        // source, so JSON output is asked for its I/O error kind directly.
        let kind = e
            .downcast_ref::<std::io::Error>()
            .map(std::io::Error::kind)
            .or_else(|| e.downcast_ref::<serde_json::Error>()?.io_error_kind());
        kind == Some(std::io::ErrorKind::BrokenPipe)
    })
}
