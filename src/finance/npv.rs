//! Net present value and profitability index of evenly spaced flows, discounted in `Decimal`.

use rust_decimal::Decimal;
use rust_decimal::prelude::{FromPrimitive, ToPrimitive};

use super::FinanceError;
use super::rate::{check_rate, growth_factor};

/// Discounts a series of flows one period at a time, in `Decimal`.
///
/// For `1 + r >= 1` the flow at `t` is divided by `(1 + r)^t`, the power being built by repeated
/// multiplication (each product rounds at the 28th significant digit, so the relative error after
/// `t` periods is below `t * 1e-28`). For `1 + r < 1` the flow is multiplied by `(1 / (1 + r))^t`
/// instead, because a shrinking power would lose significant digits in `Decimal`'s fixed 28
/// decimal places. When the power no longer fits in a `Decimal`, the factor falls back to f64
/// (the discounted value is then tiny, or too large and an error).
pub(crate) struct Discounter {
    rate: f64,
    grows: bool,
    step: Decimal,
    power: Option<Decimal>,
    t: u32,
}

impl Discounter {
    /// A discounter positioned at `t = 0` (the first flow is not discounted).
    pub(crate) fn new(rate: f64) -> Result<Self, FinanceError> {
        let g = growth_factor(rate)?;
        let grows = g >= Decimal::ONE;
        let step = if grows { g } else { Decimal::ONE.checked_div(g).ok_or(FinanceError::NotRepresentable)? };
        Ok(Self { rate, grows, step, power: Some(Decimal::ONE), t: 0 })
    }

    /// Discounts `cf` as the flow of the current period, then moves to the next period.
    pub(crate) fn next(&mut self, cf: Decimal) -> Result<Decimal, FinanceError> {
        let value = if cf.is_zero() {
            Decimal::ZERO
        } else {
            match self.power {
                Some(p) if self.grows => cf.checked_div(p),
                Some(p) => cf.checked_mul(p),
                None => None,
            }
            .map_or_else(|| self.f64_fallback(cf), Ok)?
        };
        self.power = self.power.and_then(|p| p.checked_mul(self.step));
        self.t = self.t.saturating_add(1);
        Ok(value)
    }

    /// `cf / (1 + r)^t` in f64, for when the Decimal power or product overflowed.
    fn f64_fallback(&self, cf: Decimal) -> Result<Decimal, FinanceError> {
        let cf = cf.to_f64().ok_or(FinanceError::NotRepresentable)?;
        let v = cf * (-f64::from(self.t) * self.rate.ln_1p()).exp();
        // from_f64 is None for non-finite values and beyond Decimal's range; tiny values become 0.
        Decimal::from_f64(v).ok_or(FinanceError::NotRepresentable)
    }
}

/// Each flow discounted to period 0: `CF_t / (1 + rate)^t`, in `Decimal`.
pub(crate) fn discounted_flows(rate: f64, flows: &[Decimal]) -> Result<Vec<Decimal>, FinanceError> {
    let mut d = Discounter::new(rate)?;
    flows.iter().map(|&cf| d.next(cf)).collect()
}

/// Sums Decimals, reporting overflow instead of panicking.
pub(crate) fn checked_sum<I: IntoIterator<Item = Decimal>>(values: I) -> Result<Decimal, FinanceError> {
    values.into_iter().try_fold(Decimal::ZERO, |acc, v| acc.checked_add(v).ok_or(FinanceError::NotRepresentable))
}

/// Net present value of evenly spaced cash flows.
///
/// Formula: `NPV = sum_{t=0..N} CF_t / (1 + rate)^t`.
///
/// Timing and sign convention (numpy-financial's): `flows[0]` happens now and is **not**
/// discounted, `flows[t]` happens at the end of period `t`; outflows (investments) are negative,
/// inflows positive; `rate` is the rate per period of the flows (monthly flows need a monthly
/// rate, see [`crate::finance::monthly_from_annual`]).
///
/// The spreadsheet NPV function differs: it discounts its *first* value by one period, so
/// spreadsheet `NPV(r, v1, ..., vn)` equals `npv(r, &[0, v1, ..., vn])`, and the usual spreadsheet
/// idiom `NPV(r, v1..vn) + v0` equals `npv(r, &[v0, v1, ..., vn])`.
///
/// Precision: the discounting is done in `Decimal` (see the module documentation), so flows that
/// discount to round numbers give round numbers: `npv(0.1, [-1000, 1100])` is exactly 0. The
/// result is not rounded.
///
/// # Errors
/// - [`FinanceError::EmptyFlows`] if `flows` is empty;
/// - [`FinanceError::RateOutOfRange`] if `rate` is not finite or is `<= -1`;
/// - [`FinanceError::NotRepresentable`] if a discounted flow or the sum exceeds `Decimal`'s range
///   (a rate near -1 over many periods).
///
/// # Example
/// ```
/// use pilot_ledger::finance::npv;
/// use rust_decimal::Decimal;
///
/// // numpy-financial's npv documentation example: npf.npv(0.08, [-40_000, 5_000, 8_000,
/// // 12_000, 30_000]) = 3065.22267.
/// let flows = [-40_000, 5_000, 8_000, 12_000, 30_000].map(Decimal::from);
/// let value = npv(0.08, &flows)?;
/// assert_eq!(value.round_dp(5), "3065.22267".parse::<Decimal>().unwrap());
///
/// // Exact when the flows discount to round numbers.
/// assert_eq!(npv(0.1, &[Decimal::from(-1000), Decimal::from(1100)])?, Decimal::ZERO);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// numpy-financial 1.0.0, `numpy_financial.npv`, which cites L. J. Gitman, *Principles of
/// Managerial Finance, Brief*, 3rd ed., Addison-Wesley, 2003, p. 346.
pub fn npv(rate: f64, flows: &[Decimal]) -> Result<Decimal, FinanceError> {
    if flows.is_empty() {
        return Err(FinanceError::EmptyFlows);
    }
    let mut d = Discounter::new(rate)?;
    let mut total = Decimal::ZERO;
    for &cf in flows {
        total = total.checked_add(d.next(cf)?).ok_or(FinanceError::NotRepresentable)?;
    }
    Ok(total)
}

