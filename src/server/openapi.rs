//! `GET /api/v1/openapi.json`: the API described from the handlers' own annotations (utoipa).

use axum::Json;
use axum::routing::get;
use utoipa::OpenApi;

use super::routes::{Access, Routes};
use super::{
    accounts, admin, audit, compounds, health, identify, import, search, session, spectra,
};

/// The OpenAPI document, assembled from the `#[utoipa::path]` annotation beside each handler.
#[derive(OpenApi)]
#[openapi(
    info(
        title = "whorl lab server",
        description = "A lab's own library of verified reference spectra: search, browse, sign off, audit. \
            Sign in with POST /api/v1/session (a cookie) or send `Authorization: Bearer TOKEN` \
            (`whorl token create`). Errors are JSON {kind, message, hint}."
    ),
    paths(
        health::health,
        session::sign_in,
        session::who,
        session::sign_out,
        search::search,
        spectra::list,
        spectra::submit,
        accounts::list,
        accounts::set_role,
        spectra::show,
        spectra::withdraw,
        spectra::reinstate,
        spectra::review,
        audit::log,
        audit::stats,
        openapi,
        identify::identify_sample,
        identify::find,
        import::import,
        spectra::revise,
        admin::check,
        compounds::list,
        compounds::show,
        compounds::merge,
    ),
    components(schemas(
        session::SignIn,
        search::SearchForm,
        spectra::SubmitForm,
        spectra::Withdrawal,
        spectra::Reinstatement,
        spectra::SignOff,
        spectra::Revision,
        identify::IdentifyForm,
        import::ImportForm,
        accounts::RoleChange,
        compounds::MergeForm
    ))
)]
pub struct ApiDoc;

/// The document route.
pub fn router() -> Routes {
    Routes::new().add("GET", "/api/v1/openapi.json", Access::Public, get(openapi))
}

/// This API, described as OpenAPI 3.1.
#[utoipa::path(get, path = "/api/v1/openapi.json", tag = "server",
    responses((status = 200, description = "The OpenAPI document")))]
pub async fn openapi() -> Json<utoipa::openapi::OpenApi> {
    Json(ApiDoc::openapi())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every route the router holds is in the document, with its method, and the document
    /// names no route the router lacks.
    #[test]
    fn every_route_of_the_router_is_documented() {
        let doc = serde_json::to_value(ApiDoc::openapi()).unwrap();
        let paths = doc["paths"].as_object().unwrap();
        let routes = super::super::routes();
        // The web pages answer HTML to people, not JSON to programs: not part of the API.
        let pages = super::super::pages::router();
        let is_page = |path: &str| pages.list().iter().any(|p| p.path == path);
        let mut documented = 0;
        for r in routes.list().iter().filter(|r| !is_page(r.path)) {
            let item = paths
                .get(r.path)
                .unwrap_or_else(|| panic!("{} {} is not in openapi.json", r.method, r.path));
            assert!(
                item.get(r.method.to_lowercase()).is_some(),
                "{} {} is not in openapi.json",
                r.method,
                r.path
            );
            documented += 1;
        }
        let in_doc: usize = paths.values().map(|p| p.as_object().unwrap().len()).sum();
        assert_eq!(
            in_doc, documented,
            "openapi.json names a route the router lacks"
        );
        assert!(documented >= 10);
    }
}
