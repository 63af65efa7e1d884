//! `whorl man`: the manual page, generated from the same definitions as `--help`.
//!
//! Generated at run time rather than by a build script, so that the page can never drift
//! from the binary and the build stays a plain `cargo build`.

use std::io::Write;
use std::process::ExitCode;

use clap::{Args, CommandFactory};

#[derive(Debug, Args)]
pub struct ManArgs {}

pub fn run(_args: ManArgs) -> anyhow::Result<ExitCode> {
    let mut page = Vec::new();
    clap_mangen::Man::new(super::Cli::command()).render(&mut page)?;
    let mut out = std::io::stdout().lock();
    out.write_all(&page)?;
    out.write_all(EXTRA.as_bytes())?;
    Ok(ExitCode::SUCCESS)
}

/// Sections clap does not know about, in roff.
const EXTRA: &str = r#".SH ENVIRONMENT
.TP
\fBWHORL_LIBRARY\fR
The library folder when \fB\-\-library\fR is not given (default ./whorl\-library).
.TP
\fBWHORL_USER\fR
The identity recorded on events when \fB\-\-by\fR is not given (default: the OS user).
.TP
\fBNO_COLOR\fR
When set to a non\-empty value, no colour is used unless \fB\-\-color always\fR is given.
.SH FILES
.TP
\fILIBRARY\fR/library.sqlite
The library: spectra, metadata, recipes and the audit trail.
.TP
\fILIBRARY\fR/whorl.toml
Optional settings: default search options per technique, warning thresholds, identity policy, report options. See \fBwhorl config\fR.
.SH EXIT STATUS
.TP
0
success
.TP
1
unexpected failure (I/O, database)
.TP
2
the command line could not be parsed
.TP
3
an input was rejected (bad file, manifest row, value, query, settings file, unknown id)
.TP
4
the library is missing, already exists (init), or was made by an incompatible version
.SH CAUTION
A library match is evidence for an identity, not proof of it: confirm by the laboratory's validated procedure, and have a qualified analyst review it.
"#;
