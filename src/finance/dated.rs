//! Present value and internal rate of return of dated (irregularly spaced) flows: XNPV, XIRR.
//!
//! Day count: actual/365 from the **first listed** date, as the spreadsheet XNPV / XIRR
//! functions do: the flow on date `d_i` is discounted over `(d_i - d_0) / 365` years, `d_0`
//! being `dates[0]` whether or not it is the earliest. A flow dated before `d_0` has a negative
//! exponent, i.e. it is compounded forward to `d_0` (some spreadsheets reject such dates instead).

use rust_decimal::Decimal;
use rust_decimal::prelude::{FromPrimitive, ToPrimitive};
use time::Date;

use super::FinanceError;
use super::irr::{self, IrrOutcome, Series};
use super::rate::growth_factor;

/// Days per year of the actual/365 day count.
pub const DAYS_PER_YEAR: i64 = 365;

/// Days from the first listed date to each date, after checking the lengths match.
fn day_offsets(flows: &[Decimal], dates: &[Date]) -> Result<Vec<i64>, FinanceError> {
    if flows.len() != dates.len() {
        return Err(FinanceError::DatesMismatch { flows: flows.len(), dates: dates.len() });
    }
    let first = *dates.first().ok_or(FinanceError::EmptyFlows)?;
    // The spreadsheet XNPV and XIRR refuse a date before the first (from memory): time 0 is the
    // first listed date, and a flow before it would be compounded forward unnoticed.
    if let Some((index, &date)) = dates.iter().enumerate().find(|&(_, &d)| d < first) {
        return Err(FinanceError::DateBeforeFirst { index, date, first });
    }
    Ok(dates.iter().map(|&d| (d - first).whole_days()).collect())
}

/// `cf * g^-k` for a whole number of years `k`, in Decimal (`g = 1 + r`), or `None` on overflow.
///
/// The power is taken of whichever of `g` and `1 / g` is at least 1, so that it never loses
/// significant digits to Decimal's fixed 28 decimal places.
fn discount_whole_years(cf: Decimal, g: Decimal, k: i64) -> Option<Decimal> {
    let grows = g >= Decimal::ONE;
    let base = if grows { g } else { Decimal::ONE.checked_div(g)? };
    let mut power = Decimal::ONE;
    let mut b = base;
    let mut e = k.unsigned_abs();
    // Binary exponentiation: about 2 log2(k) rounded products.
    while e > 0 {
        if e & 1 == 1 {
            power = power.checked_mul(b)?;
        }
        e >>= 1;
        if e > 0 {
            b = b.checked_mul(b)?;
        }
    }
    // g^-k is base^-k when g >= 1 and base^k when g < 1.
    if (k > 0) == grows { cf.checked_div(power) } else { cf.checked_mul(power) }
}

/// Net present value of dated cash flows, at an annual rate, on the actual/365 day count.
///
/// Formula: `XNPV = sum_i CF_i / (1 + annual_rate)^((d_i - d_0) / 365)`, where `d_0 = dates[0]`
/// is the **first listed** date (not necessarily the earliest). Sign convention as
/// [`crate::finance::npv`]: outflows negative.
///
/// Precision: a flow a whole number of 365-day years from `d_0` is discounted in `Decimal`
/// exactly like [`crate::finance::npv`] does, so flows 365 days apart give the same result as
/// `npv`; other flows use an f64 discount factor (about 16 significant digits).
///
/// # Errors
/// - [`FinanceError::DatesMismatch`] if `flows` and `dates` differ in length;
/// - [`FinanceError::EmptyFlows`] if both are empty;
/// - [`FinanceError::RateOutOfRange`] if `annual_rate` is not finite or is `<= -1`;
/// - [`FinanceError::NotRepresentable`] if a present value exceeds `Decimal`'s range.
///
/// # Example
/// ```
/// use pilot_ledger::finance::xnpv;
/// use rust_decimal::Decimal;
/// use time::macros::date;
///
/// // Spreadsheet XNPV function documentation example: 9 %, result 2,086.65 (rounded).
/// let flows = [-10_000, 2_750, 4_250, 3_250, 2_750].map(Decimal::from);
/// let dates = [
///     date!(2008 - 01 - 01), date!(2008 - 03 - 01), date!(2008 - 10 - 30),
///     date!(2009 - 02 - 15), date!(2009 - 04 - 01),
/// ];
/// assert_eq!(xnpv(0.09, &flows, &dates)?.round_dp(2), "2086.65".parse::<Decimal>().unwrap());
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// The spreadsheet XNPV function (actual/365 from the first date), as documented in the public
/// function reference of the common spreadsheet applications.
pub fn xnpv(annual_rate: f64, flows: &[Decimal], dates: &[Date]) -> Result<Decimal, FinanceError> {
    let days = day_offsets(flows, dates)?;
    let g = growth_factor(annual_rate)?;
    let log_g = annual_rate.ln_1p();
    let mut total = Decimal::ZERO;
    for (&cf, &d) in flows.iter().zip(&days) {
        let exact = if d % DAYS_PER_YEAR == 0 { discount_whole_years(cf, g, d / DAYS_PER_YEAR) } else { None };
        let value = match exact {
            Some(v) => v,
            None if cf.is_zero() => Decimal::ZERO,
            None => {
                // Fractional years (or a Decimal overflow): f64 discount factor.
                let years = d as f64 / DAYS_PER_YEAR as f64;
                let v = cf.to_f64().ok_or(FinanceError::NotRepresentable)? * (-years * log_g).exp();
                Decimal::from_f64(v).ok_or(FinanceError::NotRepresentable)?
            }
        };
        total = total.checked_add(value).ok_or(FinanceError::NotRepresentable)?;
    }
    Ok(total)
}

