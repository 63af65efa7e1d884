//! The command line: one file per subcommand, each with its clap `Args` and `run`.

mod add;
mod demo;
mod find;
mod identify;
mod import;
mod init;
mod list;
mod output;
mod search;
mod show;
mod stats;

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};

// Exit codes (documented in the README): 0 success; 2 the command line could not be parsed
// (clap's own code); and the following.

/// Exit code: an unexpected failure (I/O, database).
pub const EXIT_FAILURE: u8 = 1;
/// Exit code: an input was rejected (bad file, bad manifest row, bad value).
pub const EXIT_INPUT: u8 = 3;
/// Exit code: the library is missing or cannot be opened by this version.
pub const EXIT_LIBRARY: u8 = 4;

/// whorl: a lab's own library of verified reference spectra, and search against it.
#[derive(Debug, Parser)]
#[command(name = "whorl", version, about, long_about = None)]
pub struct Cli {
    #[command(flatten)]
    pub global: Global,
    #[command(subcommand)]
    pub command: Command,
}

/// Options every command shares.
#[derive(Debug, Args)]
pub struct Global {
    /// The library folder [default: ./whorl-library]
    #[arg(long, global = true, env = "WHORL_LIBRARY", value_name = "DIR")]
    pub library: Option<PathBuf>,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Create a new, empty library.
    Init(init::InitArgs),
    /// Import one spectrum file with its metadata.
    Add(Box<add::AddArgs>),
    /// Import many spectra listed in a manifest CSV.
    Import(import::ImportArgs),
    /// Rank library spectra against an unknown.
    Search(Box<search::SearchArgs>),
    /// Search unknowns of several techniques and fuse the evidence per compound.
    Identify(Box<identify::IdentifyArgs>),
    /// Full-text search over metadata.
    Find(find::FindArgs),
    /// Show one spectrum: metadata, provenance, peaks, hashes.
    Show(show::ShowArgs),
    /// List the library's spectra.
    List(list::ListArgs),
    /// Counts, grids and the library fingerprint.
    Stats(stats::StatsArgs),
    /// Build a demo library from seed-library/ and search its example unknowns.
    Demo(demo::DemoArgs),
}

/// What every command needs besides its own arguments.
pub struct Context {
    /// The library folder.
    pub library: PathBuf,
}

impl Context {
    fn open(&self) -> anyhow::Result<whorl::library::Library> {
        Ok(whorl::library::Library::open(&self.library)?)
    }
}

/// Runs a parsed command line.
pub fn run(cli: Cli) -> anyhow::Result<ExitCode> {
    let ctx = Context {
        library: cli
            .global
            .library
            .clone()
            .unwrap_or_else(|| PathBuf::from("whorl-library")),
    };
    match cli.command {
        Command::Init(a) => init::run(a, &ctx),
        Command::Add(a) => add::run(*a, &ctx),
        Command::Import(a) => import::run(a, &ctx),
        Command::Search(a) => search::run(*a, &ctx),
        Command::Identify(a) => identify::run(*a, &ctx),
        Command::Find(a) => find::run(a, &ctx),
        Command::Show(a) => show::run(a, &ctx),
        Command::List(a) => list::run(a, &ctx),
        Command::Stats(a) => stats::run(a, &ctx),
        Command::Demo(a) => demo::run(a, &ctx),
    }
}

/// The documented exit code for an error.
pub fn exit_code(err: &anyhow::Error) -> u8 {
    match err.downcast_ref::<whorl::Error>() {
        Some(whorl::Error::Library { .. }) => EXIT_LIBRARY,
        Some(e) if e.is_input() => EXIT_INPUT,
        _ => EXIT_FAILURE,
    }
}

/// The identity recorded on events: `--by`, else `WHORL_USER`, else the OS user name.
pub fn identity(by: Option<&str>) -> String {
    by.map(str::to_string)
        .or_else(|| std::env::var("WHORL_USER").ok())
        .or_else(|| std::env::var("USER").ok())
        .or_else(|| std::env::var("USERNAME").ok())
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .unwrap_or_else(|| "unknown".to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_a_search() {
        let cli = Cli::try_parse_from([
            "whorl",
            "--library",
            "lib",
            "search",
            "u.csv",
            "--technique",
            "ir",
            "--top",
            "3",
        ])
        .unwrap();
        assert_eq!(cli.global.library, Some(PathBuf::from("lib")));
        assert!(matches!(cli.command, Command::Search(_)));
    }

    #[test]
    fn technique_is_required_for_search() {
        assert!(Cli::try_parse_from(["whorl", "search", "u.csv"]).is_err());
    }

    #[test]
    fn unknown_technique_is_refused_at_parse_time() {
        let err =
            Cli::try_parse_from(["whorl", "search", "u.csv", "--technique", "uv"]).unwrap_err();
        assert!(err.to_string().contains("unknown technique"), "{err}");
    }

    #[test]
    fn identity_prefers_the_flag() {
        assert_eq!(identity(Some("r.reviewer")), "r.reviewer");
    }
}
