//! The monthly cash-flow schedule of a business case, and its metrics.
//!
//! # Conventions
//! - Months `t = 0 .. horizon_months` (exclusive); month 0 is the start month, its flow is not
//!   discounted; every flow is at the end of its month (the [`crate::finance::npv`] convention).
//! - Costs are entered as positive amounts and appear **negative** in the flows; benefits are
//!   positive. Recurring costs are amounts **per year**, spread evenly over its twelve months.
//! - Escalation is applied in steps once per full year since the item started: month `t` of an
//!   item that starts in month `m` is multiplied by `(1 + escalation)^floor((t - m) / 12)`.
//! - Benefits start at `go_live_month`. During a ramp-up of `R` months, month `go_live + k`
//!   (`k < R`) earns the fraction `(k + 1) / (R + 1)` of the full benefit; from `go_live + R` on,
//!   the full benefit. Monthly benefit of a driver:
//!   `quantity_per_year / 12 * unit_value * ramp * (1 + escalation)^floor((t - go_live) / 12)`.
//! - Optional after-tax view: `taxable = benefits - opex - depreciation`, `tax = -rate *
//!   taxable`. Opex is the recurring costs plus the one-off costs that are not capex; each capex
//!   one-off is depreciated straight-line over `depreciation_years * 12` months starting in its
//!   own month (months past the horizon are simply not in the schedule: no terminal value). A
//!   negative taxable amount gives a positive tax (a **shield**): the textbook assumption that the
//!   plant has other taxable income the loss is offset against, in the same month.
//! - Rounding: the money columns of each month (`one_off`, `recurring`, `benefits`, `tax`) are
//!   rounded to [`MONEY_DP`] decimal places (midpoint away from zero), so a printed table adds up;
//!   `net` is their exact sum; `discounted` is `net / (1 + monthly_rate)^t` in full `Decimal`
//!   precision (as [`crate::finance::npv`] computes it), and the cumulative columns are exact
//!   sums, so the last `cumulative_discounted` is exactly the NPV.

use rust_decimal::prelude::{FromPrimitive, ToPrimitive};
use rust_decimal::{Decimal, MathematicalOps, RoundingStrategy};

use super::npv::{Discounter, checked_sum};
use super::payback::payback_of;
use super::{FinanceError, IrrOutcome, Payback, annual_from_periodic, irr, mirr, monthly_from_annual, payback};

/// Decimal places kept for the monthly money columns of a [`Schedule`].
pub const MONEY_DP: u32 = 4;

/// Longest horizon accepted by [`build_schedule`]: 100 years of months. Far beyond any business
/// case; it keeps a mistyped horizon from allocating billions of rows.
pub const MAX_HORIZON_MONTHS: u32 = 1200;

/// A business case, as the inputs of [`build_schedule`].
#[derive(Debug, Clone, PartialEq)]
pub struct CaseInput {
    /// Number of months in the schedule (at least 1); rows are months `0 .. horizon_months`.
    pub horizon_months: u32,
    /// First month with benefits.
    pub go_live_month: u32,
    /// Months of linear ramp-up after go-live (0 for full benefits at once).
    pub ramp_up_months: u32,
    /// Costs, one-off or recurring.
    pub costs: Vec<CostInput>,
    /// Benefit drivers (avoided energy, scrap, downtime ...).
    pub drivers: Vec<DriverInput>,
    /// The after-tax view, if wanted.
    pub tax: Option<TaxInput>,
}

/// When a cost is incurred.
#[derive(Debug, Clone, PartialEq)]
pub enum CostTiming {
    /// Once, in `month` (which must be inside the horizon).
    OneOff {
        /// The month of the payment.
        month: u32,
    },
    /// Every month from `from_month` on, `amount / 12` a month, escalated once a year.
    Recurring {
        /// The first month of the cost (inside the horizon).
        from_month: u32,
        /// Yearly escalation, e.g. `0.03` for 3 % a year (greater than -1).
        escalation: Decimal,
    },
}

/// A cost of the case.
#[derive(Debug, Clone, PartialEq)]
pub struct CostInput {
    /// The label shown to the user (and named in errors).
    pub label: String,
    /// A positive amount: the one-off amount, or the amount **per year** for a recurring cost.
    pub amount: Decimal,
    /// One-off or recurring.
    pub timing: CostTiming,
    /// A capitalised one-off (depreciated in the tax view). Recurring costs are always expensed:
    /// the flag is ignored for them.
    pub capex: bool,
}

