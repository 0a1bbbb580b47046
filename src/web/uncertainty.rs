//! The uncertainty section of a case page: tornado, break-even, Monte Carlo histogram,
//! chance-weighted and calibrated NPV with the factors and their sources.

use super::chart::{Columns, RangeBars, RangeInput};
use crate::domain::{Calibration, CaseUncertainty, DriverKind, Money, NumberFormat, Percent, quantity};
use crate::finance::linear::BreakEven;
use rust_decimal::Decimal;
use rust_decimal::prelude::{FromPrimitive, ToPrimitive};

/// One driver's line in the break-even and calibration tables.
pub struct DriverLine {
    pub(super) label: String,
    pub(super) unit: String,
    pub(super) low: String,
    pub(super) likely: String,
    pub(super) high: String,
    pub(super) npv_low: Money,
    pub(super) npv_high: Money,
    pub(super) break_even: String,
    pub(super) kind: &'static str,
    pub(super) factor: String,
    pub(super) raw: String,
    pub(super) evidence: String,
}

/// Everything the section shows, formatted.
pub struct UncertaintyView {
    pub(super) npv: Money,
    pub(super) chance_weighted: Money,
    pub(super) success_probability: String,
    pub(super) calibrated: Money,
    pub(super) calibration_sources: String,
    pub(super) mean: Money,
    pub(super) std_dev: Money,
    pub(super) p10: Money,
    pub(super) p50: Money,
    pub(super) p90: Money,
    pub(super) chance_npv_below_zero: String,
    pub(super) seed: u64,
    pub(super) trials: usize,
    pub(super) drivers: Vec<DriverLine>,
    pub(super) tornado: RangeBars,
    pub(super) histogram: Columns,
}

fn m(v: f64) -> Money {
    Money(Decimal::from_f64(v).unwrap_or_default())
}

fn break_even_text(b: BreakEven, likely: Decimal, unit: &str) -> String {
    match b {
        BreakEven::At(q) => {
            let q = Decimal::from_f64(q).unwrap_or_default().round_dp(1);
            let share = if likely > Decimal::ZERO {
                format!(" ({} of likely)", Percent((q / likely).to_f64().unwrap_or(0.0)))
            } else {
                String::new()
            };
            format!("{} {unit} / year{share}", quantity(&q))
        }
        BreakEven::NotNeeded => "not needed: NPV stays positive without this driver".into(),
        BreakEven::Never => "none: the driver is worth nothing per unit".into(),
    }
}

impl UncertaintyView {
    /// Format `u` for the page.
    pub fn new(u: &CaseUncertainty, success_probability: Decimal, calibration: &Calibration, currency: &str) -> Self {
        let kinds: Vec<DriverKind> = u.drivers.iter().map(|d| d.kind).collect();
        let drivers = u
            .drivers
            .iter()
            .map(|d| DriverLine {
                label: d.label.clone(),
                unit: d.unit.clone(),
                low: quantity(&d.low),
                likely: quantity(&d.likely),
                high: quantity(&d.high),
                npv_low: Money(d.npv_low),
                npv_high: Money(d.npv_high),
                break_even: break_even_text(d.break_even, d.likely, &d.unit),
                kind: d.kind.label(),
                factor: NumberFormat::current().export(&format!("{:.3}", d.factor.factor)),
                raw: d.factor.raw.map_or_else(|| "no evidence".into(), |r| Percent(r).to_string()),
                evidence: if d.factor.drivers == 0 {
                    "no measured driver of this kind yet".into()
                } else {
                    format!(
                        "{} driver(s), {} driver-months; weight on evidence {}",
                        d.factor.drivers,
                        d.factor.months,
                        Percent(d.factor.credibility)
                    )
                },
            })
            .collect();
        let npv = u.npv.to_f64().unwrap_or(0.0);
        let tornado = RangeBars::new(
            u.tornado
                .iter()
                .map(|&i| {
                    let d = &u.drivers[i];
                    let (lo, hi) = (d.npv_low.to_f64().unwrap_or(0.0), d.npv_high.to_f64().unwrap_or(0.0));
                    RangeInput {
                        label: d.label.chars().take(28).collect(),
                        from: lo,
                        to: hi,
                        whisker: None,
                        split: Some((npv, "bar-high")),
                        class: "bar-low",
                        note: format!("{} to {}", m(lo.round()), m(hi.round())),
                    }
                })
                .collect(),
            npv,
            "NPV at likely",
            format!(
                "NPV in {currency} with each driver at its low (left part) and high (right part) quantity, the others at likely; widest swing first{}.",
                u.tornado.first().map(|&i| format!(": {}", u.drivers[i].label)).unwrap_or_default()
            ),
        );
        let s = &u.simulation;
        let histogram = Columns::histogram(
            &s.histogram.iter().map(|b| (b.from, b.to, b.count)).collect::<Vec<_>>(),
            format!(
                "{} trials of NPV in {currency}: 10th percentile {}, median {}, 90th percentile {}; {} of trials below zero (shaded differently).",
                crate::domain::count(&s.trials),
                m(s.p10.round()),
                m(s.p50.round()),
                m(s.p90.round()),
                Percent(s.chance_npv_below_zero)
            ),
        );
        let used: Vec<&str> = {
            let mut k: Vec<&str> = kinds.iter().map(|k| k.label()).collect();
            k.dedup();
            k
        };
        let calibration_sources = if calibration.zones.is_empty() {
            "No measuring or closed zone has ledger entries yet: every factor is 1.".into()
        } else {
            format!(
                "Factors per kind of driver ({}) from the ledgers of {} against their baselines.",
                used.join(", "),
                calibration.zones.join(", ")
            )
        };
        Self {
            npv: Money(u.npv),
            chance_weighted: Money(u.chance_weighted),
            success_probability: crate::domain::pct(&success_probability),
            calibrated: Money(u.calibrated),
            calibration_sources,
            mean: m(s.mean),
            std_dev: m(s.std_dev),
            p10: m(s.p10),
            p50: m(s.p50),
            p90: m(s.p90),
            chance_npv_below_zero: Percent(s.chance_npv_below_zero).to_string(),
            seed: s.seed,
            trials: s.trials,
            drivers,
            tornado,
            histogram,
        }
    }
}
