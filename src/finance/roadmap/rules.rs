//! The plan's rules in exact integers: spending in cents per plan year, introductions per plan
//! month, per area, and the needs; the checker every answer passes before it is returned.

use super::{Instance, Placement, PlanZone, RoadmapError, Rule};
use rust_decimal::prelude::{FromPrimitive, ToPrimitive};
use rust_decimal::{Decimal, MathematicalOps, RoundingStrategy};

/// Longest plan the solver takes, in years (the MILP has `4Y` quarters per candidate).
pub(super) const MAX_YEARS: u32 = 20;

/// Plan months `12Y`.
pub(super) fn months(inst: &Instance) -> i64 {
    12 * i64::from(inst.years)
}

/// Quarters `4Y`.
pub(super) fn quarters(inst: &Instance) -> u32 {
    4 * inst.years
}

/// The start month a zone has in `starts`: a committed zone's own, whatever `starts` says.
pub(super) fn start_of(z: &PlanZone, given: Option<&Option<i32>>) -> Option<i32> {
    match z.committed_start {
        Some(s) => Some(s),
        None => given.copied().flatten(),
    }
}

/// Check the instance before solving: every inconsistency names the field or zone.
/// Returns the zones in an order where each comes after every zone it needs.
pub(super) fn validate(inst: &Instance) -> Result<Vec<usize>, RoadmapError> {
    let bad = |m: String| Err(RoadmapError::Invalid(m));
    if inst.years == 0 || inst.years > MAX_YEARS {
        return bad(format!("years must be between 1 and {MAX_YEARS}, not {}", inst.years));
    }
    if inst.budgets.len() != inst.years as usize {
        return bad(format!("the plan has {} years but {} yearly capital budgets", inst.years, inst.budgets.len()));
    }
    if let Some(y) = inst.budgets.iter().position(|b| *b < 0) {
        return bad(format!("the yearly capital budget of plan year {} is negative", y + 1));
    }
    if inst.capacity == 0 {
        return bad("introductions at a time must be at least 1".into());
    }
    if !inst.monthly_rate.is_finite() || inst.monthly_rate <= -1.0 {
        return bad(format!("the monthly rate {} is not a rate above -100%", inst.monthly_rate));
    }
    let n = inst.zones.len();
    for z in &inst.zones {
        if let Some(a) = z.needs.iter().find(|a| **a >= n) {
            return bad(format!("zone {} needs zone number {a}, which is not in the plan", z.code));
        }
        if z.one_off.iter().any(|(_, c)| *c < 0) {
            return bad(format!("zone {} has a negative one-off amount", z.code));
        }
        if let Some(s) = z.committed_start
            && s.unsigned_abs() > 12 * 1000
        {
            return bad(format!("zone {} has a start month {s} too far from the plan", z.code));
        }
    }
    // Kahn's order over the needs; what is left over lies on a cycle.
    let mut missing: Vec<usize> = inst.zones.iter().map(|z| z.needs.len()).collect();
    let mut dependents: Vec<Vec<usize>> = vec![Vec::new(); n];
    for (i, z) in inst.zones.iter().enumerate() {
        for a in &z.needs {
            dependents[*a].push(i);
        }
    }
    let mut order: Vec<usize> = (0..n).filter(|i| missing[*i] == 0).collect();
    let mut next = 0;
    while next < order.len() {
        let a = order[next];
        next += 1;
        for d in &dependents[a] {
            missing[*d] -= 1;
            if missing[*d] == 0 {
                order.push(*d);
            }
        }
    }
    if order.len() < n {
        let cycle: Vec<&str> = (0..n).filter(|i| missing[*i] > 0).map(|i| inst.zones[i].code.as_str()).collect();
        return bad(format!("the needs form a cycle among zones {}", cycle.join(", ")));
    }
    Ok(order)
}

/// What the zones placed so far use: cents per plan year, introductions per plan month and per
/// area and month.
#[derive(Debug, Clone)]
pub(super) struct Load {
    pub(super) spend: Vec<i64>,
    pub(super) intro: Vec<u32>,
    /// Per area (index into [`Areas`]) per month.
    pub(super) area: Vec<Vec<u32>>,
}

