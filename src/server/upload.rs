//! Multipart uploads: one file part and text fields, the file written under its own
//! (sanitised) name into a private temporary folder, so that errors and provenance name the
//! file the analyst uploaded.

use std::path::PathBuf;

use axum::extract::Multipart;
use axum::extract::multipart::MultipartError;

use super::error::ApiError;

/// A multipart form as received.
pub struct Upload {
    /// The file part: its sanitised name and bytes.
    pub file: Option<(String, Vec<u8>)>,
    /// The text fields in order (a name may repeat).
    pub fields: Vec<(String, String)>,
}

fn bad_form(e: MultipartError) -> ApiError {
    ApiError::input(
        format!("the multipart form could not be read: {e}"),
        "send multipart/form-data with a 'file' part and the fields the route names",
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

impl Upload {
    /// Reads the whole form; `allowed` names the text fields the route takes.
    pub async fn read(mut form: Multipart, allowed: &[&str]) -> Result<Upload, ApiError> {
        let mut upload = Upload {
            file: None,
            fields: Vec::new(),
        };
        while let Some(field) = form.next_field().await.map_err(bad_form)? {
            let name = field.name().unwrap_or_default().to_string();
            if name == "file" {
                let file_name = safe_name(field.file_name().unwrap_or("upload"));
                let bytes = field.bytes().await.map_err(bad_form)?;
                if upload.file.is_some() {
                    return Err(ApiError::input(
                        "the form has more than one 'file' part",
                        "send one file per request",
                    ));
                }
                upload.file = Some((file_name, bytes.to_vec()));
            } else if allowed.contains(&name.as_str()) {
                let text = field.text().await.map_err(bad_form)?;
                upload.fields.push((name, text.trim().to_string()));
            } else {
                return Err(ApiError::input(
                    format!("unknown form field '{name}'"),
                    format!("this route takes: file, {}", allowed.join(", ")),
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

    /// Writes the file part into `dir` under its sanitised name; returns its path.
    pub fn save_in(&self, dir: &std::path::Path) -> Result<PathBuf, ApiError> {
        let Some((name, bytes)) = &self.file else {
            return Err(ApiError::input(
                "the form has no 'file' part",
                "attach the spectrum file as the 'file' part",
            ));
        };
        let path = dir.join(name);
        std::fs::write(&path, bytes)
            .map_err(|e| whorl::Error::io("writing the uploaded file", e))?;
        Ok(path)
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
