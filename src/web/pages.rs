//! Pages that belong to no area: home, about, not found.

use super::AppError;
use super::auth::{MaybeUser, Nav};
use askama::Template;
use axum::response::{Html, Redirect};

/// `/` goes to the zone list.
pub async fn home() -> Redirect {
    Redirect::to("/zones")
}

#[derive(Template)]
#[template(path = "about.html")]
struct AboutPage {
    nav: Nav,
}

/// The about page, with the cautions.
pub async fn about(MaybeUser(me): MaybeUser) -> Result<Html<String>, AppError> {
    Ok(Html(AboutPage { nav: me.as_ref().map(Nav::from).unwrap_or_default() }.render()?))
}

/// Any unknown path: the error page, or the JSON error format under `/api/`.
pub async fn not_found(uri: axum::http::Uri) -> axum::response::Response {
    let what = if uri.path().starts_with("/api/") { "API route" } else { "page" };
    AppError::NotFound(what).answer_for(uri.path())
}