/// Every annual rate that makes [`xnpv`] zero, with the same conventions as
/// [`crate::finance::irr`]: roots ascending, `chosen` by the rule of [`IrrOutcome`], `ambiguous`
/// when the flows, ordered by date, change sign more than once.
///
/// Flows on the same date are added together first.
///
/// # Errors
/// - [`FinanceError::DatesMismatch`], [`FinanceError::EmptyFlows`] as for [`xnpv`];
/// - [`FinanceError::NoSignChange`] if the flows (summed per date) never change sign;
/// - [`FinanceError::NoConvergence`] if a root search reaches
///   [`crate::finance::IRR_MAX_ITERATIONS`] (not expected).
///
/// # Example
/// ```
/// use pilot_ledger::finance::xirr_outcome;
/// use rust_decimal::Decimal;
/// use time::macros::date;
///
/// let flows = [-1000, 1100].map(Decimal::from);
/// let dates = [date!(2021 - 01 - 01), date!(2022 - 01 - 01)]; // 365 days apart
/// let outcome = xirr_outcome(&flows, &dates)?;
/// assert!(!outcome.ambiguous);
/// assert!((outcome.roots[0] - 0.1).abs() < 1e-14);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// The spreadsheet XIRR function; root isolation by Descartes' rule of signs for generalized
/// polynomials (Laguerre) and Rolle's theorem, as described in [`crate::finance::irr`].
pub fn xirr_outcome(flows: &[Decimal], dates: &[Date]) -> Result<IrrOutcome, FinanceError> {
    let days = day_offsets(flows, dates)?;
    // Merge flows on the same day exactly, in Decimal, ordered by day.
    let mut by_day: Vec<(i64, Decimal)> = days.into_iter().zip(flows.iter().copied()).collect();
    by_day.sort_by_key(|&(d, _)| d);
    let mut merged: Vec<(i64, Decimal)> = Vec::with_capacity(by_day.len());
    for (d, cf) in by_day {
        match merged.last_mut() {
            Some((last, sum)) if *last == d => {
                *sum = sum.checked_add(cf).ok_or(FinanceError::NotRepresentable)?;
            }
            _ => merged.push((d, cf)),
        }
    }
    let changes = irr::sign_changes(merged.iter().map(|(_, cf)| irr::decimal_sign(cf)));
    if changes == 0 {
        return Err(FinanceError::NoSignChange);
    }
    irr::outcome_of(&DatedSeries::new(&merged)?, changes)
}