/// The distinct non-empty areas, in order of first appearance.
pub(super) struct Areas(pub(super) Vec<String>);

impl Areas {
    pub(super) fn of(inst: &Instance) -> Self {
        let mut v: Vec<String> = Vec::new();
        for z in &inst.zones {
            if !z.area.is_empty() && !v.contains(&z.area) {
                v.push(z.area.clone());
            }
        }
        Self(v)
    }

    pub(super) fn index(&self, area: &str) -> Option<usize> {
        if area.is_empty() { None } else { self.0.iter().position(|a| a == area) }
    }
}

impl Load {
    pub(super) fn new(inst: &Instance, areas: &Areas) -> Self {
        let m = months(inst) as usize;
        Self { spend: vec![0; inst.years as usize], intro: vec![0; m], area: vec![vec![0; m]; areas.0.len()] }
    }

    /// Add (`sign` 1) or remove (`sign` -1) zone `i` started in month `start`.
    pub(super) fn add(&mut self, inst: &Instance, areas: &Areas, i: usize, start: i32, sign: i64) {
        let Some(z) = inst.zones.get(i) else { return };
        for (y, c) in one_off_by_year(inst, i, start).iter().enumerate() {
            self.spend[y] = self.spend[y].saturating_add(sign * c);
        }
        let a = areas.index(&z.area);
        for m in window_months(inst, z, start) {
            let m = m as usize;
            self.intro[m] = self.intro[m].saturating_add_signed(sign as i32);
            if let Some(a) = a {
                self.area[a][m] = self.area[a][m].saturating_add_signed(sign as i32);
            }
        }
    }
}

/// The plan months `0 .. 12Y` inside the introduction window of `z` started in `start`.
pub(super) fn window_months(inst: &Instance, z: &PlanZone, start: i32) -> std::ops::Range<i64> {
    let from = i64::from(start).max(0);
    let to = (i64::from(start) + i64::from(z.window())).min(months(inst));
    from..to.max(from)
}

/// The committed zones' load and the candidates' load of `starts`, kept apart: the candidates
/// get only the room the committed zones leave.
pub(super) fn loads(inst: &Instance, areas: &Areas, starts: &[Option<i32>]) -> (Load, Load) {
    let mut committed = Load::new(inst, areas);
    let mut cand = Load::new(inst, areas);
    for (i, z) in inst.zones.iter().enumerate() {
        match (z.committed_start, starts.get(i).copied().flatten()) {
            (Some(s), _) => committed.add(inst, areas, i, s, 1),
            (None, Some(s)) => cand.add(inst, areas, i, s, 1),
            (None, None) => {}
        }
    }
    (committed, cand)
}

/// The room the committed zones leave under a limit: none once they alone exceed it.
pub(super) fn room(limit: i64, committed: i64) -> i64 {
    (limit - committed).max(0)
}

/// The room the committed zones leave the candidates: per budget row (cents, see
/// [`budget_rows`]), per plan month, and per area and month under the one-per-area rule (empty
/// without it).
pub(super) struct Rooms {
    pub(super) budget: Vec<i64>,
    pub(super) months: Vec<i64>,
    pub(super) area: Vec<Vec<i64>>,
}

impl Rooms {
    pub(super) fn of(inst: &Instance, areas: &Areas) -> Self {
        let (committed, none) = loads(inst, areas, &[]);
        let budget = budget_rows(inst, &committed, &none).iter().map(|(b, c, _)| room(*b, *c)).collect();
        let months = committed.intro.iter().map(|c| room(i64::from(inst.capacity), i64::from(*c))).collect();
        let area = if inst.one_per_area {
            committed.area.iter().map(|a| a.iter().map(|c| room(1, i64::from(*c))).collect()).collect()
        } else {
            Vec::new()
        };
        Self { budget, months, area }
    }
}

