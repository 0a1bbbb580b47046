//! Pages that belong to no area: home, about, not found.

use super::AppError;
use askama::Template;
use axum::response::{Html, IntoResponse, Redirect};

/// `/` goes to the zone list.
pub async fn home() -> Redirect {
    Redirect::to("/zones")
}

#[derive(Template)]
#[template(path = "about.html")]
struct AboutPage;

/// The about page, with the cautions.
pub async fn about() -> Result<Html<String>, AppError> {
    Ok(Html(AboutPage.render()?))
}

/// Any unknown path.
pub async fn not_found() -> impl IntoResponse {
    AppError::NotFound("page")
}
