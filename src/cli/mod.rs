//! The command line: one file per subcommand, each with its clap `Args` and `run`.

mod account;
mod add;
mod backup;
mod check;
mod completions;
mod compound;
mod config;
mod demo;
mod export;
mod failure;
mod find;
mod formula;
mod fragments;
mod hits;
mod identify;
mod import;
mod init;
mod key;
mod list;
mod log;
mod man;
mod mixture;
mod options;
mod output;
mod plot;
mod policy;
mod recipe;
mod reinstate;
mod replay;
mod review;
mod revise;
mod search;
pub mod serve;
mod show;
mod stats;
mod token;
mod withdraw;
mod witness;

use std::path::PathBuf;
use std::process::ExitCode;

pub use failure::{JsonError, json_requested};

use anyhow::Context as _;
use clap::{Args, Parser, Subcommand};

// Exit codes (documented in the README): 0 success; 2 the command line could not be parsed
// (clap's own code); and the following.

/// Exit code: an unexpected failure (I/O, database).
pub const EXIT_FAILURE: u8 = 1;
/// Exit code: an input was rejected (bad file, bad manifest row, bad value).
pub const EXIT_INPUT: u8 = 3;
/// Exit code: the library is missing or cannot be opened by this version.
pub const EXIT_LIBRARY: u8 = 4;
/// Exit code: `check` found an inconsistency, or `replay` found different hits.
pub const EXIT_MISMATCH: u8 = 5;
/// Exit code: another process kept the library busy past the timeout.
pub const EXIT_BUSY: u8 = 6;

/// Every exit code with its meaning: the one definition the manual page's EXIT STATUS is
/// generated from and the README's table is checked against (`exit_codes_match_the_readme`).
pub const EXIT_CODES: [(u8, &str); 7] = [
    (0, "success"),
    (EXIT_FAILURE, "unexpected failure (I/O, database)"),
    (2, "the command line could not be parsed"),
    (
        EXIT_INPUT,
        "an input was rejected (bad file, bad manifest row, bad value, bad query, bad `whorl.toml`, unknown id)",
    ),
    (
        EXIT_LIBRARY,
        "the library is missing, already exists (`init`), or was made by an incompatible version",
    ),
    (
        EXIT_MISMATCH,
        "`check` found an inconsistency, or `replay` found different hits",
    ),
    (
        EXIT_BUSY,
        "another process kept the library busy past the timeout (`WHORL_BUSY_TIMEOUT_MS`)",
    ),
];

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
    /// When to colour output: auto (a terminal, unless NO_COLOR is set), always, never
    #[arg(long, global = true, value_name = "WHEN", default_value = "auto")]
    pub color: output::ColorChoice,
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Create a new, empty library.
    Init(init::InitArgs),
    /// Import one spectrum file with its metadata.
    Add(Box<add::AddArgs>),
    /// Import many spectra: a manifest CSV listing them (`--manifest`), or a bundle folder
    /// written by `whorl export` (`--bundle`).
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
    /// Counts, grids and the library state hash.
    Stats(stats::StatsArgs),
    /// Sign off a pending spectrum: verify it as a reference, or reject it.
    Review(review::ReviewArgs),
    /// Make a new revision of a spectrum's metadata.
    Revise(Box<revise::ReviseArgs>),
    /// Take a spectrum out of search, keeping it for history.
    Withdraw(withdraw::WithdrawArgs),
    /// Bring a withdrawn spectrum back, pending a new sign-off.
    Reinstate(reinstate::ReinstateArgs),
    /// The compounds spectra belong to: list, show, merge two that are one substance.
    Compound(compound::CompoundArgs),
    /// Print the audit trail, for the library or one spectrum.
    Log(log::LogArgs),
    /// Verify the audit chain, raw data, prepared data and state hash.
    Check(check::CheckArgs),
    /// Copy the library consistently while it is in use (a server or other commands running).
    Backup(backup::BackupArgs),
    /// Write the audit chain's head to a witness file kept outside the library.
    Witness(witness::WitnessArgs),
    /// Write a portable bundle (raw points, manifest with history, checksums).
    Export(export::ExportArgs),
    /// Re-run a saved search and compare the hits.
    Replay(replay::ReplayArgs),
    /// Make a lab key pair, or trust another lab's key for signed bundles.
    Key(key::KeyArgs),
    /// Show or change the library's review policy.
    Policy(policy::PolicyArgs),
    /// Accounts of the lab server: add, list, disable, password.
    Account(account::AccountArgs),
    /// Bearer tokens for programs: create, list, revoke.
    Token(token::TokenArgs),
    /// Serve the library to the lab over HTTP: JSON API, sign-in, tokens.
    Serve(serve::ServeArgs),
    /// Show the preparation recipes, or change one and prepare its spectra again.
    Recipe(recipe::RecipeArgs),
    /// Build a demo library from seed-library/ and search its example unknowns.
    Demo(demo::DemoArgs),
    /// Masses, IHD, nitrogen rule and isotope pattern of a formula (no library needed).
    Formula(formula::FormulaArgs),
    /// Sub-formulas of a formula at given nominal m/z values (no library needed).
    Fragments(fragments::FragmentsArgs),
    /// Plot spectra (library ids and/or files) on one axis as SVG.
    Plot(plot::PlotArgs),
    /// Show the library's settings (whorl.toml), with the built-in default of each setting the
    /// file leaves out and the derived thresholds that apply where it sets none.
    Config(config::ConfigArgs),
    /// Print a shell completion script: bash, zsh, fish, elvish or powershell.
    Completions(completions::CompletionsArgs),
    /// Print the manual page (roff); e.g. `whorl man > whorl.1 && man ./whorl.1`.
    Man(man::ManArgs),
}

