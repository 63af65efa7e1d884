//! Terminal output helpers: aligned tables and short hashes.

use std::io::Write;

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

    /// Adds a row.
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }

    /// Writes the table.
    pub fn write(&self, out: &mut impl Write) -> std::io::Result<()> {
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
        for r in &self.rows {
            writeln!(out, "{}", line(r))?;
        }
        Ok(())
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
