//! Modified internal rate of return, with separate finance and reinvestment rates.

use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;

use super::FinanceError;
use super::rate::check_rate;

/// Modified internal rate of return (numpy-financial's `mirr`).
///
/// Formula, for `n = flows.len()` flows at `t = 0..n-1`:
/// `MIRR = (FV_pos / PV_neg)^(1 / (n - 1)) - 1`, where
/// `FV_pos = sum_{CF_t > 0} CF_t (1 + reinvest_rate)^(n-1-t)` is the value at the last period of
/// the inflows reinvested at `reinvest_rate`, and `PV_neg = |sum_{CF_t < 0} CF_t / (1 +
/// finance_rate)^t|` is the present value of the outflows financed at `finance_rate`.
///
/// Timing and sign as [`crate::finance::npv`]: `flows[0]` now, outflows negative; both rates and
/// the result are per period of the flows. Unlike IRR, MIRR is unique, so it is the measure to
/// use when [`crate::finance::irr`] reports an ambiguous outcome. Computed in f64 (the result is
/// a rate, not money).
///
/// # Errors
/// - [`FinanceError::EmptyFlows`] if `flows` is empty;
/// - [`FinanceError::RateOutOfRange`] if either rate is not finite or is `<= -1`;
/// - [`FinanceError::NoPositiveFlow`] / [`FinanceError::NoNegativeFlow`] if no flow is strictly
///   positive / negative (numpy-financial returns NaN);
/// - [`FinanceError::NotRepresentable`] if the result overflows f64.
///
/// # Example
/// ```
/// use pilot_ledger::finance::mirr;
/// use rust_decimal::Decimal;
///
/// // Spreadsheet MIRR function documentation example: a 120,000 loan at 10 %, incomes
/// // reinvested at 12 %: MIRR over five years = 12.6 % (rounded).
/// let flows = [-120_000, 39_000, 30_000, 21_000, 37_000, 46_000].map(Decimal::from);
/// let rate = mirr(&flows, 0.10, 0.12)?;
/// assert!((rate - 0.126).abs() < 5e-4);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// numpy-financial 1.0.0, `numpy_financial.mirr`; the spreadsheet MIRR function (same formula).
pub fn mirr(flows: &[Decimal], finance_rate: f64, reinvest_rate: f64) -> Result<f64, FinanceError> {
    if flows.is_empty() {
        return Err(FinanceError::EmptyFlows);
    }
    check_rate(finance_rate)?;
    check_rate(reinvest_rate)?;
    if !flows.iter().any(|f| f.is_sign_positive() && !f.is_zero()) {
        return Err(FinanceError::NoPositiveFlow);
    }
    if !flows.iter().any(|f| f.is_sign_negative() && !f.is_zero()) {
        return Err(FinanceError::NoNegativeFlow);
    }
    // numpy-financial's form: |NPV(reinvest, positives)| and |NPV(finance, negatives)|, both
    // at t = 0, then (numer / denom)^(1/(n-1)) * (1 + reinvest) - 1.
    let (x_reinvest, x_finance) = (1.0 / (1.0 + reinvest_rate), 1.0 / (1.0 + finance_rate));
    let (mut d_reinvest, mut d_finance) = (1.0, 1.0);
    let (mut numer, mut denom) = (0.0, 0.0);
    for f in flows {
        let v = f.to_f64().ok_or(FinanceError::NotRepresentable)?;
        if v > 0.0 {
            numer += v * d_reinvest;
        } else {
            denom -= v * d_finance;
        }
        d_reinvest *= x_reinvest;
        d_finance *= x_finance;
    }
    // n >= 2 here: there is a positive and a negative flow.
    let periods = (flows.len() - 1) as f64;
    let result = (numer / denom).powf(1.0 / periods) * (1.0 + reinvest_rate) - 1.0;
    if result.is_finite() { Ok(result) } else { Err(FinanceError::NotRepresentable) }
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;

    use crate::finance::test_flows as flows;

    #[test]
    fn equals_irr_when_flows_are_a_single_investment_and_return() {
        // -100 now, 121 in two periods: MIRR = IRR = 10 % whatever the rates.
        let m = mirr(&flows(&[-100, 0, 121]), 0.03, 0.07).unwrap();
        assert!((m - 0.1).abs() < 1e-15);
    }

    #[test]
    fn errors() {
        assert_eq!(mirr(&[], 0.1, 0.1), Err(FinanceError::EmptyFlows));
        assert_eq!(mirr(&flows(&[-1, -2]), 0.1, 0.1), Err(FinanceError::NoPositiveFlow));
        assert_eq!(mirr(&flows(&[0, 2]), 0.1, 0.1), Err(FinanceError::NoNegativeFlow));
        assert_eq!(mirr(&flows(&[-1, 2]), -1.5, 0.1), Err(FinanceError::RateOutOfRange { rate: -1.5 }));
    }
}