/// The quarters each eligible candidate could start in alone, beside the committed zones: the
/// zones it needs can be live by then (a candidate it needs at its own first such quarter), its
/// cents fit every budget row's room, and every month of its window has room. Only integers,
/// so a solver that leaves the other starts out stays exact. Indexed by zone; empty for a zone
/// not eligible; `order` puts every zone after the zones it needs.
pub(super) fn lone_starts(
    inst: &Instance,
    eligible: &[bool],
    order: &[usize],
    rooms: &Rooms,
    areas: &Areas,
) -> Vec<Vec<u32>> {
    let mut out: Vec<Vec<u32>> = vec![Vec::new(); inst.zones.len()];
    // Earliest month each zone can be live: committed at its own, a candidate at its first
    // start plus its window.
    let mut live_from: Vec<Option<i64>> =
        inst.zones.iter().map(|z| z.committed_start.map(|s| i64::from(s) + i64::from(z.window()))).collect();
    for &i in order {
        let z = &inst.zones[i];
        if z.committed_start.is_some() || !eligible.get(i).copied().unwrap_or(false) {
            continue;
        }
        let area = areas.index(&z.area).filter(|_| inst.one_per_area);
        for q in 0..quarters(inst) {
            let m = 3 * i64::from(q);
            if z.needs.iter().any(|a| live_from[*a].is_none_or(|l| l > m)) {
                continue;
            }
            let fits_budget = row_cents(inst, i, q).iter().zip(&rooms.budget).all(|(c, r)| c <= r);
            let fits_months = window_months(inst, z, 3 * q as i32)
                .all(|mm| rooms.months[mm as usize] > 0 && area.is_none_or(|a| rooms.area[a][mm as usize] > 0));
            if fits_budget && fits_months {
                if out[i].is_empty() {
                    live_from[i] = Some(m + i64::from(z.window()));
                }
                out[i].push(q);
            }
        }
    }
    out
}

/// Cents of a start per budget row (cumulative with carry-over).
pub(super) fn row_cents(inst: &Instance, zone: usize, quarter: u32) -> Vec<i64> {
    let by_year = one_off_by_year(inst, zone, 3 * quarter as i32);
    let mut acc = 0i64;
    by_year
        .iter()
        .map(|c| {
            if inst.carry_over {
                acc = acc.saturating_add(*c);
                acc
            } else {
                *c
            }
        })
        .collect()
}

/// The budget rows: per plan year, or cumulative over years `0..=y` with carry-over; each is
/// (limit, committed spending, candidates' spending).
pub(super) fn budget_rows(inst: &Instance, committed: &Load, cand: &Load) -> Vec<(i64, i64, i64)> {
    let mut rows = Vec::with_capacity(inst.budgets.len());
    let (mut b, mut c, mut k) = (0i64, 0i64, 0i64);
    for y in 0..inst.budgets.len() {
        let by = inst.budgets[y];
        let cy = committed.spend.get(y).copied().unwrap_or(0);
        let ky = cand.spend.get(y).copied().unwrap_or(0);
        if inst.carry_over {
            b = b.saturating_add(by);
            c = c.saturating_add(cy);
            k = k.saturating_add(ky);
            rows.push((b, c, k));
        } else {
            rows.push((by, cy, ky));
        }
    }
    rows
}

/// Check every rule for these start months (relative to month 0, `None` when not started),
/// independently of the solver: the first rule broken, if any, in the order needs (by zone),
/// budget (by plan year), capacity (by month), area (by month).
///
/// Committed zones are taken at their own start months whatever `starts` says, and their own
/// overruns (see [`super::Roadmap::overruns`]) are not the plan's: a candidate may use only the
/// room they leave, none in a year or month they alone overrun.
pub fn check(inst: &Instance, starts: &[Option<i32>]) -> Result<(), Rule> {
    check_needs(inst, starts)?;
    let areas = Areas::of(inst);
    let (committed, cand) = loads(inst, &areas, starts);
    for (y, (limit, c, k)) in budget_rows(inst, &committed, &cand).into_iter().enumerate() {
        let r = room(limit, c);
        if k > r {
            return Err(Rule::Budget { year: y as u32, over: k - r });
        }
    }
    let cap = i64::from(inst.capacity);
    for m in 0..cand.intro.len() {
        if i64::from(cand.intro[m]) > room(cap, i64::from(committed.intro[m])) {
            return Err(Rule::Capacity { month: m as i32 });
        }
    }
    if inst.one_per_area {
        for m in 0..cand.intro.len() {
            for a in 0..areas.0.len() {
                if i64::from(cand.area[a][m]) > room(1, i64::from(committed.area[a][m])) {
                    return Err(Rule::Area { month: m as i32 });
                }
            }
        }
    }
    Ok(())
}