/// What every command needs besides its own arguments.
pub struct Context {
    /// The library folder.
    pub library: PathBuf,
    /// Whether the folder was named (`--library` or `WHORL_LIBRARY`) rather than defaulted.
    pub library_given: bool,
    /// Colour on stdout.
    pub paint: output::Paint,
    /// The `--color` choice, for stderr.
    pub color: output::ColorChoice,
}

impl Context {
    fn open(&self) -> anyhow::Result<whorl::library::Library> {
        let lib = whorl::library::Library::open(&self.library)?;
        // A vector cache rebuilt by a search or check shows a progress bar (stderr, hidden
        // when stderr is not a terminal).
        let bar = std::sync::Mutex::new(None::<indicatif::ProgressBar>);
        lib.on_cache_build(move |technique, done, total| {
            let mut bar = bar.lock().unwrap_or_else(|e| e.into_inner());
            let b = bar.get_or_insert_with(|| {
                output::progress(total as u64, &format!("{technique} cache"))
            });
            b.set_position(done as u64);
            if done >= total {
                b.finish_and_clear();
                *bar = None;
            }
        });
        Ok(lib)
    }

    /// Colour on stderr.
    fn paint_stderr(&self) -> output::Paint {
        self.color.stderr()
    }

    /// The library's `whorl.toml`, or the defaults without one.
    fn config(&self) -> anyhow::Result<whorl::config::Config> {
        Ok(whorl::config::Config::load(&self.library)?)
    }
}

/// Runs a parsed command line; `serve` is how `whorl serve` starts the server (another face,
/// which `main.rs` hands in).
pub fn run(
    cli: Cli,
    serve: impl FnOnce(serve::ServeArgs, &Context) -> anyhow::Result<ExitCode>,
) -> anyhow::Result<ExitCode> {
    let ctx = Context {
        library: cli
            .global
            .library
            .clone()
            .unwrap_or_else(|| PathBuf::from("whorl-library")),
        library_given: cli.global.library.is_some(),
        paint: cli.global.color.stdout(),
        color: cli.global.color,
    };
    // Commands that never write to the library: no witness line after them (`check` above
    // all, which must not put the head of a chain it has just found rewritten on record).
    let may_write = !matches!(
        cli.command,
        Command::Check(_)
            | Command::Serve(_)
            | Command::Demo(_)
            | Command::Formula(_)
            | Command::Fragments(_)
            | Command::Config(_)
            | Command::Completions(_)
            | Command::Man(_)
    );
    let result = dispatch(cli.command, &ctx, serve);
    if may_write {
        let witnessed = witness_after_write(&ctx);
        match (&result, witnessed) {
            (Ok(_), Err(e)) => return Err(e),
            (Err(_), Err(e)) => {
                eprintln!("warning: {}", output::terminal_text(&format!("{e:#}")))
            }
            _ => {}
        }
    }
    result
}

/// With `[audit] witness = FILE` in the library's `whorl.toml`, appends the audit chain's
/// head to FILE when the command changed it (item 7 of the trust work: "written by every
/// write when configured"). Nothing when the library or the setting is absent.
fn witness_after_write(ctx: &Context) -> anyhow::Result<()> {
    if !ctx.library.join("library.sqlite").is_file() {
        return Ok(());
    }
    let Some(file) = ctx.config()?.audit.witness else {
        return Ok(());
    };
    let lib = whorl::library::Library::open(&ctx.library)?;
    lib.witness_new_head(&file).with_context(|| {
        format!(
            "the command's changes are committed, but their audit head could not be appended to the witness file {} ([audit] witness in whorl.toml); run `whorl witness write FILE` once it can be written",
            output::terminal_text(&file.display().to_string())
        )
    })?;
    Ok(())
}

