//! The routes of the server, recorded as they are added: the router and the list of
//! (method, path, access) come from the same calls, so the OpenAPI test and the role-matrix
//! test walk what the router really holds.

use axum::Router;
use axum::routing::MethodRouter;
use serde::Serialize;
use whorl::library::Capability;

use super::state::AppState;

/// Who may call a route.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Access {
    /// Anyone (health, sign-in, the API description).
    Public,
    /// A signed-in account whose role grants the capability.
    Needs(Capability),
}

/// One route as added.
#[derive(Debug, Clone, Serialize)]
pub struct RouteInfo {
    /// GET, POST, DELETE ...
    pub method: &'static str,
    /// The path, with `{name}` for path parameters.
    pub path: &'static str,
    /// Who may call it (the extractor in the handler's signature enforces it; the role-matrix
    /// test checks that the two agree).
    pub access: Access,
}

/// A router that remembers its routes.
pub struct Routes {
    router: Router<AppState>,
    list: Vec<RouteInfo>,
}

impl Routes {
    /// No routes yet.
    pub fn new() -> Routes {
        Routes {
            router: Router::new(),
            list: Vec::new(),
        }
    }

    /// Adds one method of one path.
    pub fn add(
        mut self,
        method: &'static str,
        path: &'static str,
        access: Access,
        handler: MethodRouter<AppState>,
    ) -> Routes {
        self.router = self.router.route(path, handler);
        self.list.push(RouteInfo {
            method,
            path,
            access,
        });
        self
    }

    /// Adds the routes of another set.
    pub fn merge(mut self, other: Routes) -> Routes {
        self.router = self.router.merge(other.router);
        self.list.extend(other.list);
        self
    }

    /// The routes as added.
    pub fn list(&self) -> &[RouteInfo] {
        &self.list
    }

    /// The router.
    pub fn into_router(self) -> Router<AppState> {
        self.router
    }
}
