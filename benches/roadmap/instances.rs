//! The roadmap benchmark's instances: generated from fixed seeds, so that every run (and the
//! Python side, which reads them as JSON) solves the same plans.
//!
//! Two families, each at 10, 15, 20, 30, 60, 100 and 200 candidates over 3 plan years (12
//! quarters):
//! - **realistic**: zones spread over areas (one introduction at a time per area), about one
//!   candidate in six needing an earlier one, one needing a zone that is in no plan, three
//!   committed zones (one started before the plan), values and one-offs spread like the demo
//!   plant's cases (`seed/demo-plant.json`: one-offs of 30,000 to 110,000 in two to four
//!   amounts over the first five months, go-live after 3 to 6 months, 2 to 4 months of ramp-up,
//!   about one candidate in ten not worth doing), unspent budget carried forward; budgets and
//!   the capacity (2 introductions at a time up to 20 candidates, a tenth of the candidates
//!   beyond) both bind.
//! - **adversarial**: no areas, dependencies or committed zones, values within 1 % of each
//!   other (the linear relaxation cannot tell the plans apart), yearly budgets without carry-over
//!   and a capacity of 3, both binding.
//!
//! # JSON format (`target/roadmap-bench/<name>.json`, read by `benches/roadmap_scipy.py`)
//! ```text
//! {
//!   "format": "pilot-ledger roadmap instance", "version": 1,
//!   "name": "realistic-10", "family": "realistic", "seed": 1010,
//!   "years": 3,                      // quarters 0 .. 4 * years - 1, quarter q starts in month 3q
//!   "budgets_cents": [..],           // one per plan year, integer cents
//!   "carry_over": true,              // budgets cumulative (years 0..=y) instead of per year
//!   "capacity": 2,                   // zones inside their introduction window in any month
//!   "one_per_area": true,            // at most one per non-empty area in any month
//!   "monthly_rate": 0.00720..,       // 9 % a year; a start in quarter q is worth value / (1 + rate)^(3q)
//!   "zones": [{
//!     "code": "Z003", "area": "press shop",  // area "" = none
//!     "needs": [0, 2],               // indices into zones: live before this one starts
//!     "needs_outside": ["X1"],       // needs a zone in no plan: never planned
//!     "committed_start": -4,         // start month of a committed zone, null for a candidate
//!     "value": "48250.00",           // V_z, money as a decimal string
//!     "one_off_cents": [[0, 2900000], [2, 3400000]],  // [month offset from start, cents]
//!     "go_live": 5, "ramp_up": 4,    // window: months start .. start + go_live + max(ramp_up, 1) - 1
//!     "value_by_quarter": ["48250.00", "47221.60", ..]  // candidates: finance::roadmap::value_at
//!   }, ..]                           //   for q = 0 .. 4 * years - 1 (null for a committed zone)
//! }
//! ```
//! Each file is the exact [`Instance`] the Rust side solves (`to_json` writes every field), and
//! the objective's coefficients as the library computes them, so both sides maximise the same sum.

use pilot_ledger::finance::roadmap::{Instance, PlanZone, value_at};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rust_decimal::Decimal;
use serde_json::{Value, json};

/// Candidates per instance, in both families.
pub const SIZES: [usize; 7] = [10, 15, 20, 30, 60, 100, 200];
/// Plan years (12 quarters).
pub const YEARS: u32 = 3;
/// The demo plant's hurdle rate (9 % a year), as a monthly rate.
const ANNUAL_RATE: f64 = 0.09;

/// Area names of the realistic family (plain trade words); numbered beyond the list.
const AREAS: [&str; 8] =
    ["press shop", "body shop", "paint shop", "assembly", "machining", "end-of-line test", "moulding", "logistics"];

/// A named, seeded instance.
pub struct Generated {
    /// `<family>-<candidates>`.
    pub name: String,
    /// "realistic" or "adversarial".
    pub family: &'static str,
    /// Number of candidates (committed zones not counted).
    pub candidates: usize,
    /// The seed it was drawn from.
    pub seed: u64,
    /// The plan inputs.
    pub instance: Instance,
}

