//! The finance engine: pure functions, no web, database or domain types.
//!
//! Documented the way numpy-financial documents itself: every function states its formula, its
//! sign and timing convention, its errors, a doctested example and a reference.
//!
//! # Conventions
//! - **Money is `rust_decimal::Decimal`** in and out (flows, present values, paybacks). **Rates
//!   are `f64`** in and out: a rate is not money, and root finding and fractional powers need
//!   floating point. Inside, f64 is used for discount factors of IRR/MIRR/XIRR searches and for
//!   fractional-year discounting; present values of evenly spaced flows are computed in `Decimal`
//!   (so a flow that discounts to a round number gives that round number).
//! - **Sign**: outflows (investments, costs) are negative, inflows (benefits) positive.
//! - **Timing** (numpy-financial's convention): `flows[t]` happens at the end of period `t`, and
//!   `flows[0]` is *now*, not discounted: `NPV = sum_{t=0..N} CF_t / (1 + r)^t`. The spreadsheet
//!   NPV function instead discounts its first value: spreadsheet `NPV(r, v1, ..., vn)` is
//!   [`npv`]`(r, &[0, v1, ..., vn])`.
//! - **Rates are per period** of the flows. A monthly schedule uses the monthly equivalent of
//!   the annual hurdle, `(1 + r_a)^(1/12) - 1` ([`monthly_from_annual`]); monthly IRR and MIRR
//!   are reported annualized as `(1 + i)^12 - 1` ([`annual_from_periodic`]). A rate must be
//!   finite and greater than -1 (-100 %).
//! - **Dated flows** ([`xnpv`], [`xirr`]) use actual/365 from the first listed date and annual
//!   rates.
//! - **Errors are explicit** ([`FinanceError`]): no sign change, no convergence, empty flows ...
//!   Nothing returns NaN or infinity. Iteration limits and tolerances are named constants
//!   ([`IRR_MAX_ITERATIONS`], [`IRR_TOLERANCE`], [`IRR_TOUCH_TOLERANCE`]).
//! - **IRR** returns every real root in (-1, +inf), a `chosen` one by a documented rule and an
//!   `ambiguous` flag when the flows change sign more than once ([`IrrOutcome`]); then MIRR or
//!   NPV should decide.
//! - **Rounding**: functions return full `Decimal` precision (28 significant digits); rounding for
//!   display is the caller's job. The business-case [`schedule`] rounds its monthly money columns
//!   to [`schedule::MONEY_DP`] places.
//!
//! # References
//! numpy-financial 1.0.0 (<https://numpy.org/numpy-financial/>) for `npv`, `irr` and `mirr`;
//! the public function reference of spreadsheet NPV, IRR, MIRR, XNPV and XIRR; Brealey, Myers
//! and Allen, *Principles of Corporate Finance*; Numerical Recipes, 3rd ed., section 9.4
//! (safeguarded Newton's method).

pub mod calibration;
mod dated;
mod error;
pub mod float;
mod irr;
pub mod linear;
mod mirr;
pub mod montecarlo;
mod npv;
mod payback;
mod rate;
mod realized;
pub mod roadmap;
pub mod schedule;
pub mod selection;

pub use dated::{DAYS_PER_YEAR, xirr, xirr_outcome, xnpv};
pub use error::FinanceError;
pub use irr::{IRR_MAX_ITERATIONS, IRR_TOLERANCE, IRR_TOUCH_TOLERANCE, IrrOutcome, irr};
pub use mirr::mirr;
pub use npv::{npv, profitability_index};
pub use payback::{Payback, discounted_payback, payback};
pub use rate::{annual_from_periodic, monthly_from_annual};
pub use realized::{
    Realization, RealizedReturn, forecast_at_completion, realization, realized_return, volume_adjusted_avoided,
};
pub use schedule::{
    CaseInput, CaseMetrics, CostInput, CostTiming, DriverInput, MonthFlow, Schedule, TaxInput, build_schedule,
    case_metrics,
};

/// Whole-number flows for unit tests.
#[cfg(test)]
pub(crate) fn test_flows(v: &[i64]) -> Vec<rust_decimal::Decimal> {
    v.iter().map(|&x| rust_decimal::Decimal::from(x)).collect()
}
