//! Realized figures of a zone in operation: realization against the business case, forecast at
//! completion, avoided quantities adjusted to the period's volume, and the realized
//! XNPV / XIRR of the dated ledger flows.
//!
//! # Conventions
//! - Monthly series (`expected_by_month`, `measured_by_month`) are indexed from month 0 of the
//!   case, as in [`crate::finance::schedule`]; the first `elapsed_months` entries are "to date".
//!   A month missing from a slice (the slice is shorter) counts as zero.
//! - Money is `Decimal`; a realization *rate* is an `f64` ratio (1.0 = as expected).
//! - The functions that cannot fail by their signature ([`realization`],
//!   [`forecast_at_completion`]) saturate at `Decimal::MAX` / `Decimal::MIN` (about
//!   +/-7.9e28) instead of overflowing; no real ledger comes near that.

use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;
use time::Date;

use super::{FinanceError, xirr_outcome, xnpv};

/// Realization of one driver (or a whole zone): measured vs expected over the elapsed months.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Realization {
    /// Sum of the expected (business-case) amounts of the elapsed months.
    pub expected_to_date: Decimal,
    /// Sum of the measured amounts of the elapsed months.
    pub measured_to_date: Decimal,
    /// `measured_to_date / expected_to_date` (1.0 = as expected, 0.8 = 80 % realized); `None`
    /// when `expected_to_date` is zero, where the ratio is undefined.
    pub rate: Option<f64>,
}

/// Sum of the first `months` entries of `values` (fewer if the slice is shorter), saturating.
fn sum_first(values: &[Decimal], months: usize) -> Decimal {
    values.iter().take(months).fold(Decimal::ZERO, |acc, v| acc.saturating_add(*v))
}

/// Sum of the entries from index `from` on, saturating.
fn sum_from(values: &[Decimal], from: usize) -> Decimal {
    values.iter().skip(from).fold(Decimal::ZERO, |acc, v| acc.saturating_add(*v))
}

/// `Decimal::MAX` or `Decimal::MIN` with the sign of `a * b / c` (none of them zero).
fn saturated(a: Decimal, b: Decimal, c: Decimal) -> Decimal {
    let negative = a.is_sign_negative() ^ b.is_sign_negative() ^ c.is_sign_negative();
    if negative { Decimal::MIN } else { Decimal::MAX }
}

/// Realization of a driver (or a zone): the measured and expected sums over the elapsed months,
/// and their ratio.
///
/// Formula: `expected_to_date = sum_{t < elapsed_months} expected_by_month[t]`, likewise
/// `measured_to_date`, and `rate = measured_to_date / expected_to_date` (computed in `Decimal`,
/// then converted to `f64`). Months beyond the end of a slice count as zero, so an
/// `elapsed_months` larger than a slice simply sums all of it; entries of either slice after the
/// elapsed months are ignored (they are not "to date").
///
/// Sign: both series are in the same sign convention (usually positive benefits). A negative
/// measured sum against a positive expected one gives a negative rate (the driver lost money).
///
/// # Errors
/// None: `rate` is `None` when `expected_to_date` is zero. Sums saturate at `Decimal`'s range
/// (module conventions).
///
/// # Example
/// ```
/// use pilot_ledger::finance::realization;
/// use rust_decimal::Decimal;
///
/// let expected = [1000, 1000, 1000, 1000].map(Decimal::from);
/// let measured = [900, 700, 800].map(Decimal::from);
/// // Three months elapsed: 2,400 measured against 3,000 expected, 80 % realized.
/// let r = realization(&expected, &measured, 3);
/// assert_eq!((r.expected_to_date, r.measured_to_date), (Decimal::from(3000), Decimal::from(2400)));
/// assert_eq!(r.rate, Some(0.8));
/// ```
///
/// # Reference
/// The earned-value "performance index" idea (actual over planned to date), as in the PMI
/// *Practice Standard for Earned Value Management*, applied to benefits instead of costs.
pub fn realization(expected_by_month: &[Decimal], measured_by_month: &[Decimal], elapsed_months: usize) -> Realization {
    let expected_to_date = sum_first(expected_by_month, elapsed_months);
    let measured_to_date = sum_first(measured_by_month, elapsed_months);
    let rate = if expected_to_date.is_zero() {
        None
    } else {
        // Decimal's quotient (28 digits) rounds to the nearest f64; on overflow of the quotient
        // (a tiny expected sum), fall back to f64 division, still finite.
        let exact = measured_to_date.checked_div(expected_to_date).and_then(|q| q.to_f64());
        exact.or_else(|| Some(measured_to_date.to_f64()? / expected_to_date.to_f64()?)).filter(|r| r.is_finite())
    };
    Realization { expected_to_date, measured_to_date, rate }
}

