//! A case's uncertainty: tornado, break-even, Monte Carlo, chance-weighted and calibrated NPV, all
//! from the straight-line NPV of [`crate::finance::linear`] (pre-tax, the headline view).

use super::{CaseHeader, DriverKind, NewBenefitDriver, NewCostItem, SiteSettings, finance_input};
use crate::finance::calibration::{Evidence, Factor, factor};
use crate::finance::linear::{BreakEven, LinearNpv, to_decimal};
use crate::finance::montecarlo::{Simulation, Triangular, simulate};
use crate::finance::{CaseMetrics, FinanceError};
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;
use std::collections::HashMap;

/// The seed used when none is given: fixed, so a page shows the same figures on every visit.
pub const DEFAULT_SEED: u64 = 20_261_202;

/// Monte Carlo settings: the seed is shown on every page and can be set.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Trials {
    /// Seed of the random streams.
    pub seed: u64,
    /// Number of trials.
    pub count: usize,
}

impl Default for Trials {
    fn default() -> Self {
        Self { seed: DEFAULT_SEED, count: crate::finance::montecarlo::DEFAULT_TRIALS }
    }
}

/// A Monte Carlo seed as typed: empty for [`DEFAULT_SEED`], else a whole number.
pub fn parse_seed(value: &str) -> Result<u64, String> {
    match value.trim() {
        "" => Ok(DEFAULT_SEED),
        s => super::read_whole(s, 0, u64::MAX),
    }
}

/// Calibration factors per driver kind, from the reference class of measured zones.
#[derive(Debug, Clone, Default)]
pub struct Calibration {
    by_kind: HashMap<DriverKind, Factor>,
    /// Zones whose ledgers gave evidence (codes).
    pub zones: Vec<String>,
}

impl Calibration {
    /// The factor for a kind ([`Factor::NONE`] without evidence).
    pub fn factor(&self, kind: DriverKind) -> Factor {
        self.by_kind.get(&kind).copied().unwrap_or(Factor::NONE)
    }
}

impl Calibration {
    /// Factors from the evidence of each kind, with the zones it came from.
    pub fn from_evidence(evidence: HashMap<DriverKind, Vec<Evidence>>, zones: Vec<String>) -> Self {
        Calibration { by_kind: evidence.into_iter().map(|(k, ev)| (k, factor(&ev))).collect(), zones }
    }
}

/// One driver's sensitivity figures.
#[derive(Debug, Clone)]
pub struct DriverFigures {
    /// Label.
    pub label: String,
    /// Kind.
    pub kind: DriverKind,
    /// Unit.
    pub unit: String,
    /// Low, likely and high yearly quantities.
    pub low: Decimal,
    /// Likely.
    pub likely: Decimal,
    /// High.
    pub high: Decimal,
    /// NPV with this driver at its low quantity, the others at likely.
    pub npv_low: Decimal,
    /// NPV with this driver at its high quantity.
    pub npv_high: Decimal,
    /// Yearly quantity for NPV = 0.
    pub break_even: BreakEven,
    /// Calibration applied to this driver.
    pub factor: Factor,
}

/// Everything the case page shows about uncertainty.
#[derive(Debug, Clone)]
pub struct CaseUncertainty {
    /// NPV at the likely quantities (the schedule's).
    pub npv: Decimal,
    /// `p * PV(benefits) - PV(costs)`.
    pub chance_weighted: Decimal,
    /// NPV with each driver's quantity times its kind's calibration factor.
    pub calibrated: Decimal,
    /// Per driver, in case order.
    pub drivers: Vec<DriverFigures>,
    /// Driver indices, widest NPV swing first.
    pub tornado: Vec<usize>,
    /// Monte Carlo of NPV.
    pub simulation: Simulation,
}

