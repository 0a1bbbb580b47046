//! The answer around the solver: eligibility, the polish step, the reasons a candidate is not
//! in the plan, the delay figures and the committed zones' overruns.

use super::rules::{self, check, quarters, validate, value_at};
use super::simple::{earliest, simple_plan};
use super::{Delay, Instance, NotPlanned, Placement, Roadmap, RoadmapError, milp, search};
use rust_decimal::Decimal;
use rust_decimal::prelude::FromPrimitive;
use std::time::{Duration, Instant};

/// Solve: the optimal plan within `limit`, the simple plan and the delay figures.
///
/// Every plan returned keeps every rule in exact cents ([`check`]). `proven` says the solver
/// proved the optimum; otherwise `bound` is the solver's proven bound or, without one, the value
/// of the LP relaxation, an upper bound on every plan.
pub fn roadmap(inst: &Instance, limit: Duration) -> Result<Roadmap, RoadmapError> {
    roadmap_with(inst, limit, Solvers::Both)
}

/// Which solvers [`roadmap`] runs: our search, then the MILP if the search could not prove its
/// plan; or one of them alone, so that the tests hold each against brute force.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Solvers {
    Both,
    #[cfg_attr(not(test), allow(dead_code))]
    SearchOnly,
    #[cfg_attr(not(test), allow(dead_code))]
    MilpOnly,
}

pub(super) fn roadmap_with(inst: &Instance, limit: Duration, solvers: Solvers) -> Result<Roadmap, RoadmapError> {
    let order = validate(inst)?;
    let eligible = eligibility(inst, &order);
    let mut simple = simple_plan(inst);
    let simple_starts: Vec<Option<i32>> = simple.placements.iter().map(Placement::start_month).collect();
    let solved = solve(inst, &eligible, &simple_starts, limit, solvers);
    let mut proven = solved.proven;
    let mut starts = solved.starts;
    if starts_value(inst, &starts) < starts_value(inst, &simple_starts) {
        starts = simple_starts;
        proven = false;
    }
    let before = starts_value(inst, &starts);
    polish(inst, &mut starts, &eligible);
    let value = starts_value(inst, &starts);
    // The polish only finds more where the float solver's proof fell short.
    proven &= value == before;
    let bound = if proven {
        value
    } else {
        let relaxed = || milp::relaxation_bound(inst, &eligible, Instant::now() + RELAX_TIME);
        solved.bound.or_else(relaxed).and_then(cents_up).unwrap_or_else(|| trivial_bound(inst)).max(value)
    };
    let placements = place(inst, &starts);
    let delays = delays(inst, &starts);
    simple.bound = bound;
    Ok(Roadmap {
        optimal: super::Plan { placements, value, bound, proven },
        simple,
        delays,
        overruns: rules::overruns(inst),
    })
}

/// Our exact search first, for the backend's share of the time (`milp::SEARCH_SHARE`), then,
/// if it cannot prove its plan, the MILP from its plan for the rest of the time, with the
/// smaller of the two bounds.
fn solve(inst: &Instance, eligible: &[bool], warm: &[Option<i32>], limit: Duration, solvers: Solvers) -> milp::Solved {
    let start = Instant::now();
    let share = if solvers == Solvers::Both { limit / milp::SEARCH_SHARE } else { limit };
    let found = match solvers {
        Solvers::MilpOnly => None,
        _ => search::search(inst, eligible, warm, start + share),
    };
    let Some(found) = found else {
        return milp::solve(inst, eligible, warm, start + limit);
    };
    if found.proven || solvers == Solvers::SearchOnly {
        let proven = found.proven;
        return milp::Solved { starts: found.starts, proven, bound: Some(found.bound) };
    }
    let better = if starts_value(inst, &found.starts) > starts_value(inst, warm) { &found.starts } else { warm };
    let mut solved = milp::solve(inst, eligible, better, start + limit);
    if starts_value(inst, &solved.starts) < starts_value(inst, &found.starts) {
        solved.starts = found.starts;
        solved.proven = false;
    }
    solved.bound = Some(solved.bound.map_or(found.bound, |b| b.min(found.bound)));
    solved
}

/// Time for the LP relaxation that bounds a plan the solver did not prove (small and quick).
const RELAX_TIME: Duration = Duration::from_secs(2);

/// A float bound as money rounded up to the cent, with room for the solver's float error.
fn cents_up(b: f64) -> Option<Decimal> {
    let slack = b.abs() * 1e-9 + 1e-6;
    Decimal::from_f64(((b + slack) * 100.0).ceil() / 100.0).map(|d| d.round_dp(2))
}