/// Forecast at completion of a driver (or a zone): what is realized to date plus what remains
/// of the business case, scaled by the realization to date.
///
/// Formula: `FAC = M + E_rem * rate`, with `M = measured_to_date` and `rate =
/// measured_to_date / expected_to_date` of [`realization`], and `E_rem = sum_{t >=
/// elapsed_months} expected_by_month[t]` the expected amounts of the months not yet elapsed. When
/// `rate` is `None` (nothing was expected to date) it is taken as 1: the rest of the plan is
/// forecast as planned. `E_rem * rate` is computed in `Decimal` as `E_rem * M / E` (no `f64`
/// rounding of money). The completion is the end of `expected_by_month`: with `elapsed_months`
/// at or past its end, `E_rem = 0` and the forecast is the measured sum to date.
///
/// Sign: as [`realization`]; a negative rate forecasts the remaining months as losses too.
///
/// # Errors
/// None (saturates at `Decimal`'s range, see the module conventions).
///
/// # Example
/// ```
/// use pilot_ledger::finance::forecast_at_completion;
/// use rust_decimal::Decimal;
///
/// let expected = [1000, 1000, 1000, 1000, 1000, 1000].map(Decimal::from);
/// let measured = [900, 700, 800].map(Decimal::from);
/// // 2,400 to date (80 % of 3,000), plus the 3,000 still expected at 80 %: 2,400 + 2,400.
/// assert_eq!(forecast_at_completion(&expected, &measured, 3), Decimal::from(4800));
/// ```
///
/// # Reference
/// The earned-value "estimate at completion" with a performance index, as in the PMI
/// *Practice Standard for Earned Value Management* (`EAC = AC + (BAC - EV) / CPI`), transposed to
/// benefits: actual to date plus the remaining plan at the realized rate.
pub fn forecast_at_completion(
    expected_by_month: &[Decimal],
    measured_by_month: &[Decimal],
    elapsed_months: usize,
) -> Decimal {
    let r = realization(expected_by_month, measured_by_month, elapsed_months);
    let remaining = sum_from(expected_by_month, elapsed_months);
    let (m, e) = (r.measured_to_date, r.expected_to_date);
    let remaining_forecast = if e.is_zero() || remaining.is_zero() || m.is_zero() {
        // rate 1 (nothing expected to date), nothing left, or a realization of 0.
        if e.is_zero() { remaining } else { Decimal::ZERO }
    } else {
        // Multiply first for precision, divide first if the product overflows.
        remaining
            .checked_mul(m)
            .and_then(|p| p.checked_div(e))
            .or_else(|| remaining.checked_div(e).and_then(|q| q.checked_mul(m)))
            .unwrap_or_else(|| saturated(remaining, m, e))
    };
    m.saturating_add(remaining_forecast)
}

