//! `/api/v1/spectra`: list and show spectra; withdraw and reinstate one (curators); sign one off (signers,
//! with the password given again at signing).

use axum::Json;
use axum::extract::multipart::MultipartRejection;
use axum::extract::rejection::{JsonRejection, PathRejection, QueryRejection};
use axum::extract::{Multipart, Path, Query, State};
use axum::http::StatusCode;
use axum::routing::{get, post};
use serde::Deserialize;
use serde_json::{Value, json};
use whorl::library::{Capability, Decision, Metadata, MetadataPatch, Outcome, Submission, stage};
use whorl::technique::Technique;

use super::auth::{Allowed, ToCurate, ToSignOff, ToSubmit, ToView};
use super::error::ApiError;
use super::routes::{Access, Routes};
use super::state::AppState;
use super::upload::Upload;

/// The spectra routes.
pub fn router() -> Routes {
    let view = Access::Needs(Capability::View);
    Routes::new()
        .add("GET", "/api/v1/spectra", view, get(list))
        .add(
            "POST",
            "/api/v1/spectra",
            Access::Needs(Capability::Submit),
            post(submit),
        )
        .add("GET", "/api/v1/spectra/{id}", view, get(show))
        .add(
            "POST",
            "/api/v1/spectra/{id}/withdraw",
            Access::Needs(Capability::Curate),
            post(withdraw),
        )
        .add(
            "POST",
            "/api/v1/spectra/{id}/reinstate",
            Access::Needs(Capability::Curate),
            post(reinstate),
        )
        .add(
            "POST",
            "/api/v1/spectra/{id}/revise",
            Access::Needs(Capability::Curate),
            post(revise),
        )
        .add(
            "POST",
            "/api/v1/spectra/{id}/review",
            Access::Needs(Capability::SignOff),
            post(review),
        )
}

/// Which spectra to list.
#[derive(Deserialize, utoipa::IntoParams)]
pub struct ListQuery {
    /// Only this technique.
    technique: Option<String>,
}

/// The library's spectra, as `whorl list --json` lists them.
#[utoipa::path(get, path = "/api/v1/spectra", tag = "spectra", params(ListQuery),
    responses((status = 200, description = "One summary per spectrum")))]
pub async fn list(
    State(state): State<AppState>,
    _: Allowed<ToView>,
    q: Result<Query<ListQuery>, QueryRejection>,
) -> Result<Json<Value>, ApiError> {
    let Query(q) = q?;
    let technique = match q.technique.as_deref() {
        Some(t) => Some(t.parse::<Technique>()?),
        None => None,
    };
    let list = state
        .with_library(move |lib| Ok(lib.list(technique)?))
        .await?;
    Ok(Json(
        serde_json::to_value(list).map_err(whorl::Error::from)?,
    ))
}

/// The form of a submission, as `whorl add`'s options of the same names.
#[derive(utoipa::ToSchema)]
#[allow(dead_code)]
pub struct SubmitForm {
    /// The spectrum file (required).
    #[schema(format = Binary, value_type = String)]
    file: Vec<u8>,
    /// ir, raman, ms-ei, nmr-1h or nmr-13c (required).
    technique: String,
    /// Compound name (required).
    name: String,
    /// Molecular formula.
    formula: Option<String>,
    /// CAS RN.
    cas: Option<String>,
    /// A synonym (repeatable).
    synonym: Option<String>,
    /// A tag (repeatable).
    tag: Option<String>,
    /// NMR solvent.
    solvent: Option<String>,
    /// Where the reference came from.
    source: Option<String>,
    /// Instrument.
    instrument: Option<String>,
    /// Acquisition date.
    acquired: Option<String>,
    /// Note.
    note: Option<String>,
    /// y unit, when declared.
    y_unit: Option<String>,
    /// x unit, when not the technique's usual one.
    x_unit: Option<String>,
}

