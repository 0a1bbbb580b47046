//! The roll-out roadmap: which candidate zone starts in which quarter of a plan of several
//! years, under yearly capital budgets, the plant's capacity to absorb introductions, one
//! introduction at a time per area, and zones that need others live first.
//!
//! # The model
//! - Plan months are counted from the plan's start month S (month 0); plan year `y` covers
//!   months `12y .. 12y + 11`; candidates start on quarter boundaries, quarter `q` beginning in
//!   month `3q`, `q = 0 .. 4Y - 1`.
//! - A zone started in month `m` is inside its **introduction window** in months
//!   `m .. m + g + max(r, 1) - 1` (go-live offset `g`, ramp-up months `r`) and is **live** from
//!   month `m + g + max(r, 1)`.
//! - **Budget**: a zone's one-off amounts fall in the plan year of their month after the shift;
//!   amounts before month 0 or at or after month `12Y` count against no budget. Spending of year
//!   `y` is at most `B_y`, or, with carry-over, the spending of years `0..=y` is at most the
//!   budgets of years `0..=y`. Checked in exact cents.
//! - **Capacity**: in every month at most `K` zones are inside their windows; with one per area,
//!   at most one zone of each (non-empty) area.
//! - **Dependencies**: a zone starts at or after the month each zone it needs is live.
//! - **Committed** zones keep their start month (which may be before month 0); they count
//!   against budgets and capacity inside the plan. What they alone overrun is reported
//!   ([`Roadmap::overruns`]), not counted against the plan; a candidate gets no room there.
//! - **Value** of a candidate started in quarter `q`: `V_z (1 + r_m)^(-3q)`. The plan maximises
//!   the total value of the planned candidates; a candidate whose `V_z` is not positive is never
//!   planned.
//!
//! # The solver
//! [`roadmap`] runs an exact search of our own (`search.rs`: depth first, rules in exact
//! integers, a Lagrangian bound), then, if the search could not prove its plan, the usual MILP
//! (binary `x[z,q]`) through `good_lp`, `microlp` by default (the search gets half the time);
//! with the `highs` feature HiGHS, after a hundredth of the time in the search. A MILP plan is
//! re-checked in exact cents with [`check`] (a plan a float tolerance let over a limit is cut
//! off and the model solved again); then any candidate that still fits is inserted.
//! DEVELOPERS.md (Roadmap model) has the formulation.

use rust_decimal::Decimal;

mod explain;
mod milp;
mod rules;
mod search;
mod simple;
#[cfg(test)]
mod tests;

pub use explain::roadmap;
pub use rules::{capital_use, check, introductions, one_off_by_year, value_at};
pub use simple::simple_plan;

/// One plan's inputs in the solver's units.
#[derive(Debug, Clone, PartialEq)]
pub struct Instance {
    /// Plan length in years, `Y` (quarters `0 .. 4Y`).
    pub years: u32,
    /// Capital budget of each plan year in cents; `budgets.len() == years`.
    pub budgets: Vec<i64>,
    /// Unspent budget carries forward to later years.
    pub carry_over: bool,
    /// At most this many zones inside their introduction window in any month (`K >= 1`).
    pub capacity: u32,
    /// At most one introduction at a time per non-empty area.
    pub one_per_area: bool,
    /// Monthly hurdle rate `r_m`, for the value of a later start.
    pub monthly_rate: f64,
    /// Every committed zone and candidate.
    pub zones: Vec<PlanZone>,
}

/// One zone of a plan.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanZone {
    /// Zone code, for messages and ties.
    pub code: String,
    /// Area; empty for none (then the one-per-area rule does not apply to it).
    pub area: String,
    /// Indices into [`Instance::zones`] of the zones that must be live before it starts.
    pub needs: Vec<usize>,
    /// Codes of zones it needs that are in no plan (shelved, closed, without figures): such a
    /// candidate cannot be planned.
    pub needs_outside: Vec<String>,
    /// `Some(start month relative to month 0)` for a committed zone (may be negative);
    /// `None` for a candidate.
    pub committed_start: Option<i32>,
    /// `V_z`: the value at its own start (NPV, chance-weighted or calibrated), money.
    pub value: Decimal,
    /// One-off amounts in cents (positive) by month offset from the zone's own start.
    pub one_off: Vec<(u32, i64)>,
    /// Go-live month offset `g`.
    pub go_live: u32,
    /// Ramp-up months `r` (the window counts at least one).
    pub ramp_up: u32,
}