/// Profitability index: present value of the flows after the first, per unit invested now.
///
/// Formula: `PI = (sum_{t=1..N} CF_t / (1 + rate)^t) / (-CF_0)`, with the same timing and sign
/// convention as [`npv`]. `PI > 1` exactly when `NPV > 0`. Defined only for an investment, i.e.
/// when the first flow is negative: otherwise the result is `Ok(None)`.
///
/// For business cases, [`crate::finance::case_metrics`] uses the project form instead (PV of
/// benefits net of recurring costs over PV of one-off outlays).
///
/// # Errors
/// - [`FinanceError::EmptyFlows`] if `flows` is empty;
/// - [`FinanceError::RateOutOfRange`] if `rate` is not finite or is `<= -1`;
/// - [`FinanceError::NotRepresentable`] if a present value exceeds `Decimal`'s range.
///
/// # Example
/// ```
/// use pilot_ledger::finance::profitability_index;
/// use rust_decimal::Decimal;
///
/// // 1100 a year from now is worth 1000 today at 10 %; 1000 invested -> PI = 1.
/// let flows = [Decimal::from(-1000), Decimal::from(1100)];
/// assert_eq!(profitability_index(0.1, &flows)?, Some(Decimal::ONE));
/// // Not an investment: no index.
/// assert_eq!(profitability_index(0.1, &[Decimal::from(5)])?, None);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// Brealey, Myers and Allen, *Principles of Corporate Finance*, chapter "Net Present Value and
/// Other Investment Criteria" (profitability index): PV of future flows divided by the
/// initial investment.
pub fn profitability_index(rate: f64, flows: &[Decimal]) -> Result<Option<Decimal>, FinanceError> {
    let (&first, rest) = flows.split_first().ok_or(FinanceError::EmptyFlows)?;
    check_rate(rate)?;
    if first >= Decimal::ZERO {
        return Ok(None);
    }
    let mut d = Discounter::new(rate)?;
    d.next(first)?;
    let mut pv_rest = Decimal::ZERO;
    for &cf in rest {
        pv_rest = pv_rest.checked_add(d.next(cf)?).ok_or(FinanceError::NotRepresentable)?;
    }
    pv_rest.checked_div(-first).map(Some).ok_or(FinanceError::NotRepresentable)
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;

    fn d(s: &str) -> Decimal {
        s.parse().unwrap()
    }

    #[test]
    fn first_flow_is_not_discounted_and_exact() {
        assert_eq!(npv(0.5, &[d("-7.25")]).unwrap(), d("-7.25"));
        assert_eq!(npv(0.1, &[d("-1000"), d("1100")]).unwrap(), Decimal::ZERO);
        assert_eq!(npv(0.1, &[d("0"), d("0"), d("121")]).unwrap(), d("100"));
        // Negative rate: 1 / 0.5 = 2 per period, exact.
        assert_eq!(npv(-0.5, &[d("1"), d("1"), d("1")]).unwrap(), d("7"));
        assert_eq!(npv(0.0, &[d("-3"), d("1.5"), d("1.5")]).unwrap(), Decimal::ZERO);
    }

    #[test]
    fn errors() {
        assert_eq!(npv(0.1, &[]), Err(FinanceError::EmptyFlows));
        assert_eq!(npv(-1.0, &[d("1")]), Err(FinanceError::RateOutOfRange { rate: -1.0 }));
        assert!(npv(f64::INFINITY, &[d("1")]).is_err());
        // (1/0.01)^30 = 1e60 does not fit in a Decimal.
        let long = vec![d("1"); 31];
        assert_eq!(npv(-0.99, &long), Err(FinanceError::NotRepresentable));
        assert_eq!(profitability_index(0.1, &[]), Err(FinanceError::EmptyFlows));
    }

    #[test]
    fn huge_rate_falls_back_to_f64_and_tends_to_zero() {
        // (1e6)^10 = 1e60 overflows the Decimal power: the later flows discount to ~0.
        let flows = vec![d("1000"); 12];
        let v = npv(1e6, &flows).unwrap();
        assert!((v - d("1000.001")).abs() < d("0.000001"));
    }

    #[test]
    fn profitability_index_matches_npv() {
        let flows = [d("-500"), d("200"), d("300"), d("100")];
        let pi = profitability_index(0.08, &flows).unwrap().unwrap();
        let value = npv(0.08, &flows).unwrap();
        // PI = 1 + NPV / investment.
        assert!((pi - (Decimal::ONE + value / d("500"))).abs() < d("0.00000000000000000001"));
        assert_eq!(profitability_index(0.08, &[d("0"), d("1")]).unwrap(), None);
    }
}