const SUBMIT_FIELDS: [&str; 13] = [
    "technique",
    "name",
    "formula",
    "cas",
    "synonym",
    "tag",
    "solvent",
    "source",
    "instrument",
    "acquired",
    "note",
    "y_unit",
    "x_unit",
];

/// Submits one spectrum file with its metadata, as the signed-in account (it starts
/// `pending`); answers as `whorl add --json` prints.
#[utoipa::path(post, path = "/api/v1/spectra", tag = "spectra",
    request_body(content = SubmitForm, content_type = "multipart/form-data"),
    responses((status = 200, description = "Added, or already present"),
        (status = 400, description = "A bad field or file"),
        (status = 403, description = "The role may not submit")))]
pub async fn submit(
    State(state): State<AppState>,
    Allowed(caller, _): Allowed<ToSubmit>,
    form: Result<Multipart, MultipartRejection>,
) -> Result<Json<Value>, ApiError> {
    let form = Upload::read(form?, &SUBMIT_FIELDS).await?;
    let technique: Technique = form.required(
        "technique",
        "give technique=ir, raman, ms-ei, nmr-1h or nmr-13c",
    )?;
    let name = form
        .field("name")
        .filter(|n| !n.is_empty())
        .ok_or_else(|| ApiError::input("the form has no 'name' field", "give the compound's name"))?
        .to_string();
    let text = |k: &str| form.field(k).filter(|v| !v.is_empty()).map(str::to_string);
    let metadata = Metadata {
        name,
        formula: text("formula"),
        cas: text("cas"),
        synonyms: form.all("synonym"),
        tags: form.all("tag"),
        solvent: text("solvent"),
        source: text("source"),
        instrument: text("instrument"),
        acquired: text("acquired"),
        notes: text("note"),
        extra: Default::default(),
    };
    let x_unit = form.parsed("x_unit")?;
    let y_unit = form.parsed("y_unit")?;
    let actor = caller.account.name.clone();
    let outcome = state
        .write_as(move |lib| {
            let dir = tempfile::tempdir()
                .map_err(|e| whorl::Error::io("making a temporary folder", e))?;
            let path = form.save_in(dir.path())?;
            let submission = Submission {
                path,
                technique,
                metadata,
                x_unit,
                y_unit,
                submitted_by: actor.clone(),
            };
            let staged = stage(lib.recipes(), submission)?;
            let outcome: Outcome = lib
                .store(std::slice::from_ref(&staged), &actor, true)?
                .pop()
                .ok_or_else(|| ApiError::internal("store returned no outcome"))??;
            Ok(outcome)
        })
        .await?;
    Ok(Json(
        serde_json::to_value(outcome).map_err(whorl::Error::from)?,
    ))
}

/// One spectrum: its record, sign-offs, withdrawal reason and events.
#[utoipa::path(get, path = "/api/v1/spectra/{id}", tag = "spectra",
    params(("id" = i64, Path, description = "Spectrum id")),
    responses((status = 200, description = "The spectrum"), (status = 404, description = "No such spectrum")))]
pub async fn show(
    State(state): State<AppState>,
    _: Allowed<ToView>,
    id: Result<Path<i64>, PathRejection>,
) -> Result<Json<Value>, ApiError> {
    let Path(id) = id?;
    let value = state
        .with_library(move |lib| {
            let record = lib.spectrum(id)?;
            Ok(json!({
                "spectrum": record,
                "reviews": lib.reviews(id)?,
                "withdrawn_reason": lib.withdrawn_reason(id)?,
                "events": lib.spectrum_log(id)?,
            }))
        })
        .await?;
    Ok(Json(value))
}

/// Why a spectrum is withdrawn.
#[derive(Deserialize, utoipa::ToSchema)]
pub struct Withdrawal {
    /// The reason, kept with the spectrum and its event.
    pub reason: String,
}

