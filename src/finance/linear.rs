//! NPV as a straight line in each driver's quantity: the base for tornado, break-even and
//! Monte Carlo without rebuilding the schedule.
//!
//! # Why it is linear
//! In [`super::schedule`] a driver's benefit in month `t` is `q / 12 * unit_value * ramp(t) *
//! escalation(t)`: proportional to its yearly quantity `q`. Tax is `-rate * taxable` with the
//! benefit inside `taxable` and a symmetric shield, so after tax each unit keeps `1 - rate` of
//! its value. Hence
//!
//! `NPV(q_1 .. q_n) = base + sum_i q_i * unit_pv_i`
//!
//! where `base` is the NPV with every quantity at zero (the costs, and their tax shields) and
//! `unit_pv_i` the present value of one unit a year of driver `i`. The only departure from the
//! schedule is its rounding of each month to [`super::schedule::MONEY_DP`] places: at most half
//! a unit of the fourth decimal a month, under a cent over 200 months.

use rust_decimal::Decimal;
use rust_decimal::prelude::{FromPrimitive, ToPrimitive};

use super::FinanceError;
use super::rate::monthly_from_annual;
use super::schedule::{CaseInput, build_schedule, validate};

/// A case's NPV as `base + sum_i q_i * unit_pv_i`, in f64 (see the [module docs](self)).
#[derive(Debug, Clone, PartialEq)]
pub struct LinearNpv {
    /// NPV with every driver quantity at zero.
    pub base: f64,
    /// Present value of one unit a year of each driver, in the case's driver order.
    pub unit_pv: Vec<f64>,
    /// The case's own quantities (each driver's `quantity_per_year`).
    pub quantities: Vec<f64>,
}

/// One driver's line in a tornado chart: NPV with that driver at its low and at its high
/// quantity, every other driver at its own quantity.
#[derive(Debug, Clone, PartialEq)]
pub struct Swing {
    /// Index of the driver in the case.
    pub driver: usize,
    /// NPV with this driver at its low quantity.
    pub npv_low: f64,
    /// NPV with this driver at its high quantity.
    pub npv_high: f64,
}

impl Swing {
    /// `|npv_high - npv_low|`, the length of the bar.
    pub fn width(&self) -> f64 {
        (self.npv_high - self.npv_low).abs()
    }
}

/// Where a driver's quantity makes NPV zero, the others at their own quantities.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum BreakEven {
    /// NPV is zero at this yearly quantity (zero or more).
    At(f64),
    /// NPV stays positive even with none of this driver: the case does not depend on it.
    NotNeeded,
    /// The driver is worth nothing per unit (unit value zero, or no month with benefits), so no
    /// quantity changes NPV.
    Never,
}