/// The needs of every started candidate: each zone it needs started and live by its start.
fn check_needs(inst: &Instance, starts: &[Option<i32>]) -> Result<(), Rule> {
    for (i, z) in inst.zones.iter().enumerate() {
        if z.committed_start.is_some() {
            continue;
        }
        let Some(s) = starts.get(i).copied().flatten() else { continue };
        if let Some(code) = z.needs_outside.first() {
            return Err(Rule::Needs(code.clone()));
        }
        for a in &z.needs {
            let Some(za) = inst.zones.get(*a) else { continue };
            let live = start_of(za, starts.get(*a)).map(|sa| i64::from(sa) + i64::from(za.window()));
            if live.is_none_or(|l| i64::from(s) < l) {
                return Err(Rule::Needs(za.code.clone()));
            }
        }
    }
    Ok(())
}

/// Every rule the committed zones alone break: their budget and capacity overruns.
pub(super) fn overruns(inst: &Instance) -> Vec<Rule> {
    let areas = Areas::of(inst);
    let (committed, _) = loads(inst, &areas, &[]);
    let mut out = Vec::new();
    let none = Load::new(inst, &areas);
    for (y, (limit, c, _)) in budget_rows(inst, &committed, &none).into_iter().enumerate() {
        if c > limit {
            out.push(Rule::Budget { year: y as u32, over: c - limit });
        }
    }
    for (m, n) in committed.intro.iter().enumerate() {
        if *n > inst.capacity {
            out.push(Rule::Capacity { month: m as i32 });
        }
    }
    if inst.one_per_area {
        for m in 0..committed.intro.len() {
            if committed.area.iter().any(|a| a[m] > 1) {
                out.push(Rule::Area { month: m as i32 });
            }
        }
    }
    out
}

/// Spending in cents of each plan year by the zones as placed.
pub fn capital_use(inst: &Instance, placements: &[Placement]) -> Vec<i64> {
    let mut out = vec![0i64; inst.years as usize];
    for (i, p) in placements.iter().enumerate() {
        if let Some(s) = p.start_month() {
            for (y, c) in one_off_by_year(inst, i, s).iter().enumerate() {
                out[y] = out[y].saturating_add(*c);
            }
        }
    }
    out
}

/// Number of zones inside their introduction window in each plan month (`12Y` months).
pub fn introductions(inst: &Instance, placements: &[Placement]) -> Vec<u32> {
    let mut out = vec![0u32; months(inst) as usize];
    for (p, z) in placements.iter().zip(&inst.zones) {
        if let Some(s) = p.start_month() {
            for m in window_months(inst, z, s) {
                out[m as usize] += 1;
            }
        }
    }
    out
}

/// One zone's one-off cents per plan year when it starts in month `start`.
pub fn one_off_by_year(inst: &Instance, zone: usize, start: i32) -> Vec<i64> {
    let mut out = vec![0i64; inst.years as usize];
    let Some(z) = inst.zones.get(zone) else { return out };
    for (offset, cents) in &z.one_off {
        let m = i64::from(start) + i64::from(*offset);
        if (0..months(inst)).contains(&m) {
            let y = (m / 12) as usize;
            out[y] = out[y].saturating_add(*cents);
        }
    }
    out
}

/// `V_z (1 + r_m)^(-3q)`, money rounded to the cent.
pub fn value_at(inst: &Instance, zone: usize, quarter: u32) -> Decimal {
    let Some(z) = inst.zones.get(zone) else { return Decimal::ZERO };
    let exact = Decimal::from_f64(inst.monthly_rate)
        .and_then(|r| (Decimal::ONE + r).checked_powu(3 * u64::from(quarter)))
        .and_then(|f| z.value.checked_div(f));
    let v = exact.or_else(|| {
        // Beyond Decimal's range (an extreme rate or plan): the same formula in floats.
        let f = (1.0 + inst.monthly_rate).powi(-3 * quarter as i32);
        Decimal::from_f64(z.value.to_f64()? * f)
    });
    v.unwrap_or_default().round_dp_with_strategy(2, RoundingStrategy::MidpointAwayFromZero)
}