/// Avoided quantity adjusted to the period's volume: the baseline adjusted to the reporting
/// period's volume, minus what was measured.
///
/// Formula: `avoided = baseline_intensity * reporting_volume - measured_consumption`, e.g. kWh per
/// unit produced in the baseline period, times the units produced in the reporting period, minus
/// the kWh metered in the reporting period. The result is in the unit of the consumption.
///
/// Sign: positive = avoided (less consumed than the adjusted baseline predicts). The result **may
/// be negative**: more was consumed than the adjusted baseline, i.e. a loss, which is returned
/// as it is, not clamped to zero.
///
/// # Errors
/// - [`FinanceError::InvalidInput`] if `baseline_intensity`, `reporting_volume` or
///   `measured_consumption` is negative (they are quantities, zero or more);
/// - [`FinanceError::NotRepresentable`] if the product exceeds `Decimal`'s range.
///
/// # Example
/// ```
/// use pilot_ledger::finance::volume_adjusted_avoided;
/// use rust_decimal::Decimal;
///
/// // 41.5 kWh per unit in the baseline, 3,100 units this period, 124,000 kWh metered:
/// // 41.5 * 3,100 = 128,650 kWh expected, so 4,650 kWh avoided.
/// let avoided = volume_adjusted_avoided("41.5".parse().unwrap(), Decimal::from(3100), Decimal::from(124_000))?;
/// assert_eq!(avoided, Decimal::from(4650));
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// EVO, *International Performance Measurement and Verification Protocol* (IPMVP), Core
/// Concepts (and Vol. I, 2012), from memory (the edition's text was not checked here): this is
/// "avoided energy use", savings on the reporting-period basis = baseline energy adjusted to
/// reporting-period conditions minus reporting-period energy (here a single production-volume
/// adjustment, intensity x volume). IPMVP's "normalized savings" are a different quantity,
/// computed under a fixed set of conditions chosen as normal, so this function is not called
/// that.
pub fn volume_adjusted_avoided(
    baseline_intensity: Decimal,
    reporting_volume: Decimal,
    measured_consumption: Decimal,
) -> Result<Decimal, FinanceError> {
    const REASON: &str = "must be zero or more";
    for (field, value) in [
        ("baseline intensity", baseline_intensity),
        ("reporting-period volume", reporting_volume),
        ("measured consumption", measured_consumption),
    ] {
        if value < Decimal::ZERO {
            return Err(FinanceError::InvalidInput { field: field.into(), reason: REASON });
        }
    }
    baseline_intensity
        .checked_mul(reporting_volume)
        .and_then(|adjusted| adjusted.checked_sub(measured_consumption))
        .ok_or(FinanceError::NotRepresentable)
}

/// Realized XNPV and XIRR of the dated ledger flows of a zone.
#[derive(Debug, Clone, PartialEq)]
pub struct RealizedReturn {
    /// Net present value at the annual rate, actual/365 from the earliest date.
    pub xnpv: Decimal,
    /// The annual internal rate of return, `None` when there is no defensible single rate.
    pub xirr: Option<f64>,
    /// Why `xirr` is `None` (always set then), or, when `xirr` is set but other rates also make
    /// XNPV zero, a caution naming them. `None` when `xirr` is the only root.
    pub xirr_note: Option<String>,
    /// Every annual rate found to make XNPV zero, ascending (empty when the flows never change
    /// sign).
    pub roots: Vec<f64>,
    /// The flows change sign more than once, so the rate of return may not be unique:
    /// [`crate::finance::IrrOutcome::ambiguous`].
    pub ambiguous: bool,
}

/// A rate as a percentage for a note: `0.1234` -> `12.34 %`. Close to -100 % (flows ending in an
/// outflow often have a root there), enough places are shown not to print `-100.00 %`:
/// `-0.99999985` -> `-99.999985 %`.
fn percent(rate: f64) -> String {
    let p = rate * 100.0;
    let gap = p + 100.0;
    let places = if gap > 0.0 && gap < 0.005 { ((-gap.log10()).ceil() as usize + 1).min(16) } else { 2 };
    format!("{p:.places$} %")
}

fn percents(rates: &[f64]) -> String {
    rates.iter().map(|&r| percent(r)).collect::<Vec<_>>().join(", ")
}

/// The note explaining why a realized XIRR is missing.
fn missing_xirr_note(error: &FinanceError) -> String {
    match error {
        FinanceError::NoSignChange => "no rate of return yet: the recorded flows, summed by date, never change sign \
                                       (only outlays, only savings, or nothing)"
            .into(),
        FinanceError::NoRealRoot => "no rate of return: the recorded flows change sign several times and no rate \
                                     makes their present value zero; judge the zone on its XNPV"
            .into(),
        FinanceError::AmbiguousRate { roots } => format!(
            "no single rate of return: several rates make the present value zero ({}); judge the zone on its XNPV",
            percents(roots)
        ),
        other => format!("no rate of return: {other}"),
    }
}

