//! A zone's baseline history: every month is measured against the baseline in force in it.
//!
//! The history is the zone's approved and superseded case versions in approval order; the
//! last is the current baseline. Each is in force from its `in_force_from` month (set at
//! approval: the approval month, or the month after the latest booked month when that is
//! later; a version loaded from a scenario file from its own start month) until the next
//! one's; the first also covers every month before it. For a month `m` the baseline in force
//! is the last one in approval order whose month is at or before `m`.
//!
//! Items keep an identity across versions (`item_uid`, migration 0011). An entry booked against
//! any version's driver counts for that driver's identity; the expected money of a month comes
//! from the driver with the same identity in the baseline in force in that month (nothing when
//! that baseline does not have it: an item added later, or retired). Months run from the
//! earliest start month of the history through the end of the current baseline's horizon.

use super::realized::{driver_benefits, month_index};
use super::{CaseParts, DriverKind, Month, SiteSettings, finance_input};
use crate::finance::{FinanceError, build_schedule};
use rust_decimal::Decimal;
use std::collections::HashMap;

/// One baseline of the history with the month from which it is in force.
#[derive(Debug, Clone, PartialEq)]
pub struct InForce {
    /// First month it is in force (the first baseline also covers every earlier month).
    pub from: Month,
    /// The version with its items and identities.
    pub case: CaseParts,
}

/// A zone's baselines in approval order, never empty; the last is the current one.
#[derive(Debug, Clone, PartialEq)]
pub struct BaselineHistory {
    baselines: Vec<InForce>,
}

/// One item identity's expected money per month of the history.
#[derive(Debug, Clone)]
pub struct ExpectedDriver {
    /// Identity.
    pub uid: i64,
    /// Its driver id in the latest baseline that has it (the current one, unless retired).
    pub id: i64,
    /// Label, unit and kind as that baseline has them.
    pub label: String,
    /// Unit.
    pub unit: String,
    /// Kind.
    pub kind: DriverKind,
    /// Whether the current baseline still has it.
    pub current: bool,
    /// Expected money per month.
    pub expected: Vec<Decimal>,
}

/// Expectations month by month from the baseline in force in each month.
#[derive(Debug, Clone)]
pub struct Expected {
    /// First month.
    pub start: Month,
    /// Per identity: the current baseline's drivers in order, then retired ones.
    pub drivers: Vec<ExpectedDriver>,
    /// Expected net cash flow per month (pre-tax).
    pub net: Vec<Decimal>,
    /// Expected spending per month (negative).
    pub spending: Vec<Decimal>,
    /// Driver id of any version -> index in `drivers`.
    by_driver: HashMap<i64, usize>,
}

impl Expected {
    /// The index in `drivers` of the identity of a driver of any version in the history.
    pub fn line_of(&self, driver_id: i64) -> Option<usize> {
        self.by_driver.get(&driver_id).copied()
    }
}

/// The settings a baseline's figures use: those of its approval.
pub fn settings_of(case: &CaseParts, today: &SiteSettings) -> SiteSettings {
    case.frozen.as_ref().map_or_else(|| today.clone(), |f| f.apply(today))
}

impl BaselineHistory {
    /// The history from baselines in approval order; `None` when there is none.
    pub fn new(baselines: Vec<InForce>) -> Option<Self> {
        (!baselines.is_empty()).then_some(Self { baselines })
    }

    /// Every baseline in approval order.
    pub fn baselines(&self) -> &[InForce] {
        &self.baselines
    }

    /// The current baseline.
    pub fn current(&self) -> &CaseParts {
        // `new` refuses an empty list.
        &self.baselines[self.baselines.len() - 1].case
    }

    /// The baseline in force in month `m`.
    pub fn in_force(&self, m: Month) -> &InForce {
        self.baselines.iter().rev().find(|b| b.from <= m).unwrap_or(&self.baselines[0])
    }

    /// The first month of the history: the earliest start month.
    pub fn start(&self) -> Month {
        self.baselines.iter().map(|b| b.case.header.start_month).min().unwrap_or(self.current().header.start_month)
    }

    /// Months from [`Self::start`] through the end of the current baseline's horizon.
    pub fn months(&self) -> usize {
        let c = &self.current().header;
        month_index(self.start(), c.start_month).unwrap_or(0) + c.horizon_months as usize
    }

    /// The label of a cost item of any version, by id.
    pub fn cost_label(&self, cost_id: i64) -> Option<&str> {
        self.baselines.iter().rev().flat_map(|b| &b.case.costs).find(|(id, _)| *id == cost_id).map(|(_, c)| &*c.label)
    }