/// Chance-weighted NPV: costs are spent whatever happens, benefits arrive only if the pilot works,
/// with probability `p` (the case's chance the pilot works, `success_probability`):
/// `p * PV(benefits) - PV(costs)`. The expected value of the two outcomes (common practice in
/// staged R&D appraisal).
pub fn chance_weighted_npv(metrics: &CaseMetrics, success_probability: Decimal) -> Decimal {
    success_probability.saturating_mul(metrics.pv_benefits).saturating_sub(metrics.pv_costs)
}

/// Each driver's triangular range of yearly quantities (low, likely, high).
///
/// # Errors
/// [`FinanceError::InvalidInput`] when a driver's quantities are not `low <= likely <= high`.
pub fn quantity_ranges<'a>(
    drivers: impl Iterator<Item = &'a NewBenefitDriver>,
) -> Result<Vec<Triangular>, FinanceError> {
    let f = |d: &Decimal| d.to_f64().unwrap_or(0.0);
    drivers.map(|d| Triangular::new(f(&d.qty_low), f(&d.qty_likely), f(&d.qty_high))).collect()
}

/// Calibrated NPV: the exact `npv` shifted by what the kinds' calibration factors change on the
/// straight line, so factors of 1 give the NPV itself.
pub fn calibrated_npv(
    npv: Decimal,
    model: &LinearNpv,
    kinds: impl Iterator<Item = DriverKind>,
    calibration: &Calibration,
) -> Decimal {
    let factors: Vec<f64> = kinds.map(|k| calibration.factor(k).factor).collect();
    npv.saturating_add(to_decimal(model.npv_scaled(&factors) - model.npv()))
}

/// Compute a case's uncertainty figures (pre-tax).
pub fn case_uncertainty(
    header: &CaseHeader,
    costs: &[&NewCostItem],
    drivers: &[&NewBenefitDriver],
    site: &SiteSettings,
    metrics: &CaseMetrics,
    calibration: &Calibration,
    trials: Trials,
) -> Result<CaseUncertainty, FinanceError> {
    let input = finance_input(header, costs.iter().copied(), drivers.iter().copied(), None);
    let model = LinearNpv::new(&input, site.hurdle_f64())?;
    let f = |d: &Decimal| d.to_f64().unwrap_or(0.0);
    let lows: Vec<f64> = drivers.iter().map(|d| f(&d.qty_low)).collect();
    let highs: Vec<f64> = drivers.iter().map(|d| f(&d.qty_high)).collect();
    let ranges = quantity_ranges(drivers.iter().copied())?;
    let simulation = simulate(&model, &ranges, trials.count, trials.seed)?;
    let swings = model.tornado(&lows, &highs);
    let factors: Vec<Factor> = drivers.iter().map(|d| calibration.factor(d.kind)).collect();
    let npv = metrics.npv;
    let out_drivers = drivers
        .iter()
        .enumerate()
        .map(|(i, d)| {
            let swing = swings.iter().find(|s| s.driver == i);
            DriverFigures {
                label: d.label.clone(),
                kind: d.kind,
                unit: d.unit.clone(),
                low: d.qty_low,
                likely: d.qty_likely,
                high: d.qty_high,
                npv_low: to_decimal(swing.map_or(0.0, |s| s.npv_low)),
                npv_high: to_decimal(swing.map_or(0.0, |s| s.npv_high)),
                break_even: model.break_even(i),
                factor: factors[i],
            }
        })
        .collect();
    Ok(CaseUncertainty {
        npv,
        chance_weighted: chance_weighted_npv(metrics, header.success_probability),
        calibrated: calibrated_npv(npv, &model, drivers.iter().map(|d| d.kind), calibration),
        drivers: out_drivers,
        tornado: swings.iter().map(|s| s.driver).collect(),
        simulation,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_seed_is_digits_only() {
        assert_eq!(parse_seed(""), Ok(DEFAULT_SEED));
        assert_eq!(parse_seed("36"), Ok(36));
        assert_eq!(
            parse_seed("+36"),
            Err("\"+36\" is not a whole number from 0 to 18446744073709551615: enter digits only (no sign, grouping or \
                 decimals)"
                .into())
        );
    }
}