/// Every instance of both families, smallest first within each family.
pub fn all() -> Vec<Generated> {
    let mut out: Vec<Generated> = SIZES.iter().map(|&n| realistic(n)).collect();
    out.extend(SIZES.iter().map(|&n| adversarial(n)));
    out
}

fn monthly_rate() -> f64 {
    (1.0 + ANNUAL_RATE).powf(1.0 / 12.0) - 1.0
}

/// Money in whole euros as cents.
fn cents(euros: i64) -> i64 {
    euros * 100
}

/// One-offs like the demo's: two to four amounts over the first five months, the first at the
/// start, rounded to 500, summing to about `total` euros.
fn one_offs(rng: &mut ChaCha8Rng, total: i64) -> Vec<(u32, i64)> {
    let parts = rng.random_range(2..=4usize);
    let weights: Vec<f64> = (0..parts).map(|i| if i == 0 { 2.0 } else { rng.random_range(0.2..1.5) }).collect();
    let sum: f64 = weights.iter().sum();
    let mut month = 0u32;
    let mut out = Vec::with_capacity(parts);
    for (i, w) in weights.iter().enumerate() {
        if i > 0 {
            month = (month + rng.random_range(1..=2)).min(5);
        }
        let euros = ((total as f64 * w / sum / 500.0).round() as i64).max(1) * 500;
        out.push((month, cents(euros)));
    }
    out
}

/// A zone of the demo's shape: window of `3..=6` go-live months and `2..=4` ramp-up months.
fn zone(rng: &mut ChaCha8Rng, code: String, area: String, value: Decimal, one_off_total: i64) -> PlanZone {
    PlanZone {
        code,
        area,
        needs: Vec::new(),
        needs_outside: Vec::new(),
        committed_start: None,
        value,
        one_off: one_offs(rng, one_off_total),
        go_live: rng.random_range(3..=6),
        ramp_up: rng.random_range(2..=4),
    }
}

fn total_one_off(z: &PlanZone) -> i64 {
    z.one_off.iter().map(|(_, c)| c).sum()
}

/// Yearly budget in cents: `share` of what the positive candidates would spend over the plan,
/// but no more than about three quarters of what the capacity lets start in a year, so that
/// the budget binds at every size; rounded to 1,000.
fn yearly_budget(zones: &[PlanZone], capacity: u32, share: f64) -> i64 {
    let cands: Vec<&PlanZone> =
        zones.iter().filter(|z| z.committed_start.is_none() && z.value > Decimal::ZERO).collect();
    let spend: i64 = cands.iter().map(|z| total_one_off(z)).sum();
    let mean_spend = spend as f64 / cands.len().max(1) as f64;
    let mean_window = cands.iter().map(|z| f64::from(z.window())).sum::<f64>() / cands.len().max(1) as f64;
    let by_capacity = 0.75 * 12.0 * f64::from(capacity) / mean_window * mean_spend;
    let by_share = share * spend as f64 / f64::from(YEARS);
    (by_share.min(by_capacity) / 100_000.0).round() as i64 * 100_000
}

