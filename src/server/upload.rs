//! Multipart uploads: one file part and text fields, the file written under its own
//! (sanitised) name into a private temporary folder, so that errors and provenance name the
//! file the analyst uploaded.

use std::path::PathBuf;

use axum::extract::Multipart;
use axum::extract::multipart::MultipartError;

use super::error::ApiError;

/// The most file parts one request may carry (a manifest and its spectra, or the unknowns of
/// an identification); the total size is bounded by `--max-body`.
pub const MAX_FILES: usize = 1000;

/// A multipart form as received.
pub struct Upload {
    /// The file parts in order: (part name, file name, bytes). The file name is sanitised
    /// ([`safe_name`]) unless the form was read with [`Upload::read_tree`], which keeps
    /// checked relative paths.
    pub files: Vec<(String, String, Vec<u8>)>,
    /// The text fields in order (a name may repeat).
    pub fields: Vec<(String, String)>,
}

fn bad_form(e: MultipartError) -> ApiError {
    // A body cut off by the server's limit (`--max-body`, tower-http's length limit) shows
    // only in the error's sources.
    let mut over_limit = false;
    let mut source: Option<&dyn std::error::Error> = Some(&e);
    while let Some(s) = source {
        over_limit |= s.to_string().contains("length limit exceeded");
        source = s.source();
    }
    let status = if over_limit {
        axum::http::StatusCode::PAYLOAD_TOO_LARGE
    } else {
        e.status()
    };
    ApiError::new(
        status,
        if status == axum::http::StatusCode::PAYLOAD_TOO_LARGE {
            "too-large"
        } else {
            "input"
        },
        format!("the multipart form could not be read: {}", e.body_text()),
        if status == axum::http::StatusCode::PAYLOAD_TOO_LARGE {
            "send less per request (the server's --max-body), e.g. a manifest split in parts"
        } else {
            "send multipart/form-data with the file parts and fields the route names"
        },
    )
}

/// A file name reduced to letters, digits, `.`, `_` and `-`, without folders.
pub fn safe_name(raw: &str) -> String {
    let base = raw.rsplit(['/', '\\']).next().unwrap_or_default();
    let safe: String = base
        .chars()
        .map(|c| {
            if c.is_alphanumeric() || "._-".contains(c) {
                c
            } else {
                '_'
            }
        })
        .collect();
    if safe.is_empty() || safe.starts_with('.') {
        format!("upload{safe}")
    } else {
        safe
    }
}

/// A file part's name as a relative path under the upload's folder, as a manifest names it
/// (`spectra/a.csv`). An absolute path, a `..` or `.` component, a backslash, an empty
/// component or a control character refuses the whole upload: nothing is imported.
pub fn relative_name(raw: &str) -> Result<PathBuf, ApiError> {
    let refuse = |why: &str| {
        ApiError::input(
            format!(
                "the uploaded file name '{}' {why}; nothing was imported",
                whorl::error::excerpt(raw, 80)
            ),
            "name each file part by its path relative to the manifest, e.g. spectra/a.csv, without '..'",
        )
    };
    if raw.is_empty() {
        return Err(refuse("is empty"));
    }
    if raw.starts_with('/') || raw.contains('\\') || raw.contains(':') {
        return Err(refuse("is absolute or not a plain relative path"));
    }
    if raw.chars().any(char::is_control) {
        return Err(refuse("holds a control character"));
    }
    let mut path = PathBuf::new();
    for part in raw.split('/') {
        match part {
            "" | "." => return Err(refuse("has an empty or '.' component")),
            ".." => return Err(refuse("climbs out of the upload with '..'")),
            p => path.push(p),
        }
    }
    if path.components().count() > 16 {
        return Err(refuse("is nested more than 16 folders deep"));
    }
    Ok(path)
}

impl Upload {
    /// Reads a form with one `file` part; `allowed` names the text fields the route takes.
    pub async fn read(form: Multipart, allowed: &[&str]) -> Result<Upload, ApiError> {
        let upload = Upload::read_parts(form, &["file"], allowed, false).await?;
        if upload.files.len() > 1 {
            return Err(ApiError::input(
                "the form has more than one 'file' part",
                "send one file per request",
            ));
        }
        Ok(upload)
    }

    /// Reads a form whose file parts carry the names in `file_parts` (each at most once, or
    /// any number of times when `repeat`), at most [`MAX_FILES`] of them, and the text fields
    /// `allowed`. File names are sanitised ([`safe_name`]).
    pub async fn read_parts(
        form: Multipart,
        file_parts: &[&str],
        allowed: &[&str],
        repeat: bool,
    ) -> Result<Upload, ApiError> {
        let upload = Upload::collect(form, file_parts, allowed).await?;
        for part in file_parts {
            if !repeat && upload.files.iter().filter(|f| f.0 == *part).count() > 1 {
                return Err(ApiError::input(
                    format!("the form has more than one '{part}' part"),
                    "send one file per part",
                ));
            }
        }
        Ok(upload)
    }

