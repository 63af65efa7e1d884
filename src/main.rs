//! The `whorl` command: parse, dispatch, map errors to exit codes.

mod cli;

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let args = cli::Cli::parse();
    let paint = cli::stderr_paint(args.global.color);
    match cli::run(args) {
        Ok(code) => code,
        Err(err) => {
            if is_broken_pipe(&err) {
                return ExitCode::SUCCESS;
            }
            eprintln!("{} {err:#}", paint.error("error:"));
            eprintln!("{} {}", paint.bold("hint:"), cli::hint(&err));
            ExitCode::from(cli::exit_code(&err))
        }
    }
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