impl PlanZone {
    /// Months inside the introduction window: `g + max(r, 1)`.
    pub fn window(&self) -> u32 {
        self.go_live + self.ramp_up.max(1)
    }
}

/// A rule of the plan that a start would break.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Rule {
    /// A zone it needs is not live yet (by code).
    Needs(String),
    /// The budget of this plan year (0-based) would be exceeded, by this many cents.
    Budget {
        /// Plan year, 0-based.
        year: u32,
        /// Cents over.
        over: i64,
    },
    /// This plan month (0-based) already has `K` introductions.
    Capacity {
        /// Plan month, 0-based.
        month: i32,
    },
    /// This plan month already has an introduction in the same area.
    Area {
        /// Plan month, 0-based.
        month: i32,
    },
}

/// Why a candidate is not in the plan.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum NotPlanned {
    /// Its value is not positive.
    NotPositive,
    /// A zone it needs is neither planned nor committed (by code).
    Needs(String),
    /// At every quarter some rule blocks it, given the others' starts: per quarter `q`, the
    /// first rule that fails.
    Blocked(Vec<Rule>),
}

/// Where a zone stands in a plan.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Placement {
    /// Committed: fixed start month (relative to month 0).
    Committed {
        /// Start month relative to month 0.
        start: i32,
    },
    /// A candidate planned to start in quarter `q` (month `3q`).
    Planned {
        /// Quarter of the plan, 0-based.
        quarter: u32,
    },
    /// A candidate not in this plan.
    NotPlanned(NotPlanned),
}

impl Placement {
    /// The start month relative to month 0, if the zone starts at all.
    pub fn start_month(&self) -> Option<i32> {
        match self {
            Self::Committed { start } => Some(*start),
            Self::Planned { quarter } => Some(3 * *quarter as i32),
            Self::NotPlanned(_) => None,
        }
    }
}

/// One plan: a placement per zone.
#[derive(Debug, Clone, PartialEq)]
pub struct Plan {
    /// One per [`Instance::zones`], same order.
    pub placements: Vec<Placement>,
    /// Total value of the planned candidates, `sum V_z (1 + r_m)^(-3q)`, money.
    pub value: Decimal,
    /// The best proven upper bound on any plan's value (equals `value` when proven).
    pub bound: Decimal,
    /// Whether `value` is proven optimal.
    pub proven: bool,
}

/// The cost of starting a planned candidate one quarter later, and what blocks it one earlier.
#[derive(Debug, Clone, PartialEq)]
pub struct Delay {
    /// `V(q) - V(q + 1)`, money.
    pub cost: Decimal,
    /// The rule that stops a start one quarter earlier, others' starts kept; `None` in quarter 0.
    pub earlier: Option<Rule>,
}

/// The answer: the optimal plan, the simple plan beside it, and the delay figures.
#[derive(Debug, Clone, PartialEq)]
pub struct Roadmap {
    /// The optimum (or the best found within the time limit, with its bound).
    pub optimal: Plan,
    /// The plan a person would make: by profitability index, each at its earliest quarter.
    pub simple: Plan,
    /// Per zone: the delay figures of a candidate planned in `optimal`, else `None`.
    pub delays: Vec<Option<Delay>>,
    /// Rules the committed zones alone break (their budget or capacity overruns).
    pub overruns: Vec<Rule>,
}

/// A plan that cannot be computed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum RoadmapError {
    /// The instance is inconsistent (budgets per year, indices, a cycle of needs).
    #[error("{0}")]
    Invalid(String),
    /// The solver failed.
    #[error("the solver failed: {0}")]
    Solver(String),
}
