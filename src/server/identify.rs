//! `POST /api/v1/identify`: the unknowns of one sample (one file per technique) searched and
//! fused per compound, answering with the report `whorl identify --json` prints (both faces
//! call `whorl::search::identify`). `GET /api/v1/find`: the text search of `whorl find`.

use axum::Json;
use axum::extract::multipart::MultipartRejection;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Multipart, Query, State};
use axum::routing::{get, post};
use serde::Deserialize;
use serde_json::Value;
use whorl::library::Capability;
use whorl::search::{Constraints, IdentifyOptions, IdentifyReport, RiWindow, Unknown, identify};
use whorl::technique::Technique;

use super::auth::{Allowed, ToView};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;
use super::upload::Upload;

/// The identify and find routes.
pub fn router() -> Routes {
    let view = Access::Needs(Capability::View);
    Routes::new()
        .add("POST", "/api/v1/identify", view, post(identify_sample))
        .add("GET", "/api/v1/find", view, get(find))
}

/// The form of an identification: one file part per technique measured (at least one), and
/// the options of `whorl identify` of the same names.
#[derive(utoipa::ToSchema)]
#[allow(dead_code)]
pub struct IdentifyForm {
    /// IR spectrum of the unknown.
    #[schema(format = Binary, value_type = Option<String>)]
    ir: Option<Vec<u8>>,
    /// Raman spectrum.
    #[schema(format = Binary, value_type = Option<String>)]
    raman: Option<Vec<u8>>,
    /// EI mass spectrum.
    #[schema(rename = "ms-ei", format = Binary, value_type = Option<String>)]
    ms_ei: Option<Vec<u8>>,
    /// 1H NMR spectrum.
    #[schema(rename = "nmr-1h", format = Binary, value_type = Option<String>)]
    nmr_1h: Option<Vec<u8>>,
    /// 13C NMR peak list.
    #[schema(rename = "nmr-13c", format = Binary, value_type = Option<String>)]
    nmr_13c: Option<Vec<u8>>,
    /// NMR solvent of the unknown (both NMR files).
    solvent: Option<String>,
    /// y unit of the IR file.
    ir_y_unit: Option<String>,
    /// x unit of the IR file when given as wavelength (um or nm).
    ir_x_unit: Option<String>,
    /// Compounds listed.
    top: Option<usize>,
    /// Only compounds with exactly this formula.
    formula: Option<String>,
    /// Only compounds of this nominal mass.
    mass: Option<u64>,
    /// Only compounds with this index of hydrogen deficiency.
    ihd: Option<f64>,
    /// Only compounds made of these elements, e.g. C,H,O.
    elements: Option<String>,
    /// Retention index of the unknown.
    ri: Option<f64>,
    /// Half-width of the retention-index window (default 20).
    ri_window: Option<f64>,
    /// Column phase of the retention index.
    ri_phase: Option<String>,
}

/// The file parts of an identification, one per technique.
pub const FILE_PARTS: [(&str, Technique); 5] = [
    ("ir", Technique::Ir),
    ("raman", Technique::Raman),
    ("ms-ei", Technique::MsEi),
    ("nmr-1h", Technique::Nmr1h),
    ("nmr-13c", Technique::Nmr13c),
];

/// The text fields of an identification.
pub const FIELDS: [&str; 11] = [
    "solvent",
    "ir_y_unit",
    "ir_x_unit",
    "top",
    "formula",
    "mass",
    "ihd",
    "elements",
    "ri",
    "ri_window",
    "ri_phase",
];

/// A number field, the error naming the field.
fn number<T: std::str::FromStr>(form: &Upload, name: &str) -> Result<Option<T>, ApiError> {
    form.field(name)
        .filter(|v| !v.is_empty())
        .map(|v| {
            v.parse::<T>().map_err(|_| {
                ApiError::input(
                    format!(
                        "form field '{name}': '{}' is not a number",
                        whorl::error::excerpt(v, 40)
                    ),
                    "see /api/v1/openapi.json for the field's type",
                )
            })
        })
        .transpose()
}

/// The constraints of the form, validated as `whorl identify`'s and `whorl search`'s options
/// are: `formula`, `elements`, `mass`, `ihd`, `ri`, `ri_window`, `ri_phase` (a field the form
/// was not read with is absent).
pub(super) fn constraints(form: &Upload) -> Result<Constraints, ApiError> {
    let mut c = Constraints::default();
    if let Some(f) = form.field("formula").filter(|v| !v.is_empty()) {
        c = c.with_formula(f)?;
    }
    if let Some(e) = form.field("elements").filter(|v| !v.is_empty()) {
        c = c.with_elements(e)?;
    }
    c.mass = number(form, "mass")?;
    c.ihd = number(form, "ihd")?;
    let phase = form
        .field("ri_phase")
        .filter(|v| !v.is_empty())
        .map(str::to_string);
    match number::<f64>(form, "ri")? {
        Some(value) => {
            c.ri = Some(RiWindow {
                value,
                window: number(form, "ri_window")?.unwrap_or(20.0),
                phase,
            })
        }
        None if phase.is_some() => {
            return Err(ApiError::input(
                "form field 'ri_phase' needs a retention index",
                "give ri with it",
            ));
        }
        None => {}
    }
    c.validate()?;
    Ok(c)
}