/// A benefit driver: a yearly quantity valued at a unit value.
#[derive(Debug, Clone, PartialEq)]
pub struct DriverInput {
    /// The label shown to the user (and named in errors).
    pub label: String,
    /// Quantity per year at full benefit (e.g. kWh avoided a year), zero or more.
    pub quantity_per_year: Decimal,
    /// Value per unit (e.g. EUR per kWh), zero or more.
    pub unit_value: Decimal,
    /// Yearly escalation of the benefit from go-live, greater than -1.
    pub escalation: Decimal,
}

/// The after-tax view.
#[derive(Debug, Clone, PartialEq)]
pub struct TaxInput {
    /// Tax rate on taxable profit, e.g. `0.25`; between 0 and 1.
    pub rate: Decimal,
    /// Straight-line depreciation period of capex one-offs, in years (at least 1).
    pub depreciation_years: u32,
}

/// One month of the schedule. Money columns follow the module conventions (signs, rounding).
#[derive(Debug, Clone, PartialEq)]
pub struct MonthFlow {
    /// Month number, from 0.
    pub month: u32,
    /// One-off costs paid this month (zero or negative).
    pub one_off: Decimal,
    /// Recurring costs this month (zero or negative).
    pub recurring: Decimal,
    /// Benefits this month (zero or positive).
    pub benefits: Decimal,
    /// Tax effect: negative = tax paid, positive = shield; zero without a tax view.
    pub tax: Decimal,
    /// `one_off + recurring + benefits + tax`.
    pub net: Decimal,
    /// `net / (1 + monthly_rate)^month`.
    pub discounted: Decimal,
    /// Sum of `net` up to and including this month.
    pub cumulative: Decimal,
    /// Sum of `discounted` up to and including this month.
    pub cumulative_discounted: Decimal,
}

/// The monthly cash-flow table of a case at a hurdle rate.
#[derive(Debug, Clone, PartialEq)]
pub struct Schedule {
    /// The monthly discount rate, `(1 + annual_hurdle)^(1/12) - 1`.
    pub monthly_rate: f64,
    /// One row per month, from month 0.
    pub rows: Vec<MonthFlow>,
}

impl Schedule {
    /// The `net` column: the monthly flows for [`crate::finance::npv`], [`crate::finance::irr`]
    /// and friends (at [`Schedule::monthly_rate`]).
    pub fn net_flows(&self) -> Vec<Decimal> {
        self.rows.iter().map(|r| r.net).collect()
    }
}

fn round(d: Decimal) -> Decimal {
    let r = d.round_dp_with_strategy(MONEY_DP, RoundingStrategy::MidpointAwayFromZero);
    // Never show "-0".
    if r.is_zero() { Decimal::ZERO } else { r }
}

fn invalid(field: String, reason: &'static str) -> FinanceError {
    FinanceError::InvalidInput { field, reason }
}

fn overflow<T>(v: Option<T>) -> Result<T, FinanceError> {
    v.ok_or(FinanceError::NotRepresentable)
}

/// `(1 + escalation)^floor(months_since / 12)`.
fn escalated(escalation: Decimal, months_since: u32) -> Result<Decimal, FinanceError> {
    let years = u64::from(months_since / 12);
    // Whole years only: escalation steps on each anniversary, it does not accrue monthly.
    overflow(Decimal::ONE.checked_add(escalation).and_then(|g| g.checked_powu(years)))
}