/// Internal rate of return of dated cash flows: the annual rate that makes [`xnpv`] zero.
///
/// Formula: `sum_i CF_i / (1 + r)^((d_i - d_0) / 365) = 0`, actual/365 from the first listed
/// date. The root is bracketed and solved as in [`crate::finance::irr`] (no starting guess is
/// needed). With several sign changes this returns the `chosen` root of [`xirr_outcome`] and
/// fails otherwise; call [`xirr_outcome`] to see every root.
///
/// # Errors
/// - [`FinanceError::DatesMismatch`], [`FinanceError::EmptyFlows`] as for [`xnpv`];
/// - [`FinanceError::NoSignChange`] if the flows never change sign;
/// - [`FinanceError::NoRealRoot`] if they change sign several times but no rate gives zero;
/// - [`FinanceError::AmbiguousRate`] (with every root) if several rates give zero and none is
///   the unique investment-like root;
/// - [`FinanceError::NoConvergence`] (not expected).
///
/// # Example
/// ```
/// use pilot_ledger::finance::xirr;
/// use rust_decimal::Decimal;
/// use time::macros::date;
///
/// // Spreadsheet XIRR function documentation example: 0.373362535 (37.34 %); the exact root
/// // is 0.37336253352 (the spreadsheet stops iterating at its own, looser, tolerance).
/// let flows = [-10_000, 2_750, 4_250, 3_250, 2_750].map(Decimal::from);
/// let dates = [
///     date!(2008 - 01 - 01), date!(2008 - 03 - 01), date!(2008 - 10 - 30),
///     date!(2009 - 02 - 15), date!(2009 - 04 - 01),
/// ];
/// assert!((xirr(&flows, &dates)? - 0.373_362_535).abs() < 5e-9);
/// # Ok::<(), pilot_ledger::finance::FinanceError>(())
/// ```
///
/// # Reference
/// The spreadsheet XIRR function, as documented in the public function reference of the common
/// spreadsheet applications.
pub fn xirr(flows: &[Decimal], dates: &[Date]) -> Result<f64, FinanceError> {
    let outcome = xirr_outcome(flows, dates)?;
    match (outcome.chosen, outcome.roots.is_empty()) {
        (Some(rate), _) => Ok(rate),
        (None, true) => Err(FinanceError::NoRealRoot),
        (None, false) => Err(FinanceError::AmbiguousRate { roots: outcome.roots }),
    }
}

/// The XNPV equation as a generalized polynomial `sum_i c_i x^(e_i)` in `x = 1 / (1 + r)`, with
/// real exponents `e_i` (years since the earliest flow, ascending, distinct; `e_0 = 0`) and
/// coefficients scaled so the largest is 1.
struct DatedSeries {
    terms: Vec<(f64, f64)>,
}

impl DatedSeries {
    fn new(merged: &[(i64, Decimal)]) -> Result<Self, FinanceError> {
        let mut terms = Vec::with_capacity(merged.len());
        for &(d, cf) in merged.iter().filter(|(_, cf)| !cf.is_zero()) {
            let c = irr::decimal_to_f64(&cf).ok_or(FinanceError::NotRepresentable)?;
            terms.push((c, d as f64 / DAYS_PER_YEAR as f64));
        }
        Ok(Self::normalized(terms))
    }

    /// Shifts exponents so the lowest is 0 (multiplying by a positive power of x changes no
    /// positive root) and scales the coefficients so the largest is 1.
    fn normalized(mut terms: Vec<(f64, f64)>) -> Self {
        let e0 = terms.first().map_or(0.0, |t| t.1);
        let scale = terms.iter().fold(0.0_f64, |m, t| m.max(t.0.abs()));
        for t in &mut terms {
            t.1 -= e0;
            if scale > 0.0 {
                t.0 /= scale;
            }
        }
        Self { terms }
    }

    fn top(&self) -> f64 {
        self.terms.last().map_or(0.0, |t| t.1)
    }
}

impl Series for DatedSeries {
    fn eval(&self, s: f64) -> (f64, f64) {
        // x^e = exp(e ln x): one logarithm per evaluation instead of a power per term, and the
        // derivative term c e x^(e - 1) = c e x^e / x from the same power.
        let (mut g, mut dg) = (0.0, 0.0);
        if s <= 1.0 {
            // sum c x^e with x = s; the e = 0 term has no derivative.
            if s <= 0.0 {
                return (self.terms.first().map_or(0.0, |t| t.0), 0.0);
            }
            let ln = s.ln();
            for &(c, e) in &self.terms {
                let p = c * (e * ln).exp();
                g += p;
                dg += e * p;
            }
            (g, dg / s)
        } else {
            // Future-value form in y = 1 + r = 2 - s: sum c y^(E - e), dy/ds = -1.
            let y = 2.0 - s;
            let top = self.top();
            if y <= 0.0 {
                return (self.terms.last().map_or(0.0, |t| t.0), 0.0);
            }
            let ln = y.ln();
            for &(c, e) in &self.terms {
                let k = top - e;
                let p = c * (k * ln).exp();
                g += p;
                dg -= k * p;
            }
            (g, dg / y)
        }
    }

    fn magnitude(&self, s: f64) -> f64 {
        let top = self.top();
        self.terms
            .iter()
            .map(|&(c, e)| {
                let p = if s <= 1.0 { s.powf(e) } else { (2.0 - s).powf(top - e) };
                c.abs() * p
            })
            .sum()
    }

