//! The roll-out roadmap: the page, its CSV and the API.

pub(super) mod csv;
pub(super) mod page;

use super::{AppError, AppState};
use crate::domain::{RoadmapAnswer, RoadmapParams};

/// Compute the roadmap for valid inputs: the portfolio's figures, then the solver on the CPU
/// pool.
#[allow(dead_code)]
pub(super) async fn compute(state: &AppState, params: RoadmapParams) -> Result<RoadmapAnswer, AppError> {
    let _ = (state, params);
    Err(AppError::from(crate::app::Error::Conflict("not built yet".into())))
}
