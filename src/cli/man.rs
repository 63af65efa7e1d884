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
    out.write_all(exit_status().as_bytes())?;
    out.write_all(CAUTION.as_bytes())?;
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
"#;

/// The caution every page of whorl carries.
const CAUTION: &str = r#".SH CAUTION
A library match is evidence for an identity, not proof of it: confirm by the laboratory's validated procedure, and have a qualified analyst review it.
"#;

/// The EXIT STATUS section, from [`super::EXIT_CODES`].
fn exit_status() -> String {
    let mut text = String::from(".SH EXIT STATUS\n");
    for (code, meaning) in super::EXIT_CODES {
        // The README's code marks (backquotes) are dropped; hyphens become roff's minus.
        text.push_str(&format!(
            ".TP\n{code}\n{}\n",
            meaning.replace('`', "").replace('-', "\\-")
        ));
    }
    text
}

#[cfg(test)]
mod tests {
    #[test]
    fn the_page_lists_every_exit_code() {
        let text = super::exit_status();
        for (code, _) in super::super::EXIT_CODES {
            assert!(text.contains(&format!(".TP\n{code}\n")), "{code}: {text}");
        }
        assert!(
            text.contains("busy past the timeout (WHORL_BUSY_TIMEOUT_MS)"),
            "{text}"
        );
    }
}
