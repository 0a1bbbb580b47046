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