/// Checks every input and names the first bad one.
pub(crate) fn validate(case: &CaseInput) -> Result<(), FinanceError> {
    if case.horizon_months == 0 || case.horizon_months > MAX_HORIZON_MONTHS {
        return Err(invalid("horizon (months)".into(), "must be between 1 and 1200 months"));
    }
    // Escalation of -100 % or less would make a growth factor of zero or below.
    let growth = |e: Decimal| e > Decimal::NEGATIVE_ONE;
    // Costs and benefits are entered as magnitudes; the schedule gives them their signs, so a
    // negative entry is a mistake, not a refund.
    for c in &case.costs {
        if c.amount.is_sign_negative() && !c.amount.is_zero() {
            return Err(invalid(
                format!("cost \"{}\": amount", c.label),
                "must be zero or more (costs are entered as positive amounts)",
            ));
        }
        let (month, escalation) = match c.timing {
            CostTiming::OneOff { month } => (month, Decimal::ZERO),
            CostTiming::Recurring { from_month, escalation } => (from_month, escalation),
        };
        // A cost that never falls inside the schedule would silently drop out of every figure.
        if month >= case.horizon_months {
            return Err(FinanceError::CostOutsideHorizon {
                label: c.label.clone(),
                month,
                horizon: case.horizon_months,
            });
        }
        if !growth(escalation) {
            return Err(invalid(
                format!("cost \"{}\": escalation", c.label),
                "must be greater than -1 (-100 % a year)",
            ));
        }
    }
    for d in &case.drivers {
        if d.quantity_per_year.is_sign_negative() && !d.quantity_per_year.is_zero() {
            return Err(invalid(format!("driver \"{}\": quantity per year", d.label), "must be zero or more"));
        }
        if d.unit_value.is_sign_negative() && !d.unit_value.is_zero() {
            return Err(invalid(format!("driver \"{}\": unit value", d.label), "must be zero or more"));
        }
        if !growth(d.escalation) {
            return Err(invalid(
                format!("driver \"{}\": escalation", d.label),
                "must be greater than -1 (-100 % a year)",
            ));
        }
    }
    if let Some(tax) = &case.tax {
        if tax.rate < Decimal::ZERO || tax.rate > Decimal::ONE {
            return Err(invalid("tax rate".into(), "must be between 0 and 1 (0 % to 100 %)"));
        }
        if tax.depreciation_years == 0 {
            return Err(invalid("depreciation (years)".into(), "must be at least 1 year"));
        }
    }
    Ok(())
}

/// Money of one month before rounding, split the way the tax view needs it.
#[derive(Default)]
struct MonthParts {
    capex: Decimal,
    expensed_one_off: Decimal,
    recurring: Decimal,
    benefits: Decimal,
    depreciation: Decimal,
}

/// The unrounded money of month `t`; rounding happens once, on the month's totals.
fn month_parts(case: &CaseInput, t: u32) -> Result<MonthParts, FinanceError> {
    let twelve = Decimal::from(12);
    let mut p = MonthParts::default();
    let dep_months = case.tax.as_ref().map(|tax| tax.depreciation_years.saturating_mul(12));
    for c in &case.costs {
        match c.timing {
            CostTiming::OneOff { month } => {
                if month == t {
                    let bucket = if c.capex { &mut p.capex } else { &mut p.expensed_one_off };
                    *bucket = overflow(bucket.checked_add(c.amount))?;
                }
                // Straight line from the month of the payment, for dep_months months.
                if let Some(n) = dep_months.filter(|_| c.capex)
                    && t >= month
                    && t - month < n
                {
                    let monthly = overflow(c.amount.checked_div(Decimal::from(n)))?;
                    p.depreciation = overflow(p.depreciation.checked_add(monthly))?;
                }
            }
            CostTiming::Recurring { from_month, escalation } if t >= from_month => {
                let monthly = overflow((c.amount / twelve).checked_mul(escalated(escalation, t - from_month)?))?;
                p.recurring = overflow(p.recurring.checked_add(monthly))?;
            }
            CostTiming::Recurring { .. } => {}
        }
    }
    if t >= case.go_live_month {
        let k = t - case.go_live_month;
        // Linear ramp (k + 1) / (R + 1): never 0 in the first month, reaching 1 at k = R.
        let ramp = if k < case.ramp_up_months {
            Decimal::from(k + 1) / Decimal::from(u64::from(case.ramp_up_months) + 1)
        } else {
            Decimal::ONE
        };
        for d in &case.drivers {
            let full = overflow((d.quantity_per_year / twelve).checked_mul(d.unit_value))?;
            let month = overflow(full.checked_mul(ramp).and_then(|v| v.checked_mul(escalated(d.escalation, k).ok()?)))?;
            p.benefits = overflow(p.benefits.checked_add(month))?;
        }
    }
    Ok(p)
}