    /// Reads a form of a manifest and its files: file names are kept as relative paths,
    /// checked by [`relative_name`] (the whole upload refused on the first bad one).
    pub async fn read_tree(
        form: Multipart,
        file_parts: &[&str],
        allowed: &[&str],
    ) -> Result<Upload, ApiError> {
        let mut upload = Upload::collect(form, file_parts, allowed).await?;
        for (_, name, _) in &mut upload.files {
            *name = relative_name(name)?.to_string_lossy().into_owned();
        }
        Ok(upload)
    }

    async fn collect(
        mut form: Multipart,
        file_parts: &[&str],
        allowed: &[&str],
    ) -> Result<Upload, ApiError> {
        let mut upload = Upload {
            files: Vec::new(),
            fields: Vec::new(),
        };
        while let Some(field) = form.next_field().await.map_err(bad_form)? {
            let name = field.name().unwrap_or_default().to_string();
            if file_parts.contains(&name.as_str()) {
                if upload.files.len() == MAX_FILES {
                    return Err(ApiError::new(
                        axum::http::StatusCode::PAYLOAD_TOO_LARGE,
                        "too-many-files",
                        format!("the form has more than {MAX_FILES} files; nothing was imported"),
                        format!("send at most {MAX_FILES} files per request (split the manifest)"),
                    ));
                }
                let file_name = field.file_name().unwrap_or("upload").to_string();
                let bytes = field.bytes().await.map_err(bad_form)?;
                upload.files.push((name, file_name, bytes.to_vec()));
            } else if allowed.contains(&name.as_str()) {
                let text = field.text().await.map_err(bad_form)?;
                upload.fields.push((name, text.trim().to_string()));
            } else {
                return Err(ApiError::input(
                    format!("unknown form part '{}'", whorl::error::excerpt(&name, 60)),
                    format!(
                        "this route takes the file parts {} and the fields {}",
                        file_parts.join(", "),
                        allowed.join(", ")
                    ),
                ));
            }
        }
        Ok(upload)
    }

    /// The last value of a field.
    pub fn field(&self, name: &str) -> Option<&str> {
        self.fields
            .iter()
            .rev()
            .find(|(k, _)| k == name)
            .map(|(_, v)| v.as_str())
    }

    /// Every value of a repeated field.
    pub fn all(&self, name: &str) -> Vec<String> {
        self.fields
            .iter()
            .filter(|(k, _)| k == name)
            .map(|(_, v)| v.clone())
            .collect()
    }

    /// A field parsed as the library parses it, the error naming the field.
    pub fn parsed<T: std::str::FromStr<Err = whorl::Error>>(
        &self,
        name: &str,
    ) -> Result<Option<T>, ApiError> {
        self.field(name)
            .map(|v| {
                v.parse::<T>().map_err(|e| {
                    ApiError::input(
                        format!("form field '{name}': {e}"),
                        e.hint().unwrap_or("see /api/v1/openapi.json"),
                    )
                })
            })
            .transpose()
    }

    /// A field that must be there.
    pub fn required<T: std::str::FromStr<Err = whorl::Error>>(
        &self,
        name: &str,
        hint: &str,
    ) -> Result<T, ApiError> {
        self.parsed(name)?.ok_or_else(|| {
            ApiError::input(format!("the form has no '{name}' field"), hint.to_string())
        })
    }

    /// Writes the `file` part into `dir` under its sanitised name; returns its path.
    pub fn save_in(&self, dir: &std::path::Path) -> Result<PathBuf, ApiError> {
        self.save_part(dir, "file")?.ok_or_else(|| {
            ApiError::input(
                "the form has no 'file' part",
                "attach the spectrum file as the 'file' part",
            )
        })
    }

    /// Writes the part named `part` into `dir` under its sanitised name, if the form has it.
    pub fn save_part(
        &self,
        dir: &std::path::Path,
        part: &str,
    ) -> Result<Option<PathBuf>, ApiError> {
        let Some((_, name, bytes)) = self.files.iter().find(|f| f.0 == part) else {
            return Ok(None);
        };
        let path = dir.join(safe_name(name));
        std::fs::write(&path, bytes)
            .map_err(|e| whorl::Error::io("writing the uploaded file", e))?;
        Ok(Some(path))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uploaded_names_lose_their_folders_and_odd_characters() {
        assert_eq!(safe_name("u03.ir.csv"), "u03.ir.csv");
        assert_eq!(safe_name("../../etc/passwd"), "passwd");
        assert_eq!(safe_name("C:\\data\\run 1.csv"), "run_1.csv");
        assert_eq!(safe_name(".hidden"), "upload.hidden");
        assert_eq!(safe_name(""), "upload");
    }
}
