//! How a failed command reports itself: a message and a hint on stderr, or, when the command
//! line asks for `--json`, one JSON object on stderr that a program can read (`kind`,
//! `message`, `hint`, `file` and `line` where known, `exit_code`). The exit code is the same
//! either way.

use std::ffi::OsString;

use serde::Serialize;

use super::{EXIT_FAILURE, exit_code, hint};

/// True when the command line asks for JSON: `--json` among the arguments before a `--`.
/// Read from the raw arguments so that a command line clap cannot parse is reported as JSON
/// too.
pub fn json_requested(args: impl IntoIterator<Item = OsString>) -> bool {
    args.into_iter()
        .skip(1)
        .take_while(|a| a != "--")
        .any(|a| a == "--json")
}

/// One error as a program reads it.
#[derive(Debug, Serialize, PartialEq)]
pub struct JsonError {
    /// A short, stable name of the kind of error (`usage`, `input`, `invalid`, `query`,
    /// `not-found`, `library`, `busy`, `disk-full`, `database`, `text-index`, `io`,
    /// `stored-record`, `failure`).
    pub kind: &'static str,
    /// What went wrong, in one line.
    pub message: String,
    /// What the user can do about it.
    pub hint: String,
    /// The file the error is about, when it is about one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub file: Option<String>,
    /// The one-based line in that file, when it is about one line.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub line: Option<usize>,
    /// The process's exit code.
    pub exit_code: u8,
}

/// The wrapper printed: `{"error": {...}}`.
#[derive(Debug, Serialize)]
struct Printed<'a> {
    error: &'a JsonError,
}

impl JsonError {
    /// A command's failure.
    pub fn from_error(err: &anyhow::Error) -> JsonError {
        let lib = err.downcast_ref::<whorl::Error>();
        let at = lib.and_then(whorl::Error::location);
        JsonError {
            kind: lib.map_or("failure", whorl::Error::kind),
            message: format!("{err:#}"),
            hint: hint(err),
            file: at.map(|a| a.file.display().to_string()),
            line: at.and_then(|a| a.line),
            exit_code: exit_code(err),
        }
    }

    /// A command line clap could not parse (exit code 2, as clap's own).
    pub fn from_usage(err: &clap::Error) -> JsonError {
        let rendered = err.render().to_string();
        // clap's text up to its usage line, on one line.
        let message = rendered
            .lines()
            .take_while(|l| !l.starts_with("Usage:"))
            .map(str::trim)
            .filter(|l| !l.is_empty())
            .collect::<Vec<_>>()
            .join(" ");
        let message = message.trim_start_matches("error:").trim();
        let message = if message.is_empty() {
            "the command line could not be parsed".to_string()
        } else {
            message.to_string()
        };
        JsonError {
            kind: "usage",
            message,
            hint: "run the command with --help to see its arguments".into(),
            file: None,
            line: None,
            exit_code: u8::try_from(err.exit_code()).unwrap_or(EXIT_FAILURE),
        }
    }

    /// The one line printed on stderr.
    pub fn line(&self) -> String {
        serde_json::to_string(&Printed { error: self }).unwrap_or_else(|_| {
            format!(
                "{{\"error\":{{\"kind\":\"failure\",\"message\":\"unprintable error\",\"exit_code\":{}}}}}",
                self.exit_code
            )
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn args(a: &[&str]) -> Vec<OsString> {
        a.iter().map(OsString::from).collect()
    }

    #[test]
    fn json_is_asked_for_before_a_double_dash_only() {
        assert!(json_requested(args(&["whorl", "revise", "3", "--json"])));
        assert!(!json_requested(args(&["whorl", "revise", "3"])));
        // After `--` it is a value, not an option.
        assert!(!json_requested(args(&["whorl", "find", "--", "--json"])));
        // The program's own name is not an argument.
        assert!(!json_requested(args(&["--json"])));
    }

    #[test]
    fn an_input_error_carries_its_file_line_kind_and_exit_code() {
        let err: anyhow::Error = whorl::Error::input(
            whorl::error::Location::line("m.csv", 7),
            "no file column",
            "add a file column",
        )
        .into();
        let j = JsonError::from_error(&err);
        assert_eq!(j.kind, "input");
        assert_eq!(j.file.as_deref(), Some("m.csv"));
        assert_eq!(j.line, Some(7));
        assert_eq!(j.hint, "add a file column");
        assert_eq!(j.exit_code, super::super::EXIT_INPUT);
        let v: serde_json::Value = serde_json::from_str(&j.line()).unwrap();
        assert_eq!(v["error"]["line"], 7);
        assert_eq!(v["error"]["message"], "m.csv:7: no file column");
    }

    #[test]
    fn an_error_from_outside_the_library_is_a_failure_with_a_hint() {
        let err = anyhow::anyhow!("something odd");
        let j = JsonError::from_error(&err);
        assert_eq!(j.kind, "failure");
        assert_eq!(j.exit_code, EXIT_FAILURE);
        assert!(!j.hint.is_empty());
        assert!(j.file.is_none() && j.line.is_none());
    }
}