/// Builds the monthly cash-flow schedule of a business case at an annual hurdle rate.
///
/// Formulas, signs, timing and rounding: see the [module documentation](self). The hurdle is an
/// annual effective rate, converted with [`crate::finance::monthly_from_annual`].
///
/// # Errors
/// - [`FinanceError::RateOutOfRange`] if `annual_hurdle` is not finite or is `<= -1`;
/// - [`FinanceError::CostOutsideHorizon`] if a one-off month or a recurring start month is not
///   inside `0 .. horizon_months` (naming the cost);
/// - [`FinanceError::InvalidInput`] naming the field for a horizon of 0 or more than
///   [`MAX_HORIZON_MONTHS`], a negative amount,
///   quantity or unit value, an escalation `<= -1`, a tax rate outside [0, 1] or zero
///   depreciation years;
/// - [`FinanceError::NotRepresentable`] if a value exceeds `Decimal`'s range.
///
/// # Example
/// ```
/// use pilot_ledger::finance::schedule::{CaseInput, CostInput, CostTiming, DriverInput, build_schedule};
/// use rust_decimal::Decimal;
///
/// // 1,200 of sensors now; 2,400 a year of avoided scrap from month 1.
/// let case = CaseInput {
///     horizon_months: 3,
///     go_live_month: 1,
///     ramp_up_months: 0,
///     costs: vec![CostInput {
///         label: "sensors".into(),
///         amount: Decimal::from(1200),
///         timing: CostTiming::OneOff { month: 0 },
///         capex: true,
///     }],
///     drivers: vec![DriverInput {
///         label: "scrap avoided".into(),
///         quantity_per_year: Decimal::from(240),
///         unit_value: Decimal::from(10),
///         escalation: Decimal::ZERO,
///     }],
///     tax: None,
/// };
/// let schedule = build_schedule(&case, 0.0)?;
/// assert_eq!(schedule.net_flows(), [-1200, 200, 200].map(Decimal::from));
/// assert_eq!(schedule.rows[2].cumulative, Decimal::from(-800));
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// Monthly discounted cash-flow model of a capital project, e.g. Brealey, Myers and Allen,
/// *Principles of Corporate Finance*, chapter "Making Investment Decisions with the NPV Rule"
/// (incremental flows, depreciation tax shield).
pub fn build_schedule(case: &CaseInput, annual_hurdle: f64) -> Result<Schedule, FinanceError> {
    let monthly_rate = monthly_from_annual(annual_hurdle)?;
    validate(case)?;
    let mut discounter = Discounter::new(monthly_rate)?;
    let mut rows = Vec::with_capacity(case.horizon_months as usize);
    let (mut cumulative, mut cumulative_discounted) = (Decimal::ZERO, Decimal::ZERO);
    for t in 0..case.horizon_months {
        let p = month_parts(case, t)?;
        let capex = round(p.capex);
        let expensed = round(p.expensed_one_off);
        let recurring = round(p.recurring);
        let benefits = round(p.benefits);
        // Taxable profit uses the rounded columns, so the printed table explains the tax.
        let tax = match &case.tax {
            Some(tax) => {
                let taxable = overflow(
                    benefits
                        .checked_sub(recurring)
                        .and_then(|v| v.checked_sub(expensed))
                        .and_then(|v| v.checked_sub(p.depreciation)),
                )?;
                round(-overflow(tax.rate.checked_mul(taxable))?)
            }
            None => Decimal::ZERO,
        };
        let one_off = round(-overflow(capex.checked_add(expensed))?);
        let recurring = round(-recurring);
        let net = overflow(
            one_off.checked_add(recurring).and_then(|v| v.checked_add(benefits)).and_then(|v| v.checked_add(tax)),
        )?;
        // Discounted exactly as npv() does, so the last cumulative discounted flow is the NPV.
        let discounted = discounter.next(net)?;
        cumulative = overflow(cumulative.checked_add(net))?;
        cumulative_discounted = overflow(cumulative_discounted.checked_add(discounted))?;
        rows.push(MonthFlow {
            month: t,
            one_off,
            recurring,
            benefits,
            tax,
            net,
            discounted,
            cumulative,
            cumulative_discounted,
        });
    }
    Ok(Schedule { monthly_rate, rows })
}

