//! The simple plan a person would make: by profitability index, each at its earliest quarter.

use super::rules::{check, quarters};
use super::{Instance, NotPlanned, Placement, Plan, Rule};
use rust_decimal::Decimal;
use std::cmp::Ordering;

/// The simple plan a person would make: the candidates with a positive value in order of
/// profitability index (`V_z` over the sum of all its one-off amounts; ties: larger `V_z`, then
/// code), each at the earliest quarter where every rule holds given the zones already placed; a
/// zone whose needs are not yet placed nor committed is skipped for good.
pub fn simple_plan(inst: &Instance) -> Plan {
    let mut starts: Vec<Option<i32>> = inst.zones.iter().map(|z| z.committed_start).collect();
    let mut placements: Vec<Placement> = inst
        .zones
        .iter()
        .map(|z| match z.committed_start {
            Some(start) => Placement::Committed { start },
            None => Placement::NotPlanned(NotPlanned::NotPositive),
        })
        .collect();
    for i in by_profitability(inst) {
        let z = &inst.zones[i];
        if let Some(code) = z.needs_outside.first() {
            placements[i] = Placement::NotPlanned(NotPlanned::Needs(code.clone()));
            continue;
        }
        let unplaced = z.needs.iter().find(|a| starts.get(**a).is_none_or(|s| s.is_none()));
        if let Some(a) = unplaced {
            let code = inst.zones.get(*a).map(|za| za.code.clone()).unwrap_or_default();
            placements[i] = Placement::NotPlanned(NotPlanned::Needs(code));
            continue;
        }
        placements[i] = match earliest(inst, &mut starts, i) {
            Ok(quarter) => Placement::Planned { quarter },
            Err(rules) => Placement::NotPlanned(NotPlanned::Blocked(rules)),
        };
    }
    let value = super::explain::plan_value(inst, &placements);
    Plan { placements, value, bound: super::explain::trivial_bound(inst).max(value), proven: false }
}

/// The positive candidates in the simple plan's order.
fn by_profitability(inst: &Instance) -> Vec<usize> {
    let mut order: Vec<(usize, Option<Decimal>)> = inst
        .zones
        .iter()
        .enumerate()
        .filter(|(_, z)| z.committed_start.is_none() && z.value > Decimal::ZERO)
        .map(|(i, z)| {
            let cents: i64 = z.one_off.iter().map(|(_, c)| *c).fold(0, i64::saturating_add);
            // No one-off at all: an unbounded index, first in line.
            let index = if cents > 0 { z.value.checked_div(Decimal::new(cents, 2)) } else { None };
            (i, index)
        })
        .collect();
    order.sort_by(|(a, pa), (b, pb)| {
        let by_index = match (pa, pb) {
            (None, None) => Ordering::Equal,
            (None, Some(_)) => Ordering::Less,
            (Some(_), None) => Ordering::Greater,
            (Some(x), Some(y)) => y.cmp(x),
        };
        let (za, zb) = (&inst.zones[*a], &inst.zones[*b]);
        by_index.then(zb.value.cmp(&za.value)).then(za.code.cmp(&zb.code))
    });
    order.into_iter().map(|(i, _)| i).collect()
}

/// The earliest quarter where zone `i` keeps every rule given `starts` (and leaves it placed
/// there), or per quarter the first rule it breaks.
pub(super) fn earliest(inst: &Instance, starts: &mut [Option<i32>], i: usize) -> Result<u32, Vec<Rule>> {
    let mut rules = Vec::new();
    for q in 0..quarters(inst) {
        starts[i] = Some(3 * q as i32);
        match check(inst, starts) {
            Ok(()) => return Ok(q),
            Err(rule) => rules.push(rule),
        }
    }
    starts[i] = None;
    Err(rules)
}