/// Withdraws a spectrum, as the signed-in account.
#[utoipa::path(post, path = "/api/v1/spectra/{id}/withdraw", tag = "spectra",
    params(("id" = i64, Path, description = "Spectrum id")), request_body = Withdrawal,
    responses((status = 200, description = "Withdrawn"), (status = 403, description = "The role may not curate")))]
pub async fn withdraw(
    State(state): State<AppState>,
    Allowed(caller, ..): Allowed<ToCurate>,
    id: Result<Path<i64>, PathRejection>,
    body: Result<Json<Withdrawal>, JsonRejection>,
) -> Result<Json<Value>, ApiError> {
    let (Path(id), Json(body)) = (id?, body?);
    let by = caller.account.name.clone();
    state
        .write_as(move |lib| Ok(lib.withdraw(id, &by, &body.reason)?))
        .await?;
    Ok(Json(
        json!({ "spectrum": id, "status": "withdrawn", "by": caller.account.name }),
    ))
}

/// Why a withdrawn spectrum comes back.
#[derive(Deserialize, utoipa::ToSchema)]
pub struct Reinstatement {
    /// The reason, kept in the audit trail beside the `reinstate` event.
    pub reason: String,
}

/// Brings a withdrawn spectrum back as the signed-in account, as `whorl reinstate` does: it
/// returns pending a new sign-off, its withdrawal reason kept in the audit trail.
#[utoipa::path(post, path = "/api/v1/spectra/{id}/reinstate", tag = "spectra",
    params(("id" = i64, Path, description = "Spectrum id")), request_body = Reinstatement,
    responses((status = 200, description = "Reinstated, pending a new sign-off"),
        (status = 400, description = "No reason, or the spectrum is not withdrawn"),
        (status = 403, description = "The role may not curate"),
        (status = 404, description = "No such spectrum")))]
pub async fn reinstate(
    State(state): State<AppState>,
    Allowed(caller, ..): Allowed<ToCurate>,
    id: Result<Path<i64>, PathRejection>,
    body: Result<Json<Reinstatement>, JsonRejection>,
) -> Result<Json<Value>, ApiError> {
    let (Path(id), Json(body)) = (id?, body?);
    let by = caller.account.name.clone();
    state
        .write_as(move |lib| Ok(lib.reinstate(id, &by, &body.reason)?))
        .await?;
    Ok(Json(
        json!({ "spectrum": id, "status": "pending", "by": caller.account.name }),
    ))
}

/// A sign-off. The signer is the signed-in account; the password is asked again at the
/// moment of signing.
#[derive(Deserialize, utoipa::ToSchema)]
pub struct SignOff {
    /// "verify" (its status becomes verified; "approve" is accepted too) or "reject".
    pub decision: String,
    /// What the signature means (default: the library's wording for the decision).
    pub meaning: Option<String>,
    /// A note kept with the sign-off.
    pub note: Option<String>,
    /// The signer's password, given again for this signature.
    pub password: String,
}

/// Signs off a pending spectrum. The sign-off records the signed-in account's name (the
/// printed name), the date and time, the meaning, and the exact revision signed, and needs the
/// signer's password at signing: the elements of an electronic signature in 21 CFR Part 11
/// (US FDA, "Electronic Records; Electronic Signatures", 1997), §11.50 (signature
/// manifestations: printed name, date and time, meaning) and §11.200(a)(1) (two distinct
/// identification components, the account and its password). The four-eyes rule compares
/// accounts (`whorl::library::Person` keys), never a name from the request body.
#[utoipa::path(post, path = "/api/v1/spectra/{id}/review", tag = "spectra",
    params(("id" = i64, Path, description = "Spectrum id")), request_body = SignOff,
    responses((status = 200, description = "Signed off"),
        (status = 401, description = "The password given at signing was not accepted"),
        (status = 403, description = "The role may not sign off")))]