/// The metrics of a case, from its [`Schedule`].
#[derive(Debug, Clone, PartialEq)]
pub struct CaseMetrics {
    /// NPV at the hurdle: the last `cumulative_discounted` of the schedule.
    pub npv: Decimal,
    /// IRR of the monthly net flows, **monthly** roots (see [`crate::finance::irr`]).
    pub irr: Result<IrrOutcome, FinanceError>,
    /// The chosen monthly IRR annualized, `(1 + i)^12 - 1`; `None` without a chosen root.
    pub irr_annual: Option<f64>,
    /// MIRR of the monthly net flows with the monthly hurdle as both finance and reinvestment
    /// rate, annualized `(1 + m)^12 - 1`; `None` when MIRR is undefined (no cost or no benefit).
    pub mirr_annual: Option<f64>,
    /// Simple payback, in months from month 0.
    pub payback_months: Option<Payback>,
    /// Discounted payback at the monthly hurdle, in months from month 0.
    pub discounted_payback_months: Option<Payback>,
    /// PV of (benefits + recurring costs + tax) / PV of one-off outlays; `None` without one-offs.
    pub profitability_index: Option<Decimal>,
    /// PV of the benefits (before tax).
    pub pv_benefits: Decimal,
    /// PV of everything that is not a benefit, as a positive cost: one-off and recurring costs,
    /// plus tax paid less tax shields; so `npv = pv_benefits - pv_costs` always holds.
    pub pv_costs: Decimal,
    /// Sum of the one-off costs, undiscounted, as a positive amount (the capital asked for).
    pub total_one_off: Decimal,
}

/// PV of one column at the schedule's rate; for absurd rates near -100 % where `Decimal`
/// overflows, the f64 value saturated to `Decimal`'s range.
fn pv_column(rate: f64, column: impl Iterator<Item = Decimal>) -> Decimal {
    let values: Vec<Decimal> = column.collect();
    let exact = Discounter::new(rate).and_then(|mut d| {
        let discounted = values.iter().map(|&v| d.next(v)).collect::<Result<Vec<_>, _>>()?;
        checked_sum(discounted)
    });
    // Only reachable for rates near -100 % a month, where the NPV itself already overflowed.
    exact.unwrap_or_else(|_| {
        let x = 1.0 / (1.0 + rate);
        let v: f64 = values.iter().rev().fold(0.0, |acc, d| acc * x + d.to_f64().unwrap_or(0.0));
        Decimal::from_f64(v).unwrap_or(if v > 0.0 { Decimal::MAX } else { Decimal::MIN })
    })
}