    /// Each month's expectations from the baseline in force, each baseline at the settings of
    /// its approval (`today` for what it did not freeze).
    pub fn expected(&self, today: &SiteSettings) -> Result<Expected, FinanceError> {
        let (start, n) = (self.start(), self.months());
        let mut drivers: Vec<ExpectedDriver> = Vec::new();
        let mut by_uid: HashMap<i64, usize> = HashMap::new();
        let mut by_driver = HashMap::new();
        // The current baseline first, then older ones: each identity named by its latest version.
        for (age, b) in self.baselines.iter().rev().enumerate() {
            for ((id, d), uid) in b.case.drivers.iter().zip(&b.case.driver_uids) {
                let line = *by_uid.entry(*uid).or_insert_with(|| {
                    drivers.push(ExpectedDriver {
                        uid: *uid,
                        id: *id,
                        label: d.label.clone(),
                        unit: d.unit.clone(),
                        kind: d.kind,
                        current: age == 0,
                        expected: vec![Decimal::ZERO; n],
                    });
                    drivers.len() - 1
                });
                by_driver.insert(*id, line);
            }
        }
        let (mut net, mut spending) = (vec![Decimal::ZERO; n], vec![Decimal::ZERO; n]);
        for (k, b) in self.baselines.iter().enumerate() {
            let c = &b.case;
            // Months where this baseline is in force, as indexes into its own schedule.
            let months: Vec<(usize, usize)> = (0..n)
                .filter_map(|i| {
                    let m = start.plus(i as u32);
                    let mine = std::ptr::eq(self.in_force(m), &self.baselines[k]);
                    month_index(c.header.start_month, m)
                        .filter(|j| mine && *j < c.header.horizon_months as usize)
                        .map(|j| (i, j))
                })
                .collect();
            if months.is_empty() {
                continue;
            }
            let hurdle = settings_of(c, today).hurdle_f64();
            let costs = || c.costs.iter().map(|(_, x)| x);
            let all =
                build_schedule(&finance_input(&c.header, costs(), c.drivers.iter().map(|(_, d)| d), None), hurdle)?
                    .net_flows();
            let spend = build_schedule(&finance_input(&c.header, costs(), [], None), hurdle)?.net_flows();
            for &(i, j) in &months {
                net[i] = all[j];
                spending[i] = spend[j];
            }
            for ((_, d), uid) in c.drivers.iter().zip(&c.driver_uids) {
                let benefits = driver_benefits(&c.header, d, hurdle)?;
                let line = &mut drivers[by_uid[uid]];
                for &(i, j) in &months {
                    line.expected[i] = benefits[j];
                }
            }
        }
        Ok(Expected { start, drivers, net, spending, by_driver })
    }
}

#[cfg(test)]
mod tests {
    #![expect(clippy::unwrap_used)]
    use super::*;
    use crate::domain::{CaseHeader, NewBenefitDriver};

    fn m(text: &str) -> Month {
        Month::parse(text).unwrap()
    }

    /// A 12-month case from 2025-01, live from month 0, with drivers `(id, uid, likely a year)`
    /// at 1 EUR a unit: `likely / 12` EUR a month (hand arithmetic).
    fn version(id: i64, from: &str, drivers: &[(i64, i64, i64)]) -> InForce {
        let header = CaseHeader {
            label: format!("v{id}"),
            horizon_months: 12,
            start_month: m("2025-01"),
            go_live_offset: 0,
            ramp_up_months: 0,
            success_probability: Decimal::ONE,
        };
        let driver = |likely: i64| NewBenefitDriver {
            label: "A".into(),
            kind: DriverKind::Energy,
            unit: "kWh".into(),
            qty_low: Decimal::ONE,
            qty_likely: Decimal::from(likely),
            qty_high: Decimal::from(likely * 2),
            unit_value: Decimal::ONE,
            escalation: Decimal::ZERO,
            expert_hours: None,
            source: String::new(),
        };
        InForce {
            from: m(from),
            case: CaseParts {
                id,
                version: id as u32,
                baseline: false,
                header,
                costs: Vec::new(),
                drivers: drivers.iter().map(|&(i, _, likely)| (i, driver(likely))).collect(),
                frozen: None,
                cost_uids: Vec::new(),
                driver_uids: drivers.iter().map(|&(_, uid, _)| uid).collect(),
            },
        }
    }

    #[test]
    fn each_month_takes_the_baseline_in_force_and_identities_join_versions() {
        // v1 from the start: A 1,200 a year = 100 a month. v2 from 2025-04 (A 2,400 = 200, B 120
        // = 10), replaced in the same month by v3 (A 3,600 = 300): v2 is never in force.
        let h = BaselineHistory::new(vec![
            version(1, "2025-03", &[(1, 10, 1200)]),
            version(2, "2025-04", &[(2, 10, 2400), (3, 20, 120)]),
            version(3, "2025-04", &[(4, 10, 3600)]),
        ])
        .unwrap();
        // The first baseline also covers months before its own month.
        assert_eq!(h.in_force(m("2024-12")).case.id, 1);
        assert_eq!(h.in_force(m("2025-03")).case.id, 1);
        assert_eq!(h.in_force(m("2025-04")).case.id, 3);
        let site = SiteSettings {
            plant_name: "Test works".into(),
            currency: "EUR".into(),
            hurdle_rate: Decimal::new(1, 1),
            tax_rate: None,
            depreciation_years: None,
            default_horizon_months: 12,
            expert_multiplier: Decimal::ONE,
            number_format: crate::domain::NumberFormat::default(),
            one_person_approval: false,
            time_zone: crate::domain::PlantZone::default(),
            introduction_capacity: 2,
        };
        let e = h.expected(&site).unwrap();
        assert_eq!((e.start, e.net.len()), (m("2025-01"), 12));
        let a = &e.drivers[0];
        assert_eq!((a.uid, a.id, a.current), (10, 4, true));
        let a_expected: Vec<Decimal> = [100; 3].into_iter().chain([300; 9]).map(Decimal::from).collect();
        assert_eq!(a.expected.iter().map(|d| d.normalize()).collect::<Vec<_>>(), a_expected);
        let b = &e.drivers[1];
        assert_eq!((b.uid, b.id, b.current), (20, 3, false));
        assert!(b.expected.iter().all(|d| d.is_zero()), "never in force: B expects nothing");
        assert_eq!([1, 2, 3, 4].map(|id| e.line_of(id)), [Some(0), Some(0), Some(1), Some(0)]);
        assert_eq!(e.line_of(99), None);
        // Net flows follow the same months (no costs: the benefits alone).
        assert_eq!(e.net[2].normalize(), Decimal::from(100));
        assert_eq!(e.net[3].normalize(), Decimal::from(300));
    }
}
