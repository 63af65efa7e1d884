//! The `whorl` command: parse, dispatch, map errors to exit codes.

mod cli;

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let args = cli::Cli::parse();
    match cli::run(args) {
        Ok(code) => code,
        Err(err) => {
            if is_broken_pipe(&err) {
                return ExitCode::SUCCESS;
            }
            eprintln!("error: {err:#}");
            if let Some(hint) = err
                .downcast_ref::<whorl::Error>()
                .and_then(whorl::Error::hint)
            {
                eprintln!("hint: {hint}");
            }
            ExitCode::from(cli::exit_code(&err))
        }
    }
}

fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|e| {
        e.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}