/// Computes the metrics of a case from its schedule.
///
/// - `npv`: the last cumulative discounted flow (month 0 undiscounted);
/// - `irr`: [`crate::finance::irr`] of the net flows, monthly; `irr_annual` annualizes the
///   chosen root with [`crate::finance::annual_from_periodic`]`(i, 12)`;
/// - `mirr_annual`: [`crate::finance::mirr`] with the monthly hurdle as finance and reinvestment
///   rate, annualized the same way;
/// - paybacks: [`crate::finance::payback`] of the net flows and of the discounted column, in
///   months;
/// - `profitability_index` (the project form in DESIGN.md: PV of benefits net of recurring costs
///   over PV of one-off outlays): `PV(benefits + recurring + tax) / PV(-one_off)`, `None` when the
///   PV of one-off outlays is zero;
/// - `pv_benefits`, `pv_costs` (`= pv_benefits - npv`), `total_one_off` (undiscounted).
///
/// Never fails: a metric that does not exist is `None` (or the `Err` of `irr`).
///
/// # Example
/// ```
/// use pilot_ledger::finance::schedule::{MonthFlow, Schedule, case_metrics};
/// use rust_decimal::Decimal;
///
/// // A hand-made two-month schedule at a zero rate: -1000 now, +1100 next month.
/// let row = |month, one_off: i64, benefits: i64, cumulative: i64| MonthFlow {
///     month,
///     one_off: Decimal::from(one_off),
///     recurring: Decimal::ZERO,
///     benefits: Decimal::from(benefits),
///     tax: Decimal::ZERO,
///     net: Decimal::from(one_off + benefits),
///     discounted: Decimal::from(one_off + benefits),
///     cumulative: Decimal::from(cumulative),
///     cumulative_discounted: Decimal::from(cumulative),
/// };
/// let schedule = Schedule { monthly_rate: 0.0, rows: vec![row(0, -1000, 0, -1000), row(1, 0, 1100, 100)] };
/// let m = case_metrics(&schedule);
/// assert_eq!(m.npv, Decimal::from(100));
/// assert!((m.irr.as_ref().ok().and_then(|o| o.chosen).unwrap_or(f64::NAN) - 0.1).abs() < 1e-12);
/// assert_eq!(m.profitability_index, Some("1.1".parse().unwrap()));
/// assert_eq!(m.total_one_off, Decimal::from(1000));
/// ```
///
/// # Reference
/// As the functions it calls; annualization of monthly rates: effective-rate conversion.
pub fn case_metrics(schedule: &Schedule) -> CaseMetrics {
    let rate = schedule.monthly_rate;
    let net = schedule.net_flows();
    let npv = schedule.rows.last().map_or(Decimal::ZERO, |r| r.cumulative_discounted);
    let irr = irr(&net);
    let irr_annual = irr.as_ref().ok().and_then(|o| o.chosen).and_then(|i| annual_from_periodic(i, 12).ok());
    let mirr_annual = mirr(&net, rate, rate).ok().and_then(|m| annual_from_periodic(m, 12).ok());
    let discounted: Vec<Decimal> = schedule.rows.iter().map(|r| r.discounted).collect();
    let pv_benefits = pv_column(rate, schedule.rows.iter().map(|r| r.benefits));
    let pv_one_off = pv_column(rate, schedule.rows.iter().map(|r| -r.one_off));
    // PV(benefits + recurring + tax) is NPV + PV(one-off outlays): no third discounting pass.
    let profitability_index = if pv_one_off > Decimal::ZERO {
        npv.checked_add(pv_one_off).and_then(|v| v.checked_div(pv_one_off))
    } else {
        None
    };
    CaseMetrics {
        npv,
        irr,
        irr_annual,
        mirr_annual,
        payback_months: payback(&net),
        discounted_payback_months: payback_of(&discounted),
        profitability_index,
        pv_benefits,
        // Defined by the identity npv = pv_benefits - pv_costs, so tax is inside the costs.
        pv_costs: pv_benefits.saturating_sub(npv),
        total_one_off: schedule.rows.iter().fold(Decimal::ZERO, |acc, r| acc.saturating_sub(r.one_off)),
    }
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;

    fn case(horizon: u32) -> CaseInput {
        CaseInput {
            horizon_months: horizon,
            go_live_month: 0,
            ramp_up_months: 0,
            costs: vec![],
            drivers: vec![],
            tax: None,
        }
    }

    #[test]
    fn validation_names_the_input() {
        let mut c = case(12);
        c.costs.push(CostInput {
            label: "late".into(),
            amount: Decimal::ONE,
            timing: CostTiming::OneOff { month: 12 },
            capex: false,
        });
        assert_eq!(
            build_schedule(&c, 0.1),
            Err(FinanceError::CostOutsideHorizon { label: "late".into(), month: 12, horizon: 12 })
        );
        assert!(matches!(build_schedule(&case(0), 0.1), Err(FinanceError::InvalidInput { .. })));
        assert!(matches!(build_schedule(&case(MAX_HORIZON_MONTHS + 1), 0.1), Err(FinanceError::InvalidInput { .. })));
        assert_eq!(build_schedule(&case(MAX_HORIZON_MONTHS), 0.1).map(|s| s.rows.len()), Ok(1200));
        assert!(matches!(build_schedule(&case(1), -1.0), Err(FinanceError::RateOutOfRange { .. })));
        let mut c = case(12);
        c.tax = Some(TaxInput { rate: Decimal::new(25, 2), depreciation_years: 0 });
        assert!(matches!(
            build_schedule(&c, 0.1),
            Err(FinanceError::InvalidInput { field, .. }) if field == "depreciation (years)"
        ));
    }

    #[test]
    fn rounding_to_money_dp_and_no_negative_zero() {
        let mut c = case(2);
        c.drivers.push(DriverInput {
            label: "d".into(),
            quantity_per_year: Decimal::ONE,
            unit_value: Decimal::ONE,
            escalation: Decimal::ZERO,
        });
        let s = build_schedule(&c, 0.0).unwrap();
        // 1 / 12 = 0.08333... -> 0.0833.
        assert_eq!(s.rows[0].benefits, Decimal::new(833, 4));
        assert_eq!(s.rows[0].one_off.to_string(), "0");
        assert_eq!(s.rows[0].tax.to_string(), "0");
    }
}