pub async fn review(
    State(state): State<AppState>,
    Allowed(caller, ..): Allowed<ToSignOff>,
    id: Result<Path<i64>, PathRejection>,
    body: Result<Json<SignOff>, JsonRejection>,
) -> Result<Json<Value>, ApiError> {
    let (Path(id), Json(body)) = (id?, body?);
    let decision = match body.decision.trim() {
        "verify" | "approve" => Decision::Approve,
        "reject" => Decision::Reject,
        other => {
            return Err(ApiError::input(
                format!("decision '{other}' is neither verify nor reject"),
                "send \"decision\": \"verify\" or \"reject\"",
            ));
        }
    };
    let name = caller.account.name.clone();
    let review = state
        .write_as(move |lib| {
            if lib.check_password(&name, &body.password)?.is_none() {
                return Err(ApiError::new(
                    StatusCode::UNAUTHORIZED,
                    "signature",
                    "the password given for this signature was not accepted",
                    "type your own password again to sign",
                ));
            }
            Ok(lib.review(
                id,
                &name,
                decision,
                body.meaning.as_deref(),
                body.note.as_deref(),
            )?)
        })
        .await?;
    Ok(Json(json!(review)))
}

/// A revision of a spectrum's metadata: fields left out stay as they are, an empty string
/// clears one; `synonyms` and `tags` replace the lists; `extra` sets fields (a null value
/// removes one). The reviser is the signed-in account.
#[derive(Deserialize, utoipa::ToSchema)]
#[serde(deny_unknown_fields)]
pub struct Revision {
    /// Why the revision is made (required; kept in the audit trail).
    pub reason: String,
    /// New compound name.
    pub name: Option<String>,
    /// New formula.
    pub formula: Option<String>,
    /// New CAS RN.
    pub cas: Option<String>,
    /// The synonyms, replacing the old ones.
    pub synonyms: Option<Vec<String>>,
    /// The tags, replacing the old ones.
    pub tags: Option<Vec<String>>,
    /// New NMR solvent (the spectrum is prepared again).
    pub solvent: Option<String>,
    /// New source.
    pub source: Option<String>,
    /// New instrument.
    pub instrument: Option<String>,
    /// New acquisition date.
    pub acquired: Option<String>,
    /// New notes.
    pub notes: Option<String>,
    /// Extra fields to set, or to remove with null.
    #[serde(default)]
    pub extra: std::collections::BTreeMap<String, Option<String>>,
}

/// Revises a spectrum's metadata as the signed-in account, as `whorl revise` does: a new
/// revision, pending review again.
#[utoipa::path(post, path = "/api/v1/spectra/{id}/revise", tag = "spectra",
    params(("id" = i64, Path, description = "Spectrum id")), request_body = Revision,
    responses((status = 200, description = "The new revision's number"),
        (status = 400, description = "A bad field, no reason, or a withdrawn spectrum"),
        (status = 403, description = "The role may not curate"),
        (status = 404, description = "No such spectrum")))]
pub async fn revise(
    State(state): State<AppState>,
    Allowed(caller, ..): Allowed<ToCurate>,
    id: Result<Path<i64>, PathRejection>,
    body: Result<Json<Revision>, JsonRejection>,
) -> Result<Json<Value>, ApiError> {
    let (Path(id), Json(body)) = (id?, body?);
    if body.reason.trim().is_empty() {
        return Err(ApiError::input(
            "a revision needs a reason",
            "send \"reason\": why the metadata changes",
        ));
    }
    let patch = MetadataPatch {
        name: body.name,
        formula: body.formula,
        cas: body.cas,
        synonyms: body.synonyms,
        tags: body.tags,
        solvent: body.solvent,
        source: body.source,
        instrument: body.instrument,
        acquired: body.acquired,
        notes: body.notes,
        extra: body.extra.into_iter().collect(),
    };
    let by = caller.account.name.clone();
    let reason = body.reason;
    let number = state
        .write_as(move |lib| Ok(lib.revise(id, &patch, &by, Some(reason.as_str()))?))
        .await?;
    Ok(Json(json!({
        "spectrum": id, "revision": number, "status": "pending", "by": caller.account.name
    })))
}