/// Identifies one sample from its unknowns (one file part per technique); the answer is the
/// fused report of `whorl identify --json`.
#[utoipa::path(post, path = "/api/v1/identify", tag = "search",
    request_body(content = IdentifyForm, content_type = "multipart/form-data"),
    responses((status = 200, description = "The fused report, as `whorl identify --json` prints it"),
        (status = 400, description = "No unknown, two of one technique, a bad field or an unreadable file"),
        (status = 413, description = "The upload is larger than the server takes")))]
pub async fn identify_sample(
    State(state): State<AppState>,
    Allowed(caller, _): Allowed<ToView>,
    form: Result<Multipart, MultipartRejection>,
) -> Result<Json<Value>, ApiError> {
    let parts: Vec<&str> = FILE_PARTS.iter().map(|p| p.0).collect();
    let form = Upload::read_parts(form?, &parts, &FIELDS, false).await?;
    tracing::info!(account = %caller.account.name, unknowns = form.files.len(), "identify");
    let report = run(&state, form).await?;
    Ok(Json(
        serde_json::to_value(&report).map_err(whorl::Error::from)?,
    ))
}

/// Identifies one sample from a form of unknowns (one file part per technique, at least one)
/// and the options of `whorl identify`: the code both the API and the identify page run.
pub async fn run(state: &AppState, form: Upload) -> Result<IdentifyReport, ApiError> {
    if form.files.is_empty() {
        return Err(ApiError::input(
            "the form has no unknown",
            "attach at least one file part named ir, raman, ms-ei, nmr-1h or nmr-13c",
        ));
    }
    let constraints = constraints(&form)?;
    let top: Option<usize> = number(&form, "top")?;
    let solvent = form.parsed("solvent")?;
    let ir_y_unit = form.parsed("ir_y_unit")?;
    let ir_x_unit = form.parsed("ir_x_unit")?;
    let root = state.options.library.clone();
    state
        .with_library(move |lib| {
            let dir = tempfile::tempdir()
                .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
            let config = whorl::config::Config::load(&root)?;
            let mut unknowns = Vec::new();
            for (part, technique) in FILE_PARTS {
                // Each part in its own folder: two parts may carry the same file name.
                let sub = dir.path().join(part);
                std::fs::create_dir(&sub)
                    .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
                let Some(file) = form.save_part(&sub, part)? else {
                    continue;
                };
                let ir = technique == Technique::Ir;
                unknowns.push(Unknown {
                    technique,
                    file,
                    x_unit: ir.then_some(ir_x_unit).flatten(),
                    y_unit: ir.then_some(ir_y_unit).flatten(),
                    solvent: if technique.is_nmr() {
                        solvent.or_else(|| config.solvent(technique))
                    } else {
                        None
                    },
                });
            }
            let options = IdentifyOptions {
                constraints,
                top: top.unwrap_or(config.search.top).max(1),
                policy: config.identity,
                config: &config,
            };
            Ok(identify(lib, &unknowns, &options)?)
        })
        .await
}

/// A text query.
#[derive(Deserialize, utoipa::IntoParams)]
pub struct FindQuery {
    /// The query in the syntax of `whorl find`: words, "phrases", field:value, AND/OR/NOT.
    q: String,
    /// Most results (default 20, at most 1000).
    top: Option<usize>,
}

/// The spectra whose metadata matches a text query, best first, as `whorl find --json` lists
/// them.
#[utoipa::path(get, path = "/api/v1/find", tag = "search", params(FindQuery),
    responses((status = 200, description = "Matching spectra with their relevance"),
        (status = 400, description = "The query is not valid")))]
pub async fn find(
    State(state): State<AppState>,
    _: Allowed<ToView>,
    q: Result<Query<FindQuery>, QueryRejection>,
) -> Result<Json<Vec<whorl::library::Found>>, ApiError> {
    let Query(q) = q?;
    let top = q.top.unwrap_or(20);
    if top == 0 || top > 1000 {
        return Err(ApiError::input(
            format!("top={top} is out of range"),
            "ask for 1 to 1000 results",
        ));
    }
    // Serialised straight from the rows (not through a `Value`), so relevances print as
    // `whorl find --json` prints them.
    let rows = state
        .with_library(move |lib| Ok(lib.find(&q.q, top)?))
        .await?;
    Ok(Json(rows))
}