/// Realized XNPV and XIRR of dated ledger flows (outlays negative, savings positive).
///
/// The flows are first **aggregated by date**: entries on the same date are summed (exactly, in
/// `Decimal`), and the dates sorted, so the entries may come in any order. Then, with `d_0` the
/// earliest date:
/// - `xnpv = sum_i CF_i / (1 + annual_rate)^((d_i - d_0) / 365)` ([`crate::finance::xnpv`] on
///   the aggregated flows: actual/365, annual rate, the earliest flow undiscounted);
/// - `xirr` = the annual rate that makes it zero ([`crate::finance::xirr_outcome`]): the single
///   root, or with several roots the `chosen` investment-like one of
///   [`crate::finance::IrrOutcome`] (with a note naming the others); `None` with a note for the
///   user when the flows never change sign (e.g. only the outlay so far), when no rate gives
///   zero, or when no single root is defensible. A missing XIRR is not an error: the XNPV is
///   still returned.
///
/// # Errors
/// - [`FinanceError::EmptyFlows`] if `flows` is empty;
/// - [`FinanceError::RateOutOfRange`] if `annual_rate` is not finite or is `<= -1`;
/// - [`FinanceError::NotRepresentable`] if a sum or present value exceeds `Decimal`'s range.
///
/// # Example
/// ```
/// use pilot_ledger::finance::realized_return;
/// use rust_decimal::Decimal;
/// use time::macros::date;
///
/// // Listed out of order, with two entries on 2022-01-01 (1,200 savings, 100 spending): summed,
/// // they are -1,000 on 2021-01-01 and 1,100 a 365-day year later.
/// let flows = [
///     (date!(2022 - 01 - 01), Decimal::from(1200)),
///     (date!(2021 - 01 - 01), Decimal::from(-1000)),
///     (date!(2022 - 01 - 01), Decimal::from(-100)),
/// ];
/// let r = realized_return(0.10, &flows)?;
/// assert_eq!(r.xnpv, Decimal::ZERO); // 1,100 / 1.1 - 1,000
/// assert!((r.xirr.unwrap() - 0.10).abs() < 1e-12);
/// assert_eq!(r.xirr_note, None);
///
/// // Only the outlay so far: an XNPV, no XIRR, and a note saying why.
/// let r = realized_return(0.10, &flows[1..2])?;
/// assert_eq!((r.xnpv, r.xirr), (Decimal::from(-1000), None));
/// assert!(r.xirr_note.unwrap().contains("never change sign"));
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// The spreadsheet XNPV and XIRR functions (actual/365), as documented in the public function
/// reference of the common spreadsheet applications; here from the earliest date, after summing
/// same-date entries.
pub fn realized_return(annual_rate: f64, flows: &[(Date, Decimal)]) -> Result<RealizedReturn, FinanceError> {
    if flows.is_empty() {
        return Err(FinanceError::EmptyFlows);
    }
    let mut sorted = flows.to_vec();
    sorted.sort_by_key(|&(date, _)| date);
    let mut dates: Vec<Date> = Vec::with_capacity(sorted.len());
    let mut amounts: Vec<Decimal> = Vec::with_capacity(sorted.len());
    for (date, amount) in sorted {
        match (dates.last(), amounts.last_mut()) {
            (Some(&last), Some(sum)) if last == date => {
                *sum = sum.checked_add(amount).ok_or(FinanceError::NotRepresentable)?;
            }
            _ => {
                dates.push(date);
                amounts.push(amount);
            }
        }
    }
    let xnpv = xnpv(annual_rate, &amounts, &dates)?;
    let outcome = xirr_outcome(&amounts, &dates);
    let (roots, ambiguous) = outcome.as_ref().map_or((Vec::new(), false), |o| (o.roots.clone(), o.ambiguous));
    let (xirr, xirr_note) = match outcome {
        Ok(outcome) => match outcome.chosen {
            Some(rate) if outcome.roots.len() <= 1 => (Some(rate), None),
            Some(rate) => {
                let others: Vec<f64> = outcome.roots.iter().copied().filter(|&r| r != rate).collect();
                let note = format!(
                    "the recorded flows change sign several times: {} is the investment-like rate of return, but \
                     the present value is also zero at {}; judge the zone on its XNPV",
                    percent(rate),
                    percents(&others)
                );
                (Some(rate), Some(note))
            }
            None if outcome.roots.is_empty() => (None, Some(missing_xirr_note(&FinanceError::NoRealRoot))),
            None => (None, Some(missing_xirr_note(&FinanceError::AmbiguousRate { roots: outcome.roots }))),
        },
        Err(e) => (None, Some(missing_xirr_note(&e))),
    };
    Ok(RealizedReturn { xnpv, xirr, xirr_note, roots, ambiguous })
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;
    use time::macros::date;

    fn d(v: i64) -> Decimal {
        Decimal::from(v)
    }

    #[test]
    fn sums_saturate_instead_of_overflowing() {
        let huge = [Decimal::MAX, Decimal::MAX];
        let r = realization(&huge, &huge, 2);
        assert_eq!((r.expected_to_date, r.measured_to_date, r.rate), (Decimal::MAX, Decimal::MAX, Some(1.0)));
        // Remaining MAX at a rate of 2: saturates at MAX, never panics.
        let expected = [d(1), Decimal::MAX];
        let measured = [d(2)];
        assert_eq!(forecast_at_completion(&expected, &measured, 1), Decimal::MAX);
        let measured = [d(-2)];
        assert_eq!(forecast_at_completion(&expected, &measured, 1), Decimal::MIN);
    }

    #[test]
    fn tiny_expected_rate_stays_finite() {
        // 1e-28 expected, 7.9e28 measured: the Decimal quotient overflows, f64 gives ~7.9e56.
        let r = realization(&[Decimal::new(1, 28)], &[Decimal::MAX], 1);
        assert!(r.rate.unwrap().is_finite() && r.rate.unwrap() > 1e56);
    }

    #[test]
    fn volume_adjusted_avoided_overflow() {
        assert_eq!(volume_adjusted_avoided(Decimal::MAX, d(2), d(0)), Err(FinanceError::NotRepresentable));
    }

    #[test]
    fn notes_for_each_missing_xirr() {
        let yearly = [date!(2021 - 01 - 01), date!(2022 - 01 - 01), date!(2023 - 01 - 01), date!(2024 - 01 - 01)];
        let dated = |v: &[i64]| -> Vec<(Date, Decimal)> { yearly.iter().zip(v).map(|(&t, &x)| (t, d(x))).collect() };
        // Change sign twice, no real root.
        let r = realized_return(0.1, &dated(&[-100, 250, -200])).unwrap();
        assert_eq!(r.xirr, None);
        assert!(r.xirr_note.unwrap().contains("no rate makes"));
        // Roots 10 %, 20 %, 30 %, two investment-like ones: ambiguous, all named.
        let r = realized_return(0.1, &dated(&[-1000, 3600, -4310, 1716])).unwrap();
        assert_eq!(r.xirr, None);
        let note = r.xirr_note.unwrap();
        assert!(note.contains("10.00 %") && note.contains("20.00 %") && note.contains("30.00 %"), "{note}");
        // Lorie-Savage pump: 400 % chosen, 25 % named in the caution.
        let r = realized_return(0.1, &dated(&[-1600, 10_000, -10_000])).unwrap();
        assert!((r.xirr.unwrap() - 4.0).abs() < 1e-11);
        let note = r.xirr_note.unwrap();
        assert!(note.contains("400.00 % is the investment-like") && note.contains("zero at 25.00 %"), "{note}");
        assert_eq!(percent(-0.999_999_85), "-99.999985 %");
        assert_eq!(percent(-0.9999), "-99.99 %");
        assert_eq!(percent(-0.5), "-50.00 %");
        // Everything cancels on one date: nothing to solve, XNPV zero.
        let same = [(yearly[0], d(-5)), (yearly[0], d(5))];
        let r = realized_return(0.1, &same).unwrap();
        assert_eq!((r.xnpv, r.xirr), (Decimal::ZERO, None));
        assert!(r.xirr_note.unwrap().contains("never change sign"));
    }
}