impl LinearNpv {
    /// Build the model of `case` at an annual hurdle rate.
    ///
    /// `base` comes from [`build_schedule`] with every quantity at zero (so it is exactly the
    /// schedule's NPV of the costs); `unit_pv_i = sum_t unit_value / 12 * ramp(t) *
    /// (1 + e)^floor((t - go_live) / 12) * (1 - tax rate) / (1 + r_m)^t`, following the schedule's
    /// conventions.
    ///
    /// # Errors
    /// As [`build_schedule`] (bad inputs, rate out of range).
    ///
    /// # Example
    /// ```
    /// use pilot_ledger::finance::linear::LinearNpv;
    /// use pilot_ledger::finance::schedule::{CaseInput, CostInput, CostTiming, DriverInput};
    /// use rust_decimal::Decimal;
    ///
    /// // 1,000 now; 12 units a year worth 10 each from month 1, two months, at 0 %.
    /// let case = CaseInput {
    ///     horizon_months: 3,
    ///     go_live_month: 1,
    ///     ramp_up_months: 0,
    ///     costs: vec![CostInput { label: "kit".into(), amount: Decimal::from(1000),
    ///                             timing: CostTiming::OneOff { month: 0 }, capex: true }],
    ///     drivers: vec![DriverInput { label: "scrap".into(), quantity_per_year: Decimal::from(12),
    ///                                 unit_value: Decimal::from(10), escalation: Decimal::ZERO }],
    ///     tax: None,
    /// };
    /// let m = LinearNpv::new(&case, 0.0)?;
    /// assert_eq!(m.base, -1000.0);
    /// assert!((m.unit_pv[0] - 10.0 / 12.0 * 2.0).abs() < 1e-12);
    /// assert!((m.npv() - -980.0).abs() < 1e-9);
    /// # Ok::<(), pilot_ledger::finance::FinanceError>(())
    /// ```
    pub fn new(case: &CaseInput, annual_hurdle: f64) -> Result<Self, FinanceError> {
        let mut costs_only = case.clone();
        for d in &mut costs_only.drivers {
            d.quantity_per_year = Decimal::ZERO;
        }
        // The case as given (quantities included); the costs-only schedule checks the rest.
        validate(case)?;
        let base_schedule = build_schedule(&costs_only, annual_hurdle)?;
        let base = base_schedule.rows.last().map_or(Decimal::ZERO, |r| r.cumulative_discounted);
        let v = 1.0 / (1.0 + monthly_from_annual(annual_hurdle)?);
        let keep = 1.0 - case.tax.as_ref().map_or(0.0, |t| t.rate.to_f64().unwrap_or(0.0));
        let ramp = f64::from(case.ramp_up_months) + 1.0;
        let unit_pv = case
            .drivers
            .iter()
            .map(|d| {
                let g = 1.0 + d.escalation.to_f64().unwrap_or(0.0);
                let monthly = d.unit_value.to_f64().unwrap_or(0.0) / 12.0 * keep;
                let mut discount = v.powi(i32::try_from(case.go_live_month).unwrap_or(i32::MAX));
                let mut sum = 0.0;
                for k in 0..case.horizon_months.saturating_sub(case.go_live_month) {
                    let r = if k < case.ramp_up_months { f64::from(k + 1) / ramp } else { 1.0 };
                    sum += monthly * r * g.powi(i32::try_from(k / 12).unwrap_or(i32::MAX)) * discount;
                    discount *= v;
                }
                sum
            })
            .collect();
        Ok(Self {
            base: base.to_f64().unwrap_or(0.0),
            unit_pv,
            quantities: case.drivers.iter().map(|d| d.quantity_per_year.to_f64().unwrap_or(0.0)).collect(),
        })
    }

    /// NPV at the given quantities (one per driver; missing ones count as zero).
    pub fn npv_at(&self, quantities: &[f64]) -> f64 {
        self.base + self.unit_pv.iter().zip(quantities).map(|(u, q)| u * q).sum::<f64>()
    }

    /// NPV at the case's own quantities.
    pub fn npv(&self) -> f64 {
        self.npv_at(&self.quantities)
    }

    /// NPV with each driver's quantity multiplied by its factor (calibration).
    pub fn npv_scaled(&self, factors: &[f64]) -> f64 {
        let q: Vec<f64> = self.quantities.iter().zip(factors).map(|(q, f)| q * f).collect();
        self.npv_at(&q)
    }

    /// The tornado: each driver's NPV at its `low` and `high` quantity, the others at their own,
    /// widest swing first (ties in driver order).
    pub fn tornado(&self, low: &[f64], high: &[f64]) -> Vec<Swing> {
        let at = self.npv();
        let mut swings: Vec<Swing> = (0..self.unit_pv.len())
            .map(|i| {
                let shift = |q: f64| at + self.unit_pv[i] * (q - self.quantities[i]);
                Swing {
                    driver: i,
                    npv_low: shift(low.get(i).copied().unwrap_or(0.0)),
                    npv_high: shift(high.get(i).copied().unwrap_or(0.0)),
                }
            })
            .collect();
        swings.sort_by(|a, b| b.width().total_cmp(&a.width()).then(a.driver.cmp(&b.driver)));
        swings
    }

    /// The yearly quantity of driver `i` at which NPV is zero, the others at their own:
    /// `q* = q_i - NPV / unit_pv_i`, solved directly because NPV is linear in `q_i`.
    pub fn break_even(&self, i: usize) -> BreakEven {
        let u = self.unit_pv.get(i).copied().unwrap_or(0.0);
        if u <= 0.0 || !u.is_finite() {
            return BreakEven::Never;
        }
        let q = self.quantities[i] - self.npv() / u;
        if q < 0.0 { BreakEven::NotNeeded } else { BreakEven::At(q) }
    }
}

