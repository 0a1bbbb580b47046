//! The realized view of a zone: its ledger against its baseline history, month by month.
//!
//! Months are counted from the history's earliest start month; each month is measured against
//! the baseline in force in it ([`super::history`]). "Elapsed" runs through the latest month
//! with a live booking (neither reversed nor a reversal, [`LedgerEntry::is_live`]), so a month
//! not yet booked does not pull the realization rate down, and a booking reversed later does
//! not stretch the window either. Dated flows carry a spending entry's payment date, or the
//! month's end.

use super::history::{BaselineHistory, settings_of};
use super::{CaseHeader, EntryKind, LedgerEntry, Month, NewBenefitDriver, SiteSettings, finance_input};
use crate::finance::schedule::build_schedule;
use crate::finance::{FinanceError, Realization, RealizedReturn, forecast_at_completion, realization, realized_return};
use rust_decimal::Decimal;

/// Expected vs measured for one benefit driver.
#[derive(Debug, Clone)]
pub struct DriverRealization {
    /// Driver id in the latest baseline that has it (the current one unless retired).
    pub id: i64,
    /// Its identity across versions.
    pub uid: i64,
    /// Whether the current baseline has it (else it was retired by a re-baseline).
    pub current: bool,
    /// Driver label.
    pub label: String,
    /// Unit of the driver.
    pub unit: String,
    /// Expected money per month over the horizon (likely quantity).
    pub expected: Vec<Decimal>,
    /// Measured money per month (net of reversals).
    pub measured: Vec<Decimal>,
    /// Measured quantity to date.
    pub measured_quantity: Decimal,
    /// Realization to date.
    pub realization: Realization,
}

/// The whole realized view.
#[derive(Debug, Clone)]
pub struct RealizedView {
    /// The first month of the monthly figures (the history's earliest start).
    pub start: Month,
    /// Months through the latest booking (0 when nothing is booked).
    pub elapsed: usize,
    /// Per driver.
    pub drivers: Vec<DriverRealization>,
    /// Expected net cash flow per month (pre-tax baseline schedule).
    pub expected_net: Vec<Decimal>,
    /// Booked net cash flow per month.
    pub measured_net: Vec<Decimal>,
    /// Savings realization over all drivers.
    pub savings: Realization,
    /// Forecast of total savings at completion.
    pub savings_forecast: Decimal,
    /// Expected total savings over the horizon.
    pub savings_expected_total: Decimal,
    /// Spending booked to date (negative).
    pub spending_to_date: Decimal,
    /// Spending expected to date (negative).
    pub spending_expected_to_date: Decimal,
    /// XNPV at the hurdle rate and XIRR of the dated ledger flows, when anything is booked.
    pub realized: Option<RealizedReturn>,
}

/// The last day of a month, the date ledger flows of that month carry.
pub fn month_end(m: Month) -> Option<time::Date> {
    let next = m.plus(1);
    let month = time::Month::try_from(next.month).ok()?;
    time::Date::from_calendar_date(next.year, month, 1).ok()?.previous_day()
}

/// Expected benefits of one driver alone, month by month over the case's horizon.
pub(crate) fn driver_benefits(
    header: &CaseHeader,
    driver: &NewBenefitDriver,
    hurdle: f64,
) -> Result<Vec<Decimal>, FinanceError> {
    Ok(build_schedule(&finance_input(header, [], [driver], None), hurdle)?.rows.iter().map(|r| r.benefits).collect())
}

/// Months from the case's start month to `m` (`None` before the start).
pub(crate) fn month_index(start: Month, m: Month) -> Option<usize> {
    let i = (m.year - start.year) * 12 + i32::from(m.month) - i32::from(start.month);
    usize::try_from(i).ok()
}

/// Compute the realized view of `entries` (all of the zone's, whichever version they were
/// booked against) against the baseline history: each month's expectation comes from the
/// baseline in force in it (see [`super::history`]), measured money counts for its driver's
/// identity. `today` fills what a baseline did not freeze; XNPV uses the current baseline's
/// hurdle rate.
pub fn realized_view(
    history: &BaselineHistory,
    entries: &[LedgerEntry],
    today: &SiteSettings,
) -> Result<RealizedView, FinanceError> {
    let n = history.months();
    let hurdle = settings_of(history.current(), today).hurdle_f64();
    let expected = history.expected(today)?;
    let start = expected.start;
    let mut measured_net = vec![Decimal::ZERO; n];
    let mut measured_spend = vec![Decimal::ZERO; n];
    let mut measured = vec![vec![Decimal::ZERO; n]; expected.drivers.len()];
    let mut measured_quantity = vec![Decimal::ZERO; expected.drivers.len()];
    let mut elapsed = 0;
    for e in entries {
        let Some(i) = month_index(start, e.period).filter(|i| *i < n) else { continue };
        measured_net[i] += e.amount;
        if e.kind() == EntryKind::Spending {
            measured_spend[i] += e.amount;
        }
        if let Some(line) = e.item.driver().and_then(|d| expected.line_of(d.0)) {
            measured[line][i] += e.amount;
            measured_quantity[line] += e.quantity.unwrap_or_default();
        }
        if e.is_live() {
            elapsed = elapsed.max(i + 1);
        }
    }
    let mut out_drivers = Vec::with_capacity(expected.drivers.len());
    let (mut all_expected, mut all_measured) = (vec![Decimal::ZERO; n], vec![Decimal::ZERO; n]);
    for ((d, measured), measured_quantity) in expected.drivers.iter().zip(measured).zip(measured_quantity) {
        for i in 0..n {
            all_expected[i] += d.expected[i];
            all_measured[i] += measured[i];
        }
        out_drivers.push(DriverRealization {
            id: d.id,
            uid: d.uid,
            current: d.current,
            label: d.label.clone(),
            unit: d.unit.clone(),
            realization: realization(&d.expected, &measured, elapsed),
            expected: d.expected.clone(),
            measured,
            measured_quantity,
        });
    }
    let flows: Vec<(time::Date, Decimal)> =
        entries.iter().filter_map(|e| e.paid_on.or_else(|| month_end(e.period)).map(|d| (d, e.amount))).collect();
    let realized = if flows.is_empty() { None } else { Some(realized_return(hurdle, &flows)?) };
    Ok(RealizedView {
        start,
        elapsed,
        savings: realization(&all_expected, &all_measured, elapsed),
        savings_forecast: forecast_at_completion(&all_expected, &all_measured, elapsed),
        savings_expected_total: all_expected.iter().sum(),
        spending_to_date: measured_spend.iter().take(elapsed).sum(),
        spending_expected_to_date: expected.spending.iter().take(elapsed).sum(),
        drivers: out_drivers,
        expected_net: expected.net,
        measured_net,
        realized,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn month_ends() {
        let feb = month_end(Month { year: 2028, month: 2 }).map(|d| d.to_string());
        assert_eq!(feb.as_deref(), Some("2028-02-29"));
        let dec = month_end(Month { year: 2026, month: 12 }).map(|d| d.to_string());
        assert_eq!(dec.as_deref(), Some("2026-12-31"));
    }
}