/// The candidates the MILP may plan: a positive value, no need outside the plan, and every
/// zone it needs committed or itself eligible (`order` puts needs first).
fn eligibility(inst: &Instance, order: &[usize]) -> Vec<bool> {
    let mut ok = vec![false; inst.zones.len()];
    for &i in order {
        let z = &inst.zones[i];
        ok[i] = z.committed_start.is_none()
            && z.value > Decimal::ZERO
            && z.needs_outside.is_empty()
            && z.needs.iter().all(|a| inst.zones[*a].committed_start.is_some() || ok[*a]);
    }
    ok
}

/// Insert every eligible candidate that still fits at some quarter, at its earliest, larger
/// values first, until none does.
fn polish(inst: &Instance, starts: &mut [Option<i32>], eligible: &[bool]) {
    let mut order: Vec<usize> = (0..inst.zones.len()).filter(|i| eligible[*i]).collect();
    order.sort_by(|a, b| inst.zones[*b].value.cmp(&inst.zones[*a].value));
    loop {
        let mut changed = false;
        for &i in &order {
            let needs_started = inst.zones[i].needs.iter().all(|a| starts[*a].is_some());
            if starts[i].is_none() && needs_started && earliest(inst, starts, i).is_ok() {
                changed = true;
            }
        }
        if !changed {
            return;
        }
    }
}

/// The placement of every zone, with the reason for each candidate not in the plan.
fn place(inst: &Instance, starts: &[Option<i32>]) -> Vec<Placement> {
    let mut trial = starts.to_vec();
    (0..inst.zones.len())
        .map(|i| {
            let z = &inst.zones[i];
            if let Some(start) = z.committed_start {
                return Placement::Committed { start };
            }
            if let Some(s) = starts[i] {
                return Placement::Planned { quarter: (s / 3) as u32 };
            }
            if z.value <= Decimal::ZERO {
                return Placement::NotPlanned(NotPlanned::NotPositive);
            }
            if let Some(code) = z.needs_outside.first() {
                return Placement::NotPlanned(NotPlanned::Needs(code.clone()));
            }
            if let Some(a) = z.needs.iter().find(|a| starts[**a].is_none()) {
                return Placement::NotPlanned(NotPlanned::Needs(inst.zones[*a].code.clone()));
            }
            let rules = (0..quarters(inst))
                .filter_map(|q| {
                    trial[i] = Some(3 * q as i32);
                    let broken = check(inst, &trial).err();
                    trial[i] = None;
                    broken
                })
                .collect();
            Placement::NotPlanned(NotPlanned::Blocked(rules))
        })
        .collect()
}

/// Per planned candidate: the cost of a quarter's delay and the rule that stops it one quarter
/// earlier with the others' starts kept.
fn delays(inst: &Instance, starts: &[Option<i32>]) -> Vec<Option<Delay>> {
    let mut trial = starts.to_vec();
    (0..inst.zones.len())
        .map(|i| {
            if inst.zones[i].committed_start.is_some() {
                return None;
            }
            let q = (starts[i]? / 3) as u32;
            let cost = value_at(inst, i, q) - value_at(inst, i, q + 1);
            let earlier = if q == 0 {
                None
            } else {
                trial[i] = Some(3 * (q as i32 - 1));
                let broken = check(inst, &trial).err();
                trial[i] = starts[i];
                broken
            };
            Some(Delay { cost, earlier })
        })
        .collect()
}

/// Total value of the planned candidates.
pub(super) fn plan_value(inst: &Instance, placements: &[Placement]) -> Decimal {
    placements
        .iter()
        .enumerate()
        .filter_map(|(i, p)| match p {
            Placement::Planned { quarter } => Some(value_at(inst, i, *quarter)),
            _ => None,
        })
        .sum()
}

fn starts_value(inst: &Instance, starts: &[Option<i32>]) -> Decimal {
    inst.zones
        .iter()
        .enumerate()
        .filter(|(_, z)| z.committed_start.is_none())
        .filter_map(|(i, _)| starts.get(i).copied().flatten().map(|s| value_at(inst, i, (s / 3) as u32)))
        .sum()
}

/// An upper bound needing no solver: every positive candidate at its best quarter.
pub(super) fn trivial_bound(inst: &Instance) -> Decimal {
    let last = quarters(inst).saturating_sub(1);
    inst.zones
        .iter()
        .enumerate()
        .filter(|(_, z)| z.committed_start.is_none() && z.value > Decimal::ZERO)
        .map(|(i, _)| value_at(inst, i, 0).max(value_at(inst, i, last)))
        .sum()
}