    fn ends(&self) -> (f64, f64) {
        let first = self.terms.first().map_or(0.0, |t| t.0);
        let last = self.terms.last().map_or(0.0, |t| t.0);
        (first, last)
    }

    fn sign_changes(&self) -> usize {
        irr::sign_changes(self.terms.iter().map(|t| if t.0 > 0.0 { 1 } else { -1 }))
    }

    fn from_terms(mut terms: Vec<(f64, f64)>) -> Self {
        // A term below f64's range next to the largest is no term.
        terms.retain(|t| t.0 != 0.0);
        Self::normalized(terms)
    }

    fn terms(&self) -> impl Iterator<Item = (f64, f64)> {
        self.terms.iter().copied()
    }
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
    fn first_listed_date_not_earliest() {
        // The second flow is a year *before* the first listed date: refused, as the spreadsheet
        // functions do (from memory), instead of being compounded forward unnoticed.
        let flows = [d(100), d(-100)];
        let dates = [date!(2022 - 01 - 01), date!(2021 - 01 - 01)];
        let refused = FinanceError::DateBeforeFirst { index: 1, date: dates[1], first: dates[0] };
        assert_eq!(xnpv(0.1, &flows, &dates), Err(refused.clone()));
        assert_eq!(xirr(&flows, &dates), Err(refused));
        // Positive control: the same flows in date order.
        let dates = [date!(2021 - 01 - 01), date!(2022 - 01 - 01)];
        assert_eq!(xnpv(0.1, &flows, &dates).unwrap(), d(100) - d(100) / "1.1".parse::<Decimal>().unwrap());
    }

    #[test]
    fn whole_years_are_exact() {
        let flows = [d(-1000), d(1100), d(1210)];
        let dates = [date!(2021 - 01 - 01), date!(2022 - 01 - 01), date!(2023 - 01 - 01)];
        assert_eq!(xnpv(0.1, &flows, &dates).unwrap(), d(1000));
        // Negative rate, compounding side: 1 / 0.5 = 2.
        assert_eq!(xnpv(-0.5, &flows, &dates).unwrap(), d(-1000 + 2200 + 4840));
    }

    #[test]
    fn errors() {
        let dates = [date!(2021 - 01 - 01)];
        assert_eq!(xnpv(0.1, &[d(1), d(2)], &dates), Err(FinanceError::DatesMismatch { flows: 2, dates: 1 }));
        assert_eq!(xnpv(0.1, &[], &[]), Err(FinanceError::EmptyFlows));
        assert_eq!(xirr(&[d(1)], &dates), Err(FinanceError::NoSignChange));
        // Opposite flows on the same day cancel: nothing left to solve.
        let same = [date!(2021 - 01 - 01), date!(2021 - 01 - 01)];
        assert_eq!(xirr(&[d(-5), d(5)], &same), Err(FinanceError::NoSignChange));
    }

    #[test]
    fn xirr_multiple_roots() {
        // Lorie-Savage pump flows a 365-day year apart: roots 25 % and 400 %. NPV goes from -
        // (below 25 %) to + to - (above 400 %), so 400 % is the unique investment-like root.
        let flows = [d(-1600), d(10_000), d(-10_000)];
        let dates = [date!(2021 - 01 - 01), date!(2022 - 01 - 01), date!(2023 - 01 - 01)];
        let o = xirr_outcome(&flows, &dates).unwrap();
        assert!(o.ambiguous);
        assert_eq!(o.roots.len(), 2);
        assert!((o.roots[0] - 0.25).abs() < 1e-12 && (o.roots[1] - 4.0).abs() < 1e-11);
        assert!((xirr(&flows, &dates).unwrap() - 4.0).abs() < 1e-11);
        // No real root.
        let none = [d(-100), d(250), d(-200)];
        assert_eq!(xirr(&none, &dates), Err(FinanceError::NoRealRoot));
        // Roots 10 %, 20 %, 30 % with two investment-like ones: no defensible single rate.
        let three = [d(-1000), d(3600), d(-4310), d(1716)];
        let mut yearly = dates.to_vec();
        yearly.push(date!(2024 - 01 - 01));
        match xirr(&three, &yearly) {
            Err(FinanceError::AmbiguousRate { roots }) => {
                assert_eq!(roots.len(), 3);
                assert!((roots[1] - 0.2).abs() < 1e-12);
            }
            other => panic!("{other:?}"),
        }
    }
}