/// An f64 figure as `Decimal` for display, saturating at `Decimal`'s range.
pub fn to_decimal(v: f64) -> Decimal {
    Decimal::from_f64(v).unwrap_or(if v > 0.0 {
        Decimal::MAX
    } else if v < 0.0 {
        Decimal::MIN
    } else {
        Decimal::ZERO
    })
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;
    use crate::finance::schedule::{CostInput, CostTiming, DriverInput, TaxInput};
    use proptest::prelude::*;

    fn dec(v: f64) -> Decimal {
        Decimal::from_f64(v).unwrap().round_dp(4)
    }

    fn case(go_live: u32, ramp: u32, horizon: u32, drivers: &[(f64, f64, f64)], tax: bool) -> CaseInput {
        CaseInput {
            horizon_months: horizon,
            go_live_month: go_live.min(horizon - 1),
            ramp_up_months: ramp,
            costs: vec![
                CostInput {
                    label: "kit".into(),
                    amount: Decimal::from(50_000),
                    timing: CostTiming::OneOff { month: 0 },
                    capex: true,
                },
                CostInput {
                    label: "licence".into(),
                    amount: Decimal::from(6_000),
                    timing: CostTiming::Recurring { from_month: 1, escalation: dec(0.03) },
                    capex: false,
                },
            ],
            drivers: drivers
                .iter()
                .enumerate()
                .map(|(i, &(q, u, e))| DriverInput {
                    label: format!("d{i}"),
                    quantity_per_year: dec(q),
                    unit_value: dec(u),
                    escalation: dec(e),
                })
                .collect(),
            tax: tax.then(|| TaxInput { rate: Decimal::new(25, 2), depreciation_years: 5 }),
        }
    }

    fn schedule_npv(c: &CaseInput, hurdle: f64) -> f64 {
        build_schedule(c, hurdle).unwrap().rows.last().unwrap().cumulative_discounted.to_f64().unwrap()
    }

    proptest! {
        // The straight line agrees with the full schedule, before and after tax, within the
        // schedule's rounding of each month (below a cent over the horizon).
        #[test]
        fn linear_model_matches_the_schedule(
            go_live in 0u32..12, ramp in 0u32..8, horizon in 12u32..120,
            drivers in prop::collection::vec((0.0f64..50_000.0, 0.0f64..40.0, -0.05f64..0.1), 1..4),
            tax in any::<bool>(), hurdle in 0.0f64..0.25,
        ) {
            let c = case(go_live, ramp, horizon, &drivers, tax);
            let m = LinearNpv::new(&c, hurdle).unwrap();
            prop_assert!((m.npv() - schedule_npv(&c, hurdle)).abs() < 0.01);
        }
    }

    #[test]
    fn break_even_gives_zero_npv_in_the_full_schedule() {
        let c = case(3, 2, 60, &[(20_000.0, 1.0, 0.02), (3_000.0, 4.0, 0.0)], true);
        let m = LinearNpv::new(&c, 0.09).unwrap();
        for i in 0..2 {
            let BreakEven::At(q) = m.break_even(i) else { panic!("driver {i} should have a break-even") };
            let mut at = c.clone();
            // Decimal keeps 28 digits, so the quantity survives the round trip.
            at.drivers[i].quantity_per_year = Decimal::from_f64(q).unwrap();
            assert!(schedule_npv(&at, 0.09).abs() < 0.01, "driver {i}: NPV at break-even");
        }
    }

    #[test]
    fn break_even_edge_cases_and_tornado_order() {
        let c = case(0, 0, 24, &[(1_000_000.0, 1.0, 0.0), (10.0, 0.0, 0.0), (100.0, 1.0, 0.0)], false);
        let m = LinearNpv::new(&c, 0.05).unwrap();
        assert_eq!(m.break_even(1), BreakEven::Never);
        // The first driver alone carries the case; the third is not needed.
        assert_eq!(m.break_even(2), BreakEven::NotNeeded);
        let t = m.tornado(&[500_000.0, 0.0, 50.0], &[1_500_000.0, 20.0, 150.0]);
        assert_eq!(t.iter().map(|s| s.driver).collect::<Vec<_>>(), [0, 2, 1]);
        assert_eq!(t[2].width(), 0.0);
        assert!((t[0].npv_high - t[0].npv_low - 1_000_000.0 * m.unit_pv[0]).abs() < 1e-6);
    }
}
