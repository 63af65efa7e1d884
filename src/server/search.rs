//! `POST /api/v1/search`: an unknown uploaded as multipart form data, searched as
//! `whorl search --json` searches a file, answering with the same report JSON
//! (`whorl::search::search_file` builds it for both faces).

use axum::Json;
use axum::extract::multipart::MultipartRejection;
use axum::extract::{Multipart, State};
use axum::routing::post;
use whorl::library::{Capability, Status};
use whorl::search::{Given, Request, Unknown, search_file};
use whorl::technique::Technique;

use super::auth::{Allowed, ToView};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;
use super::upload::Upload;

/// The search route.
pub fn router() -> Routes {
    Routes::new().add(
        "POST",
        "/api/v1/search",
        Access::Needs(Capability::View),
        post(search),
    )
}

/// The form fields of a search, as the CLI's options of the same names.
#[derive(utoipa::ToSchema)]
#[allow(dead_code)]
pub struct SearchForm {
    /// The unknown's spectrum file (required).
    #[schema(format = Binary, value_type = String)]
    file: Vec<u8>,
    /// ir, raman, ms-ei, nmr-1h or nmr-13c (required).
    technique: String,
    /// Number of hits.
    top: Option<usize>,
    /// Metadata query restricting the candidates (`--where`).
    #[schema(rename = "where")]
    filter: Option<String>,
    /// NMR solvent of the unknown.
    solvent: Option<String>,
    /// y unit of the unknown.
    y_unit: Option<String>,
    /// x unit (um or nm) for IR given as wavelength.
    x_unit: Option<String>,
    /// "true" to search pending spectra too.
    include_pending: Option<bool>,
    /// Only compounds with exactly this formula.
    formula: Option<String>,
    /// Only compounds of this nominal mass.
    mass: Option<u64>,
    /// Only compounds with this index of hydrogen deficiency.
    ihd: Option<f64>,
    /// Only compounds made of these elements, e.g. C,H,O.
    elements: Option<String>,
    /// Retention index of the unknown (EI-MS only); hits need an `ri` within `ri_window`,
    /// and the verdict takes the threshold derived for searches given one.
    ri: Option<f64>,
    /// Half-width of the retention-index window (default 20).
    ri_window: Option<f64>,
    /// Column phase of the retention index; hits' `ri_phase` must match.
    ri_phase: Option<String>,
}

const FIELDS: [&str; 14] = [
    "technique",
    "top",
    "where",
    "solvent",
    "y_unit",
    "x_unit",
    "include_pending",
    "formula",
    "mass",
    "ihd",
    "elements",
    "ri",
    "ri_window",
    "ri_phase",
];

/// Searches an uploaded unknown; the answer is the report of `whorl search --json`.
#[utoipa::path(post, path = "/api/v1/search", tag = "search",
    request_body(content = SearchForm, content_type = "multipart/form-data"),
    responses((status = 200, description = "The search report, as `whorl search --json` prints it"),
        (status = 400, description = "A bad field or an unreadable file")))]
pub async fn search(
    State(state): State<AppState>,
    Allowed(caller, _): Allowed<ToView>,
    form: Result<Multipart, MultipartRejection>,
) -> Result<Json<serde_json::Value>, ApiError> {
    let form = Upload::read(form?, &FIELDS).await?;
    let technique: Technique = form.required(
        "technique",
        "give technique=ir, raman, ms-ei, nmr-1h or nmr-13c",
    )?;
    let top = match form.field("top") {
        Some(v) => Some(v.parse::<usize>().map_err(|_| {
            ApiError::input(
                format!("form field 'top': '{v}' is not a whole number"),
                "give the number of hits, e.g. 10",
            )
        })?),
        None => None,
    };
    let solvent = form.parsed("solvent")?;
    let y_unit = form.parsed("y_unit")?;
    let x_unit = form.parsed("x_unit")?;
    let filter = form.field("where").map(str::to_string);
    let constraints = super::identify::constraints(&form)?;
    let include_pending = matches!(
        form.field("include_pending"),
        Some("true" | "1" | "yes" | "on")
    );
    tracing::info!(account = %caller.account.name, %technique, "search");
    let root = state.options.library.clone();
    let report = state
        .with_library(move |lib| {
            let dir = tempfile::tempdir()
                .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
            let path = form.save_in(dir.path())?;
            let config = whorl::config::Config::load(&root)?;
            let given = Given {
                params: None,
                peak_tolerance: None,
                top,
                solvent,
            };
            let mut request = Request::resolve(technique, &given, &config);
            request.top = request.top.max(1);
            request.filter = filter;
            request.constraints = constraints;
            if include_pending {
                request.statuses.push(Status::Pending);
            }
            let unknown = Unknown {
                technique,
                file: path,
                x_unit,
                y_unit,
                solvent: request.solvent,
            };
            let (report, _) = search_file(lib, &unknown, &request)?;
            Ok(serde_json::to_value(&report).map_err(whorl::Error::from)?)
        })
        .await?;
    Ok(Json(report))
}
