//! Simple and discounted payback period, with linear interpolation, exact in `Decimal`.

use rust_decimal::Decimal;

use super::FinanceError;
use super::npv::discounted_flows;

/// When the cumulative cash flow first turns from negative to non-negative.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Payback {
    /// Periods from the first flow (flow 0 is at time 0), interpolated linearly inside the period
    /// of the crossing; 0 when the cumulative flow is never negative (nothing to pay back).
    pub periods: Decimal,
    /// The cumulative flow goes below zero again later (e.g. a decommissioning cost): the
    /// payback reported is the *first* crossing, and it may be misleading.
    pub turns_negative_again: bool,
}

/// Payback of already-discounted (or undiscounted) flows: the first time the cumulative sum
/// turns from negative to non-negative, interpolated, and whether it dips below zero
/// afterwards. Leading zero (or positive) flows before the investment are not a payback: the
/// cumulative flow must have been negative first (common practice: payback measures the
/// recovery of an outlay).
pub(crate) fn payback_of(flows: &[Decimal]) -> Option<Payback> {
    let mut cumulative = Decimal::ZERO;
    let mut crossed_at: Option<Decimal> = None;
    let mut ever_negative = false;
    let mut turns_negative_again = false;
    for (t, &cf) in flows.iter().enumerate() {
        let before = cumulative;
        // Sums past Decimal's range (about 7.9e28) saturate instead of panicking.
        cumulative = cumulative.saturating_add(cf);
        match crossed_at {
            None if before < Decimal::ZERO && cumulative >= Decimal::ZERO => {
                // before < 0 <= cumulative, so cf > 0 and t >= 1: the fraction is in (0, 1].
                let fraction = (-before).checked_div(cf).unwrap_or(Decimal::ONE);
                crossed_at = Some(Decimal::from(t.saturating_sub(1)) + fraction);
            }
            None => ever_negative |= cumulative < Decimal::ZERO,
            Some(_) if cumulative < Decimal::ZERO => turns_negative_again = true,
            Some(_) => {}
        }
    }
    match crossed_at {
        Some(periods) => Some(Payback { periods, turns_negative_again }),
        None if !ever_negative && !flows.is_empty() => Some(Payback { periods: Decimal::ZERO, turns_negative_again }),
        None => None,
    }
}

/// Simple (undiscounted) payback period.
///
/// Formula: with cumulative flows `C_t = sum_{u=0..t} CF_u`, the first `t` with `C_t >= 0` and
/// `C_{t-1} < 0` gives `payback = (t - 1) + (-C_{t-1}) / CF_t` (the flow of period `t` assumed
/// to arrive evenly through the period), counted only once some earlier `C_u < 0`: zero flows
/// before the outlay (a first cost in month 2) are not a payback; `0` if no `C_t` is negative. Periods are counted from the first
/// flow, which is at time 0, in the periods of the flows (months for a monthly schedule).
///
/// The sums and the division are in `Decimal`, so a crossing exactly at a period end is an exact
/// whole number (`[-1000, 500, 500]` pays back in exactly 2). If the cumulative flow goes below
/// zero again after the first crossing, that first crossing is still returned, with
/// [`Payback::turns_negative_again`] set.
///
/// Returns `None` if the cumulative flow never reaches zero (or `flows` is empty).
///
/// # Example
/// ```
/// use pilot_ledger::finance::payback;
/// use rust_decimal::Decimal;
///
/// let flows = [-1000, 400, 400, 400].map(Decimal::from);
/// let p = payback(&flows).unwrap_or_else(|| unreachable!());
/// assert_eq!(p.periods, "2.5".parse::<Decimal>().unwrap()); // 2 + 200 / 400
/// assert!(!p.turns_negative_again);
/// assert_eq!(payback(&[Decimal::from(-1), Decimal::ZERO]), None);
/// ```
///
/// # Reference
/// Ross, Westerfield and Jaffe, *Corporate Finance*, chapter "Net Present Value and Other
/// Investment Rules" (payback period rule, with fractional years by interpolation).
pub fn payback(flows: &[Decimal]) -> Option<Payback> {
    payback_of(flows)
}

/// Discounted payback period: [`payback`] of the flows discounted to time 0 at `rate`.
///
/// Formula: as [`payback`] with `CF_t` replaced by `CF_t / (1 + rate)^t` (interpolating linearly
/// in the discounted flows). The discounted flows are computed in `Decimal` exactly as
/// [`crate::finance::npv`] computes them, so `[-1000, 1100]` at 10 % pays back in exactly 1 and
/// the last cumulative discounted flow equals the NPV.
///
/// # Errors
/// - [`FinanceError::EmptyFlows`] if `flows` is empty;
/// - [`FinanceError::RateOutOfRange`] if `rate` is not finite or is `<= -1`;
/// - [`FinanceError::NotRepresentable`] if a discounted flow exceeds `Decimal`'s range.
///
/// `Ok(None)` if the cumulative discounted flow never reaches zero.
///
/// # Example
/// ```
/// use pilot_ledger::finance::discounted_payback;
/// use rust_decimal::Decimal;
///
/// let flows = [Decimal::from(-1000), Decimal::from(1100)];
/// let p = discounted_payback(0.1, &flows)?.unwrap_or_else(|| unreachable!());
/// assert_eq!(p.periods, Decimal::ONE);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// Brealey, Myers and Allen, *Principles of Corporate Finance*, chapter "Net Present Value and
/// Other Investment Criteria" (discounted payback).
pub fn discounted_payback(rate: f64, flows: &[Decimal]) -> Result<Option<Payback>, FinanceError> {
    if flows.is_empty() {
        return Err(FinanceError::EmptyFlows);
    }
    Ok(payback_of(&discounted_flows(rate, flows)?))
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;

    use crate::finance::test_flows as flows;

    #[test]
    fn boundaries_and_flags() {
        let p = payback(&flows(&[-1000, 500, 500])).unwrap();
        assert_eq!(p.periods, Decimal::from(2));
        // Never negative: nothing to pay back (hand count: 5, 4).
        assert_eq!(payback(&flows(&[5, -1])).unwrap().periods, Decimal::ZERO);
        // 5, -5, -4: the outlay is never recovered; the positive start is not a payback.
        assert_eq!(payback(&flows(&[5, -10, 1])), None);
        // 100, -100, 200: negative after period 1, recovered a third into period 2.
        let p = payback(&flows(&[100, -200, 300])).unwrap();
        assert_eq!(p.periods, Decimal::ONE + Decimal::ONE / Decimal::from(3));
        assert!(!p.turns_negative_again);
        // Crosses inside period 2, dips below again in period 3, recovers in period 4.
        let p = payback(&flows(&[-100, 50, 100, -100, 100])).unwrap();
        assert_eq!(p.periods, Decimal::new(15, 1));
        assert!(p.turns_negative_again);
        assert_eq!(payback(&[]), None);
        assert_eq!(discounted_payback(0.1, &[]), Err(FinanceError::EmptyFlows));
        let p = discounted_payback(0.1, &flows(&[-1000, 1100])).unwrap().unwrap();
        assert_eq!(p.periods, Decimal::ONE);
        // 1100 / 1.1 = 1000 and 1210 / 1.21 = 1000: -500 left after period 1, crossed half way
        // through period 2.
        let p = discounted_payback(0.1, &flows(&[-1500, 1100, 1210])).unwrap().unwrap();
        assert_eq!(p.periods, Decimal::new(15, 1));
    }
}
