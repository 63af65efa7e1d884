//! The identify page: the unknowns of one sample (one file per technique measured), identified
//! by the code `whorl identify` and `POST /api/v1/identify` run (`super::super::identify::run`,
//! over `whorl::search::identify`), and shown with the verdict against the library's identity
//! policy first, then the fused list, the disagreements between techniques and the warnings.

use std::path::Path as FsPath;

use askama::Template;
use axum::extract::multipart::MultipartRejection;
use axum::extract::{Multipart, State};
use axum::response::Response;
use axum::routing::{get, post};
use whorl::library::Capability;
use whorl::search::IdentifyReport;

use super::super::auth::ToView;
use super::super::error::ApiError;
use super::super::identify::{FIELDS, FILE_PARTS, run};
use super::super::routes::{Access, Routes};
use super::super::state::AppState;
use super::super::upload::Upload;
use super::{Browser, Layout, render};

/// The identify routes.
pub fn router() -> Routes {
    let view = Access::Needs(Capability::View);
    Routes::new().add("GET", "/identify", view, get(form)).add(
        "POST",
        "/identify",
        view,
        post(identify),
    )
}

/// One file input of the form.
struct FileInput {
    part: &'static str,
    label: &'static str,
}

#[derive(Template)]
#[template(path = "identify.html")]
struct FormPage {
    layout: Layout,
    inputs: Vec<FileInput>,
}

fn inputs() -> Vec<FileInput> {
    FILE_PARTS
        .iter()
        .map(|&(part, t)| FileInput {
            part,
            label: t.title(),
        })
        .collect()
}

async fn form(b: Browser<ToView>) -> Response {
    render(&FormPage {
        layout: b.layout("Identify", "/identify"),
        inputs: inputs(),
    })
}

/// One compound of the fused list as the page shows it.
struct FusedRow {
    rank: usize,
    fused: String,
    /// Per technique searched: "0.912 (#1)", or "no reference".
    evidence: Vec<String>,
    name: String,
    formula: String,
}

/// One technique searched.
struct RunRow {
    technique: String,
    file: String,
    sha256: String,
    candidates: usize,
}

#[derive(Template)]
#[template(path = "identify_result.html")]
struct ResultPage {
    layout: Layout,
    met: bool,
    verdict: String,
    runs: Vec<RunRow>,
    rule: String,
    techniques: Vec<String>,
    rows: Vec<FusedRow>,
    disagreements: Vec<String>,
    margin: String,
    warnings: Vec<String>,
    state_hash: String,
    searched_at: String,
}

fn result_page(b: &Browser<ToView>, r: &IdentifyReport) -> ResultPage {
    let f = &r.fusion;
    let mut disagreements = Vec::new();
    for c in &f.compounds {
        for d in &c.disagreements {
            disagreements.push(format!("{} (fused rank {}): {d}", c.name, c.rank));
        }
    }
    let mut warnings: Vec<String> = f.warnings.iter().map(|w| w.message.clone()).collect();
    for run in &r.runs {
        for w in &run.warnings {
            warnings.push(format!("{}: {w}", run.unknown.technique.title()));
        }
    }
    ResultPage {
        layout: b.layout("Identification", "/identify"),
        met: r.policy.met,
        // The summary opens with "met: " or "not met: ", which the page's heading word says.
        verdict: {
            let s = r.policy.summary();
            s.strip_prefix("met: ")
                .or_else(|| s.strip_prefix("not met: "))
                .map(str::to_string)
                .unwrap_or(s)
        },
        runs: r
            .runs
            .iter()
            .map(|run| RunRow {
                technique: run.unknown.technique.title().to_string(),
                file: FsPath::new(&run.unknown.file)
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default(),
                sha256: run.unknown.sha256.clone(),
                candidates: run.candidates,
            })
            .collect(),
        rule: f.rule.clone(),
        techniques: f.techniques.iter().map(|t| t.title().to_string()).collect(),
        rows: f
            .compounds
            .iter()
            .map(|c| FusedRow {
                rank: c.rank,
                fused: format!("{:.3}", c.fused),
                evidence: c
                    .evidence
                    .iter()
                    .map(|e| match (e.score, e.rank) {
                        (Some(s), Some(k)) => format!("{s:.3} (#{k})"),
                        _ => "no reference".to_string(),
                    })
                    .collect(),
                name: c.name.clone(),
                formula: c.formula.clone().unwrap_or_default(),
            })
            .collect(),
        disagreements,
        margin: f.margin.map(|m| format!("{m:.3}")).unwrap_or_default(),
        warnings,
        state_hash: r.library.state_hash.clone(),
        searched_at: super::when(&r.searched_at),
    }
}

async fn identify(
    State(state): State<AppState>,
    b: Browser<ToView>,
    form: Result<Multipart, MultipartRejection>,
) -> Response {
    let parts: Vec<&str> = FILE_PARTS.iter().map(|p| p.0).collect();
    let mut fields = FIELDS.to_vec();
    fields.push("csrf");
    let form = match form {
        Ok(f) => Upload::read_parts(f, &parts, &fields, false).await,
        Err(e) => Err(e.into()),
    };
    let mut form = match form {
        Ok(f) => f,
        Err(e) => return b.fail("Identification refused", e),
    };
    if let Some(r) = b.csrf_refused(form.field("csrf")) {
        return r;
    }
    // A browser sends an empty part for each file input left empty, and every text field.
    form.files
        .retain(|(_, name, bytes)| !(name.is_empty() && bytes.is_empty()));
    form.fields
        .retain(|(k, v)| !v.is_empty() && k.as_str() != "csrf");
    if form.files.is_empty() {
        return b.fail(
            "Identification refused",
            ApiError::input(
                "no spectrum file was chosen",
                "choose at least one file, one per technique measured on the sample",
            ),
        );
    }
    tracing::info!(account = %b.caller.account.name, unknowns = form.files.len(), "identify page");
    match run(&state, form).await {
        Ok(report) => render(&result_page(&b, &report)),
        Err(e) => b.fail("Identification failed", e),
    }
}