fn dispatch(
    command: Command,
    ctx: &Context,
    serve: impl FnOnce(serve::ServeArgs, &Context) -> anyhow::Result<ExitCode>,
) -> anyhow::Result<ExitCode> {
    match command {
        Command::Init(a) => init::run(a, ctx),
        Command::Add(a) => add::run(*a, ctx),
        Command::Import(a) => import::run(a, ctx),
        Command::Search(a) => search::run(*a, ctx),
        Command::Identify(a) => identify::run(*a, ctx),
        Command::Find(a) => find::run(a, ctx),
        Command::Show(a) => show::run(a, ctx),
        Command::List(a) => list::run(a, ctx),
        Command::Stats(a) => stats::run(a, ctx),
        Command::Review(a) => review::run(a, ctx),
        Command::Revise(a) => revise::run(*a, ctx),
        Command::Withdraw(a) => withdraw::run(a, ctx),
        Command::Reinstate(a) => reinstate::run(a, ctx),
        Command::Compound(a) => compound::run(a, ctx),
        Command::Log(a) => log::run(a, ctx),
        Command::Check(a) => check::run(a, ctx),
        Command::Export(a) => export::run(a, ctx),
        Command::Backup(a) => backup::run(a, ctx),
        Command::Witness(a) => witness::run(a, ctx),
        Command::Replay(a) => replay::run(a, ctx),
        Command::Key(a) => key::run(a, ctx),
        Command::Policy(a) => policy::run(a, ctx),
        Command::Account(a) => account::run(a, ctx),
        Command::Token(a) => token::run(a, ctx),
        Command::Serve(a) => {
            a.check()?;
            serve(a, ctx)
        }
        Command::Recipe(a) => recipe::run(a, ctx),
        Command::Demo(a) => demo::run(a, ctx),
        Command::Formula(a) => formula::run(a, ctx),
        Command::Fragments(a) => fragments::run(a, ctx),
        Command::Plot(a) => plot::run(a, ctx),
        Command::Config(a) => config::run(a, ctx),
        Command::Completions(a) => completions::run(a),
        Command::Man(a) => man::run(a),
    }
}

/// Colour on stderr, for `main` to print errors with.
pub fn stderr_paint(cli_color: output::ColorChoice) -> output::Paint {
    cli_color.stderr()
}

/// What the user can do about an error: the library's own hint, else one for the kind of
/// failure, so that every error ends with a hint.
pub fn hint(err: &anyhow::Error) -> String {
    if let Some(h) = err
        .downcast_ref::<whorl::Error>()
        .and_then(whorl::Error::hint)
    {
        return h.to_string();
    }
    for cause in err.chain() {
        if let Some(io) = cause.downcast_ref::<std::io::Error>() {
            return match io.kind() {
                std::io::ErrorKind::NotFound => {
                    "check the path: the file or its folder does not exist".into()
                }
                std::io::ErrorKind::PermissionDenied => {
                    "check the file's permissions, or choose a folder you may write to".into()
                }
                _ => "check the path, the free disk space and the permissions, then run the command again".into(),
            };
        }
        if cause.downcast_ref::<csv::Error>().is_some() {
            return "check the CSV file: a header line, then one record per line with the same number of fields".into();
        }
    }
    "run the command again with --help to check its arguments; if it persists, report it with the command line".into()
}

/// The documented exit code for an error.
pub fn exit_code(err: &anyhow::Error) -> u8 {
    match err.downcast_ref::<whorl::Error>() {
        Some(whorl::Error::Library { .. }) => EXIT_LIBRARY,
        Some(e) if e.is_busy() => EXIT_BUSY,
        Some(e) if e.is_input() => EXIT_INPUT,
        _ => EXIT_FAILURE,
    }
}

/// The identity recorded on events: `--by`, else `WHORL_USER`, else the operating-system
/// account (looked up from the process's user id, not from `$USER`). The name is checked and
/// stored in NFKC form (`whorl::library::Person`): empty, blank, control and invisible
/// characters are refused.
pub fn identity(by: Option<&str>) -> anyhow::Result<String> {
    let (raw, what) = match by {
        Some(b) => (b.to_string(), "--by"),
        None => match std::env::var("WHORL_USER") {
            Ok(u) if !u.is_empty() => (u, "WHORL_USER"),
            _ => (os_account()?, "operating-system account"),
        },
    };
    Ok(whorl::library::Person::new(&raw, what)?.name().to_string())
}

