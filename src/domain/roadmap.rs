//! The roll-out roadmap's inputs and answer: the plan's parameters read from a form, a query
//! string or a stored plan, and the instance built from the portfolio's zones for
//! [`crate::finance::roadmap`].

use super::{FieldErrors, Month, NumberFormat, Portfolio, SiteSettings, ValueBasis, ZoneStatus};
use crate::finance::roadmap::{Instance, Roadmap};
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};

/// Raw plan inputs as a form, a query string or a stored plan gives them.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default)]
pub struct RoadmapQuery {
    /// First month of the plan, `YYYY-MM`; empty for next month.
    pub start: String,
    /// Plan length in years; empty for 3.
    pub years: String,
    /// Capital budget per plan year, separated by `;` (one value applies to every year).
    pub budgets: String,
    /// Introductions at a time; empty for the site setting.
    pub capacity: String,
    /// `true` when unspent budget carries forward.
    pub carry_over: String,
    /// `true` for at most one introduction at a time per area.
    pub one_per_area: String,
    /// `npv`, `chance_weighted_npv` or `calibrated_npv`; empty for npv.
    pub basis: String,
    /// Seconds the solver may search; empty for 10.
    pub time_limit: String,
}

/// Valid plan inputs.
#[derive(Debug, Clone, PartialEq)]
pub struct RoadmapParams {
    /// First month of the plan.
    pub start: Month,
    /// Plan length in years.
    pub years: u32,
    /// Capital budget per plan year, money.
    pub budgets: Vec<Decimal>,
    /// Introductions at a time.
    pub capacity: u32,
    /// Unspent budget carries forward.
    pub carry_over: bool,
    /// At most one introduction at a time per area.
    pub one_per_area: bool,
    /// Which NPV is the value.
    pub basis: ValueBasis,
    /// Seconds the solver may search.
    pub time_limit_seconds: u32,
}

impl RoadmapParams {
    /// Read the inputs; `next_month` is the default start, the site gives the default capacity.
    pub fn parse(
        q: &RoadmapQuery,
        f: NumberFormat,
        next_month: Month,
        site: &SiteSettings,
    ) -> Result<Self, FieldErrors> {
        let _ = (q, f, site);
        let _ = next_month;
        Err(FieldErrors::default())
    }
}

/// What the page and the API show of one zone of the instance.
#[derive(Debug, Clone, PartialEq)]
pub struct RoadmapZone {
    /// Code.
    pub code: String,
    /// Name.
    pub name: String,
    /// Area; empty for none.
    pub area: String,
    /// Lifecycle status.
    pub status: ZoneStatus,
    /// Sum of its one-off amounts, money.
    pub one_off_total: Decimal,
}

/// The roadmap for one set of inputs.
#[derive(Debug, Clone, PartialEq)]
pub struct RoadmapAnswer {
    /// The inputs.
    pub params: RoadmapParams,
    /// The solver's instance (zones in the same order as `zones`).
    pub instance: Instance,
    /// The zones of the instance.
    pub zones: Vec<RoadmapZone>,
    /// The plans.
    pub result: Roadmap,
    /// Open zones left out of the plan, with why (no case, figures that fail).
    pub left_out: Vec<(String, String)>,
}

/// Build the instance from the portfolio's zones and solve it.
pub fn roadmap_answer(
    portfolio: &Portfolio,
    params: RoadmapParams,
    site: &SiteSettings,
) -> Result<RoadmapAnswer, String> {
    let _ = (portfolio, params, site);
    Err("not built yet".into())
}
