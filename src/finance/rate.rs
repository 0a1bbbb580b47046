//! Rate conversion between compounding periods, and the range check every rate goes through.

use rust_decimal::Decimal;
use rust_decimal::prelude::FromPrimitive;

use super::FinanceError;

/// Checks that `rate` is a usable per-period rate: finite and strictly greater than -1.
///
/// At `rate = -1` the growth factor `1 + rate` is zero and discounting divides by zero; below it
/// the factor is negative and fractional powers are undefined.
pub(crate) fn check_rate(rate: f64) -> Result<(), FinanceError> {
    if rate.is_finite() && rate > -1.0 { Ok(()) } else { Err(FinanceError::RateOutOfRange { rate }) }
}

/// The growth factor `1 + rate` as a `Decimal`, after [`check_rate`].
///
/// The f64 is converted with rust_decimal's `from_f64`, which keeps the shortest decimal that
/// the binary value stands for (about 16 significant digits), so `0.1` becomes exactly `0.1`
/// and `[-1000, 1100]` at 10 % discounts to exactly zero.
pub(crate) fn growth_factor(rate: f64) -> Result<Decimal, FinanceError> {
    check_rate(rate)?;
    let r = Decimal::from_f64(rate).ok_or(FinanceError::NotRepresentable)?;
    let g = Decimal::ONE.checked_add(r).ok_or(FinanceError::NotRepresentable)?;
    // A rate within 1e-28 of -1 rounds to a zero factor: treat it like -1 itself.
    if g <= Decimal::ZERO {
        return Err(FinanceError::RateOutOfRange { rate });
    }
    Ok(g)
}

/// Converts an annual effective rate to the equivalent monthly effective rate.
///
/// Formula: `r_m = (1 + r_a)^(1/12) - 1`, so that twelve months of compounding at `r_m` give
/// exactly one year at `r_a` (effective, not nominal: 12 % a year is about 0.949 % a month,
/// not 1 %). Computed as `exp_m1(ln_1p(r_a) / 12)` to keep full precision for small rates.
///
/// # Errors
/// [`FinanceError::RateOutOfRange`] if `annual` is not finite or is `<= -1`.
///
/// # Example
/// ```
/// use pilot_ledger::finance::{annual_from_periodic, monthly_from_annual};
///
/// let monthly = monthly_from_annual(0.10)?;
/// assert!((monthly - 0.007_974_140_428_903_76).abs() < 1e-15);
/// assert!((annual_from_periodic(monthly, 12)? - 0.10).abs() < 1e-15);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// Effective-rate conversion (compound interest), e.g. Brealey, Myers and Allen, *Principles of
/// Corporate Finance*, chapter "How to Calculate Present Values" (effective annual rates).
pub fn monthly_from_annual(annual: f64) -> Result<f64, FinanceError> {
    check_rate(annual)?;
    Ok((annual.ln_1p() / 12.0).exp_m1())
}

/// Converts a per-period effective rate to the equivalent annual effective rate.
///
/// Formula: `r_a = (1 + r)^n - 1` with `n = periods_per_year` (12 for monthly flows). Used to
/// report a monthly IRR or MIRR as an annual rate. Computed as `exp_m1(n * ln_1p(r))`.
///
/// # Errors
/// - [`FinanceError::RateOutOfRange`] if `rate` is not finite or is `<= -1`;
/// - [`FinanceError::ZeroPeriodsPerYear`] if `periods_per_year` is 0;
/// - [`FinanceError::NotRepresentable`] if the annual rate overflows f64 (e.g. 10,000 % a month).
///
/// # Example
/// ```
/// use pilot_ledger::finance::annual_from_periodic;
///
/// // 1 % a month compounds to about 12.68 % a year.
/// let annual = annual_from_periodic(0.01, 12)?;
/// assert!((annual - 0.126_825_030_131_969_7).abs() < 1e-15);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// Same as [`monthly_from_annual`], of which this is the inverse for `periods_per_year = 12`.
pub fn annual_from_periodic(rate: f64, periods_per_year: u32) -> Result<f64, FinanceError> {
    check_rate(rate)?;
    if periods_per_year == 0 {
        return Err(FinanceError::ZeroPeriodsPerYear);
    }
    let annual = (f64::from(periods_per_year) * rate.ln_1p()).exp_m1();
    if annual.is_finite() { Ok(annual) } else { Err(FinanceError::NotRepresentable) }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_errors() {
        for r in [-0.5, -0.01, 0.0, 1e-9, 0.05, 0.1, 0.25, 3.0] {
            let m = monthly_from_annual(r);
            let back = m.and_then(|m| annual_from_periodic(m, 12));
            assert!(matches!(back, Ok(b) if (b - r).abs() <= 1e-14 * r.abs().max(1.0)));
        }
        assert_eq!(monthly_from_annual(-1.0), Err(FinanceError::RateOutOfRange { rate: -1.0 }));
        assert!(monthly_from_annual(f64::NAN).is_err());
        assert_eq!(annual_from_periodic(0.01, 0), Err(FinanceError::ZeroPeriodsPerYear));
        assert_eq!(annual_from_periodic(100.0, 365), Err(FinanceError::NotRepresentable));
        assert_eq!(growth_factor(0.1), Ok(Decimal::new(11, 1)));
    }
}