/// The name of the account the process runs as: `getuid` and its passwd entry
/// (`getpwuid_r`, POSIX.1-2008).
#[cfg(unix)]
fn os_account() -> anyhow::Result<String> {
    // SAFETY: getuid has no preconditions.
    let uid = unsafe { libc::getuid() };
    let mut buf = vec![0u8; 4096];
    loop {
        // SAFETY: `pwd` and `result` are valid for writes, `buf` is valid for `buf.len()`
        // bytes, and the strings `pwd` points to are read only while `buf` lives.
        let mut pwd: libc::passwd = unsafe { std::mem::zeroed() };
        let mut result: *mut libc::passwd = std::ptr::null_mut();
        let rc = unsafe {
            libc::getpwuid_r(
                uid,
                &mut pwd,
                buf.as_mut_ptr().cast(),
                buf.len(),
                &mut result,
            )
        };
        if rc == libc::ERANGE && buf.len() < 1 << 20 {
            buf.resize(buf.len() * 2, 0);
            continue;
        }
        if rc != 0 || result.is_null() || pwd.pw_name.is_null() {
            return Err(whorl::Error::invalid(
                format!(
                    "the operating-system account (user id {uid}) has no name in the user database"
                ),
                "say who you are with --by NAME or WHORL_USER=NAME",
            )
            .into());
        }
        // SAFETY: getpwuid_r succeeded, so pw_name points to a NUL-terminated string in `buf`.
        let name = unsafe { std::ffi::CStr::from_ptr(pwd.pw_name) };
        return Ok(name.to_string_lossy().into_owned());
    }
}

/// Elsewhere the account name the system sets for the session.
#[cfg(not(unix))]
fn os_account() -> anyhow::Result<String> {
    std::env::var("USERNAME").map_err(|_| {
        whorl::Error::invalid(
            "the operating-system account is unknown",
            "say who you are with --by NAME or WHORL_USER=NAME",
        )
        .into()
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exit_codes_match_the_readme() {
        let readme = include_str!("../../README.md");
        let table = readme
            .split("### Exit codes")
            .nth(1)
            .expect("an exit-codes section");
        let rows: Vec<(u8, String)> = table
            .lines()
            .skip_while(|l| !l.starts_with("|---"))
            .skip(1)
            .take_while(|l| l.starts_with('|'))
            .map(|l| {
                let cells: Vec<&str> = l.trim_matches('|').split('|').map(str::trim).collect();
                (cells[0].parse().expect("a code"), cells[1].to_string())
            })
            .collect();
        let want: Vec<(u8, String)> = EXIT_CODES
            .iter()
            .map(|&(c, m)| (c, m.to_string()))
            .collect();
        assert_eq!(rows, want);
        // The codes are distinct and in order, 0 to 6.
        let codes: Vec<u8> = EXIT_CODES.iter().map(|&(c, _)| c).collect();
        assert_eq!(codes, (0..=6).collect::<Vec<u8>>());
    }

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
        // The message clap shows names the valid techniques, and what "nmr" may mean.
        assert!(err.to_string().contains("nmr-13c"), "{err}");
        let err =
            Cli::try_parse_from(["whorl", "search", "u.csv", "--technique", "nmr"]).unwrap_err();
        assert!(
            err.to_string().contains("NMR is nmr-1h or nmr-13c"),
            "{err}"
        );
    }

    #[test]
    fn fragments_needs_an_mz_list() {
        assert!(Cli::try_parse_from(["whorl", "fragments", "C3H6O"]).is_err());
        let cli = Cli::try_parse_from(["whorl", "fragments", "C3H6O", "--mz", "15,29"]).unwrap();
        assert!(matches!(cli.command, Command::Fragments(_)));
    }

    #[test]
    fn identity_prefers_the_flag_and_stores_nfkc() {
        assert_eq!(identity(Some("r.reviewer")).unwrap(), "r.reviewer");
        // Full-width letters (UAX #15: NFKC maps them to ASCII).
        assert_eq!(identity(Some("\u{FF52}.x")).unwrap(), "r.x");
        for bad in ["", "   ", "r\u{200B}x", "r\nx"] {
            assert!(identity(Some(bad)).is_err(), "{bad:?}");
        }
    }

    #[test]
    fn the_os_account_comes_from_the_user_database() {
        // The passwd entry of the process's uid, compared with `id -un` (POSIX `id`).
        let out = std::process::Command::new("id")
            .arg("-un")
            .output()
            .unwrap();
        let expected = String::from_utf8(out.stdout).unwrap().trim().to_string();
        assert_eq!(os_account().unwrap(), expected);
    }
}
