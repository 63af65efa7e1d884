//! `whorl completions`: shell completion scripts.

use std::process::ExitCode;

use clap::{Args, CommandFactory};
use clap_complete::Shell;

#[derive(Debug, Args)]
pub struct CompletionsArgs {
    /// bash, zsh, fish, elvish or powershell
    pub shell: Shell,
}

pub fn run(args: CompletionsArgs) -> anyhow::Result<ExitCode> {
    let mut cmd = super::Cli::command();
    clap_complete::generate(args.shell, &mut cmd, "whorl", &mut std::io::stdout().lock());
    Ok(ExitCode::SUCCESS)
}
