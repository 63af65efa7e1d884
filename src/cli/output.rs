//! Terminal output helpers: aligned tables, colour, short hashes, JSON, progress bars.

use std::io::{IsTerminal, Write};

/// Text from the library or a file made safe for a terminal: control characters (ESC, which
/// starts an ECMA-48 control sequence, a newline that would forge a line) and invisible
/// format characters written as escapes, nothing cut. Every text output goes through it.
pub fn terminal_text(text: &str) -> String {
    whorl::error::excerpt(text, usize::MAX)
}

/// [`terminal_text`] of anything displayable (a name, a path, a stored reason).
pub fn shown(value: impl std::fmt::Display) -> String {
    terminal_text(&value.to_string())
}

/// A table whose columns are padded to their widest cell.
pub struct Table {
    headers: Vec<String>,
    right: Vec<bool>,
    rows: Vec<Vec<String>>,
}

impl Table {
    /// A table with these headers; a header starting with '>' is right-aligned (the '>' is dropped).
    pub fn new(headers: &[&str]) -> Table {
        Table {
            headers: headers
                .iter()
                .map(|h| h.trim_start_matches('>').to_string())
                .collect(),
            right: headers.iter().map(|h| h.starts_with('>')).collect(),
            rows: Vec::new(),
        }
    }

    /// Adds a row. Every cell goes through [`terminal_text`]: a stored name cannot forge a
    /// line or send an escape sequence to the terminal.
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows
            .push(cells.iter().map(|c| terminal_text(c)).collect());
    }

    /// Writes the table.
    pub fn write(&self, out: &mut impl Write) -> std::io::Result<()> {
        self.write_styled(out, Paint::OFF, None)
    }

    /// Writes the table with one row (0-based, headers not counted) in bold.
    pub fn write_styled(
        &self,
        out: &mut impl Write,
        paint: Paint,
        bold_row: Option<usize>,
    ) -> std::io::Result<()> {
        let n = self.headers.len();
        let mut widths: Vec<usize> = self.headers.iter().map(|h| h.chars().count()).collect();
        for r in &self.rows {
            for (i, c) in r.iter().enumerate().take(n) {
                widths[i] = widths[i].max(c.chars().count());
            }
        }
        let line = |cells: &[String]| {
            let mut s = String::new();
            for (i, c) in cells.iter().enumerate().take(n) {
                let pad = widths[i] - c.chars().count();
                if i > 0 {
                    s.push_str("  ");
                }
                if self.right[i] {
                    s.push_str(&" ".repeat(pad));
                    s.push_str(c);
                } else {
                    s.push_str(c);
                    if i + 1 < n {
                        s.push_str(&" ".repeat(pad));
                    }
                }
            }
            s
        };
        writeln!(out, "{}", line(&self.headers))?;
        for (i, r) in self.rows.iter().enumerate() {
            let text = line(r);
            if bold_row == Some(i) {
                writeln!(out, "{}", paint.bold(&text))?;
            } else {
                writeln!(out, "{text}")?;
            }
        }
        Ok(())
    }
}

/// When to colour output: `--color auto|always|never`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum ColorChoice {
    /// Only on a terminal, and not when NO_COLOR is set.
    #[default]
    Auto,
    /// Always, even into a pipe.
    Always,
    /// Never.
    Never,
}

impl ColorChoice {
    /// Whether to colour a stream: `auto` colours a terminal unless `NO_COLOR` is set to a
    /// non-empty value (no-color.org); an explicit `always` or `never` wins over both.
    pub fn decide(self, is_terminal: bool, no_color: Option<&std::ffi::OsStr>) -> bool {
        match self {
            ColorChoice::Always => true,
            ColorChoice::Never => false,
            ColorChoice::Auto => is_terminal && no_color.is_none_or(|v| v.is_empty()),
        }
    }

    /// The paint for stdout.
    pub fn stdout(self) -> Paint {
        Paint(self.decide(
            std::io::stdout().is_terminal(),
            std::env::var_os("NO_COLOR").as_deref(),
        ))
    }

    /// The paint for stderr.
    pub fn stderr(self) -> Paint {
        Paint(self.decide(
            std::io::stderr().is_terminal(),
            std::env::var_os("NO_COLOR").as_deref(),
        ))
    }
}

/// Minimal ANSI styling, a no-op when colour is off. Colour is kept for what needs the eye:
/// errors, warnings, and the first hit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Paint(pub bool);

impl Paint {
    /// No colour.
    pub const OFF: Paint = Paint(false);

    fn wrap(self, code: &str, text: &str) -> String {
        if self.0 {
            format!("\x1b[{code}m{text}\x1b[0m")
        } else {
            text.to_string()
        }
    }

    /// Bold.
    pub fn bold(self, text: &str) -> String {
        self.wrap("1", text)
    }

    /// Bold yellow, for warnings.
    pub fn warn(self, text: &str) -> String {
        self.wrap("1;33", text)
    }

    /// Bold red, for errors.
    pub fn error(self, text: &str) -> String {
        self.wrap("1;31", text)
    }
}

/// The first 16 hex digits of a hash, enough to tell states apart on screen.
pub fn short(hash: &str) -> &str {
    &hash[..hash.len().min(16)]
}

/// Writes a value as pretty JSON with a trailing newline.
pub fn json(out: &mut impl Write, value: &impl serde::Serialize) -> anyhow::Result<()> {
    serde_json::to_writer_pretty(&mut *out, value)?;
    writeln!(out)?;
    Ok(())
}

/// A progress bar on stderr; indicatif hides it when stderr is not a terminal.
pub fn progress(len: u64, what: &str) -> indicatif::ProgressBar {
    let bar = indicatif::ProgressBar::new(len);
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{msg:>10} [{bar:32}] {pos}/{len} {per_sec} eta {eta}",
        )
        .expect("valid template")
        .progress_chars("=> "),
    );
    bar.set_message(what.to_string());
    bar
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn colour_only_on_a_terminal_and_never_under_no_color() {
        use std::ffi::OsStr;
        let auto = ColorChoice::Auto;
        assert!(auto.decide(true, None));
        assert!(!auto.decide(false, None));
        assert!(!auto.decide(true, Some(OsStr::new("1"))));
        // An empty NO_COLOR does not count (no-color.org).
        assert!(auto.decide(true, Some(OsStr::new(""))));
        assert!(ColorChoice::Always.decide(false, Some(OsStr::new("1"))));
        assert!(!ColorChoice::Never.decide(true, None));
    }

    #[test]
    fn a_bold_row_keeps_the_columns_aligned() {
        let mut t = Table::new(&[">rank", "name"]);
        t.row(vec!["1".into(), "toluene".into()]);
        t.row(vec!["10".into(), "acetone".into()]);
        let mut out = Vec::new();
        t.write_styled(&mut out, Paint(true), Some(0)).unwrap();
        assert_eq!(
            String::from_utf8(out).unwrap(),
            "rank  name\n\x1b[1m   1  toluene\x1b[0m\n  10  acetone\n"
        );
    }

    #[test]
    fn columns_align() {
        let mut t = Table::new(&[">rank", "name"]);
        t.row(vec!["1".into(), "toluene".into()]);
        t.row(vec!["10".into(), "acetone".into()]);
        let mut out = Vec::new();
        t.write(&mut out).unwrap();
        assert_eq!(
            String::from_utf8(out).unwrap(),
            "rank  name\n   1  toluene\n  10  acetone\n"
        );
    }
}
