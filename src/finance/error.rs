//! The one error type of the finance engine.
//!
//! Every function in [`crate::finance`] reports a failure with a variant of [`FinanceError`]
//! instead of returning NaN or infinity, so a caller can always tell the user why a figure is
//! missing ("the flows never change sign, so there is no IRR").

use thiserror::Error;

/// Why a finance computation has no answer.
///
/// The messages are written for a controller reading a report, not for a programmer; the web
/// layer may show them as they are.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum FinanceError {
    /// The cash-flow series is empty: there is nothing to discount or solve.
    #[error("the cash-flow series is empty")]
    EmptyFlows,

    /// A rate is not finite or is at or below -100 % per period, where `1 + rate` is no longer
    /// a positive growth factor and discounting is undefined.
    #[error("the rate {rate} is out of range: it must be a finite number greater than -1 (-100 %)")]
    RateOutOfRange {
        /// The offending rate, as given.
        rate: f64,
    },

    /// The flows never change sign (all inflows or all outflows, ignoring zeros), so NPV is never
    /// zero and no internal rate of return exists.
    #[error("the cash flows never change sign, so there is no internal rate of return")]
    NoSignChange,

    /// The flows change sign more than once and no rate in (-100 %, +infinity) makes the
    /// present value zero.
    #[error("the cash flows change sign several times and no rate makes their present value zero")]
    NoRealRoot,

    /// Several rates make the present value zero and none of them is the unique
    /// "investment-like" root (see [`crate::finance::IrrOutcome`]); use MIRR or NPV instead.
    #[error("several rates make the present value zero ({roots:?}): the rate of return is ambiguous, use MIRR or NPV")]
    AmbiguousRate {
        /// Every root found, sorted ascending, as annual rates for XIRR.
        roots: Vec<f64>,
    },

    /// A root finder did not reach its tolerance within its iteration limit.
    #[error("the rate search did not converge within {iterations} iterations")]
    NoConvergence {
        /// The iteration limit that was reached.
        iterations: u32,
    },

    /// MIRR needs at least one strictly positive flow (something to reinvest).
    #[error("MIRR needs at least one positive cash flow")]
    NoPositiveFlow,

    /// MIRR needs at least one strictly negative flow (something to finance).
    #[error("MIRR needs at least one negative cash flow")]
    NoNegativeFlow,

    /// Dated flows need exactly one date per flow.
    #[error("{flows} cash flows but {dates} dates: each flow needs exactly one date")]
    DatesMismatch {
        /// Number of flows given.
        flows: usize,
        /// Number of dates given.
        dates: usize,
    },

    /// A dated flow lies before the first listed date, which is time 0 of the discounting.
    #[error("flow {index} is dated {date}, before the first flow's date {first}: list the earliest flow first")]
    DateBeforeFirst {
        /// Position of the flow in the series.
        index: usize,
        /// Its date.
        date: time::Date,
        /// The first listed date.
        first: time::Date,
    },

    /// Converting an annual rate needs at least one period per year.
    #[error("the number of periods per year must be at least 1")]
    ZeroPeriodsPerYear,

    /// A result (or an intermediate present value) does not fit in a `Decimal`
    /// (about +/-7.9e28) or in a finite f64, typically a rate close to -100 % over many periods.
    #[error("the result is too large to represent (a rate close to -100 % over many periods?)")]
    NotRepresentable,

    /// A business-case cost falls outside the horizon of the schedule, so it would silently
    /// never be counted.
    #[error("cost \"{label}\" starts in month {month}, outside the {horizon}-month horizon (months 0 to {last})", last = horizon.saturating_sub(1))]
    CostOutsideHorizon {
        /// The cost's label, as entered.
        label: String,
        /// The month given for the cost.
        month: u32,
        /// The horizon of the case, in months.
        horizon: u32,
    },

    /// A business-case input is invalid; `field` names it and `reason` says what is accepted.
    #[error("{field}: {reason}")]
    InvalidInput {
        /// The input (and its label, when it has one), e.g. `driver "scrap avoided": quantity per year`.
        field: String,
        /// What would be accepted, e.g. `must be zero or more`.
        reason: &'static str,
    },
}