/// The realistic family at `n` candidates.
pub fn realistic(n: usize) -> Generated {
    let seed = 1000 + n as u64;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let capacity = if n <= 20 { 2 } else { (n / 10) as u32 };
    let area_count = (n / 4).max(3);
    let area = |i: usize| match AREAS.get(i) {
        Some(a) => (*a).to_string(),
        None => format!("hall {}", i + 1),
    };
    let mut zones = Vec::with_capacity(n + 3);
    // Three committed zones in three different areas, staggered so that they never fill the
    // capacity alone: one started six months before the plan, then months 3 and 12.
    for (k, start) in [-6i32, 3, 12].into_iter().enumerate() {
        let total = rng.random_range(40..=100) * 1000;
        let value = Decimal::new(rng.random_range(30_000..=150_000) * 100, 2);
        let mut z = zone(&mut rng, format!("C{:02}", k + 1), area(k), value, total);
        z.committed_start = Some(start);
        zones.push(z);
    }
    for i in 0..n {
        let total = rng.random_range(30..=110) * 1000;
        // Profitability index (value over one-offs) from 0.8 to 3: about one in ten not positive.
        let pi: f64 = rng.random_range(0.8..3.0);
        let value = Decimal::new(((pi - 1.0) * total as f64 * 100.0).round() as i64, 2);
        // Blank area for about one zone in twelve (a building-wide system, say).
        let a = if rng.random_range(0..12) == 0 { String::new() } else { area(rng.random_range(0..area_count)) };
        let mut z = zone(&mut rng, format!("Z{:03}", i + 1), a, value, total);
        // About one candidate in six needs an earlier zone (committed or candidate).
        if zones.len() > 3 && rng.random_range(0..6) == 0 {
            let first = rng.random_range(0..zones.len());
            z.needs.push(first);
            if rng.random_range(0..4) == 0 {
                let second = rng.random_range(0..zones.len());
                if second != first {
                    z.needs.push(second);
                }
            }
        }
        zones.push(z);
    }
    // One candidate needs a zone that is in no plan (a shelved one): never planned.
    if let Some(z) = zones.get_mut(3 + n / 2) {
        z.needs_outside.push("SHELVED-1".to_string());
    }
    let budget = yearly_budget(&zones, capacity, 0.5);
    // Room in year 0 for what the committed zones still spend in the plan.
    let committed: i64 = zones
        .iter()
        .filter_map(|z| z.committed_start.map(|s| (s, z)))
        .flat_map(|(s, z)| z.one_off.iter().map(move |(m, c)| (s + *m as i32, *c)))
        .filter(|(m, _)| (0..12).contains(m))
        .map(|(_, c)| c)
        .sum();
    let mut budgets = vec![budget; YEARS as usize];
    budgets[0] += committed;
    let instance = Instance {
        years: YEARS,
        budgets,
        carry_over: true,
        capacity,
        one_per_area: true,
        monthly_rate: monthly_rate(),
        zones,
    };
    Generated { name: format!("realistic-{n}"), family: "realistic", candidates: n, seed, instance }
}

/// The adversarial family at `n` candidates.
pub fn adversarial(n: usize) -> Generated {
    let seed = 2000 + n as u64;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let zones: Vec<PlanZone> = (0..n)
        .map(|i| {
            let total = rng.random_range(40..=80) * 1000;
            // 100,000 within 1 %, to the cent.
            let value = Decimal::new(rng.random_range(9_900_000..=10_100_000), 2);
            zone(&mut rng, format!("Z{:03}", i + 1), String::new(), value, total)
        })
        .collect();
    let capacity = 3;
    let budget = yearly_budget(&zones, capacity, 0.35);
    let instance = Instance {
        years: YEARS,
        budgets: vec![budget; YEARS as usize],
        carry_over: false,
        capacity,
        one_per_area: false,
        monthly_rate: monthly_rate(),
        zones,
    };
    Generated { name: format!("adversarial-{n}"), family: "adversarial", candidates: n, seed, instance }
}

/// The instance in the JSON format above.
pub fn to_json(g: &Generated) -> Value {
    let inst = &g.instance;
    let zones: Vec<Value> = inst
        .zones
        .iter()
        .enumerate()
        .map(|(i, z)| {
            // The objective's coefficients exactly as the library rounds them.
            let by_quarter: Option<Vec<String>> = z
                .committed_start
                .is_none()
                .then(|| (0..4 * inst.years).map(|q| value_at(inst, i, q).to_string()).collect());
            json!({
                "code": z.code,
                "area": z.area,
                "needs": z.needs,
                "needs_outside": z.needs_outside,
                "committed_start": z.committed_start,
                "value": z.value.to_string(),
                "one_off_cents": z.one_off.iter().map(|(m, c)| json!([m, c])).collect::<Vec<_>>(),
                "go_live": z.go_live,
                "ramp_up": z.ramp_up,
                "value_by_quarter": by_quarter,
            })
        })
        .collect();
    json!({
        "format": "pilot-ledger roadmap instance",
        "version": 1,
        "name": g.name,
        "family": g.family,
        "seed": g.seed,
        "years": inst.years,
        "budgets_cents": inst.budgets,
        "carry_over": inst.carry_over,
        "capacity": inst.capacity,
        "one_per_area": inst.one_per_area,
        "monthly_rate": inst.monthly_rate,
        "zones": zones,
    })
}
