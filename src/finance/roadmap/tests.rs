//! The roadmap against brute force, an independent rule checker written from the text,
//! and worked examples with the arithmetic written out.

use super::explain::Solvers;
use super::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rust_decimal::dec;
use rust_decimal::prelude::FromPrimitive;
use std::time::Duration;

type R = Result<(), String>;

const LIMIT: Duration = Duration::from_secs(30);

fn zone(code: &str, area: &str, value: Decimal, one_off: &[(u32, i64)], go_live: u32, ramp_up: u32) -> PlanZone {
    PlanZone {
        code: code.into(),
        area: area.into(),
        needs: Vec::new(),
        needs_outside: Vec::new(),
        committed_start: None,
        value,
        one_off: one_off.to_vec(),
        go_live,
        ramp_up,
    }
}

fn inst(years: u32, budgets: &[i64], capacity: u32, rate: f64, zones: Vec<PlanZone>) -> Instance {
    Instance {
        years,
        budgets: budgets.to_vec(),
        carry_over: false,
        capacity,
        one_per_area: false,
        monthly_rate: rate,
        zones,
    }
}

fn starts_of(plan: &Plan) -> Vec<Option<i32>> {
    plan.placements.iter().map(Placement::start_month).collect()
}

/// The rules as the issue states them, written apart from `check`: a candidate starts on a
/// quarter boundary inside the plan with a positive value, after every zone it needs is live;
/// per plan year (or cumulative with carry-over) the one-offs inside the plan stay within the
/// budget; per month at most K windows and, with one per area, one per area. The committed
/// zones' own overruns are theirs: candidates then get no room in that year or month.
fn independent(i: &Instance, starts: &[Option<i32>]) -> R {
    let n = i.zones.len();
    let months = 12 * i.years as i32;
    let at = |k: usize| i.zones[k].committed_start.or(starts[k]);
    for (z, given) in i.zones.iter().zip(starts) {
        if let Some(c) = z.committed_start {
            if *given != Some(c) {
                return Err(format!("committed {} moved", z.code));
            }
            continue;
        }
        let Some(s) = *given else { continue };
        if s < 0 || s % 3 != 0 || s >= months {
            return Err(format!("{} starts off the quarters: {s}", z.code));
        }
        if z.value <= Decimal::ZERO || !z.needs_outside.is_empty() {
            return Err(format!("{} may not be planned", z.code));
        }
        for a in &z.needs {
            let za = &i.zones[*a];
            match at(*a) {
                Some(sa) if s >= sa + za.go_live as i32 + za.ramp_up.max(1) as i32 => {}
                _ => return Err(format!("{} starts before {} is live", z.code, za.code)),
            }
        }
    }
    let mut all = vec![0i64; i.years as usize];
    let mut fixed = vec![0i64; i.years as usize];
    for k in 0..n {
        let Some(s) = at(k) else { continue };
        for (off, c) in &i.zones[k].one_off {
            let m = s + *off as i32;
            if m >= 0 && m < months {
                all[(m / 12) as usize] += c;
                if i.zones[k].committed_start.is_some() {
                    fixed[(m / 12) as usize] += c;
                }
            }
        }
    }
    let (mut b, mut a, mut f) = (0, 0, 0);
    for y in 0..i.years as usize {
        if i.carry_over {
            (b, a, f) = (b + i.budgets[y], a + all[y], f + fixed[y]);
        } else {
            (b, a, f) = (i.budgets[y], all[y], fixed[y]);
        }
        if a - f > (b - f).max(0) {
            return Err(format!("over the budget of year {y}"));
        }
    }
    for m in 0..months {
        let inside = |k: usize| {
            at(k).is_some_and(|s| {
                let z = &i.zones[k];
                m >= s && m < s + z.go_live as i32 + z.ramp_up.max(1) as i32
            })
        };
        let fixed_n = (0..n).filter(|k| inside(*k) && i.zones[*k].committed_start.is_some()).count() as i64;
        let all_n = (0..n).filter(|k| inside(*k)).count() as i64;
        if all_n - fixed_n > (i.capacity as i64 - fixed_n).max(0) {
            return Err(format!("over the capacity in month {m}"));
        }
        if i.one_per_area {
            for area in i.zones.iter().map(|z| &z.area).filter(|a| !a.is_empty()) {
                let same = |k: &usize| inside(*k) && &i.zones[*k].area == area;
                let f = (0..n).filter(|k| same(k) && i.zones[*k].committed_start.is_some()).count() as i64;
                let a = (0..n).filter(same).count() as i64;
                if a - f > (1 - f).max(0) {
                    return Err(format!("two in area {area} in month {m}"));
                }
            }
        }
    }
    Ok(())
}

/// `V (1 + r)^(-3q)` to the cent, computed apart from `value_at`.
fn worth(i: &Instance, k: usize, q: u32) -> Decimal {
    let f = (0..3 * q)
        .fold(Decimal::ONE, |f, _| f * (Decimal::ONE + Decimal::from_f64(i.monthly_rate).unwrap_or_default()));
    (i.zones[k].value / f).round_dp_with_strategy(2, rust_decimal::RoundingStrategy::MidpointAwayFromZero)
}

/// The best value over every assignment (each candidate at no quarter or one of the `4Y`),
/// zones taken in index order (needs point to lower indices), a branch dropped as soon as its
/// zones so far break a rule (adding zones never mends one).
fn brute_force(i: &Instance) -> Decimal {
    fn go(i: &Instance, k: usize, starts: &mut Vec<Option<i32>>, value: Decimal, best: &mut Decimal) {
        if k == i.zones.len() {
            *best = (*best).max(value);
            return;
        }
        if i.zones[k].committed_start.is_some() {
            return go(i, k + 1, starts, value, best);
        }
        go(i, k + 1, starts, value, best);
        for q in 0..4 * i.years {
            starts[k] = Some(3 * q as i32);
            if independent(i, starts).is_ok() {
                go(i, k + 1, starts, value + worth(i, k, q), best);
            }
        }
        starts[k] = None;
    }
    let mut starts: Vec<Option<i32>> = i.zones.iter().map(|z| z.committed_start).collect();
    let mut best = Decimal::ZERO;
    go(i, 0, &mut starts, Decimal::ZERO, &mut best);
    best
}

/// A random small plan: up to two committed zones first, then candidates; needs point to
/// earlier zones; areas, budgets and a capacity that bind.
fn random_instance(rng: &mut ChaCha8Rng, candidates: usize, years: u32) -> Instance {
    let areas = ["press shop", "paint shop", ""];
    let mut zones = Vec::new();
    let committed = rng.random_range(0..=2);
    for k in 0..committed + candidates {
        let offsets = rng.random_range(1..=2);
        let one_off: Vec<(u32, i64)> =
            (0..offsets).map(|_| (rng.random_range(0..8), rng.random_range(10_000..200_000))).collect();
        let value = if rng.random_bool(0.1) {
            Decimal::new(rng.random_range(-50_000..=0), 2)
        } else {
            Decimal::new(rng.random_range(100_000..3_000_000), 2)
        };
        let mut z = zone(
            &format!("Z{k}"),
            areas[rng.random_range(0..areas.len())],
            value,
            &one_off,
            rng.random_range(0..5),
            rng.random_range(0..4),
        );
        if k < committed {
            z.committed_start = Some(rng.random_range(-6..12));
        } else {
            if k > 0 && rng.random_bool(0.3) {
                z.needs.push(rng.random_range(0..k));
            }
            if rng.random_bool(0.04) {
                z.needs_outside.push("OUT".into());
            }
        }
        zones.push(z);
    }
    Instance {
        years,
        budgets: (0..years).map(|_| rng.random_range(50_000..400_000)).collect(),
        carry_over: rng.random_bool(0.5),
        capacity: rng.random_range(1..=3),
        one_per_area: rng.random_bool(0.5),
        monthly_rate: [0.0, 0.005, 0.01][rng.random_range(0..3)],
        zones,
    }
}

#[test]
fn optimum_equals_brute_force_on_320_random_instances() -> R {
    let mut rng = ChaCha8Rng::seed_from_u64(14);
    for case in 0..320 {
        let n = rng.random_range(1..=6);
        let years = if case % 4 == 0 { 1 } else { 2 };
        let i = random_instance(&mut rng, n, years);
        let best = brute_force(&i);
        for solvers in [Solvers::Both, Solvers::SearchOnly, Solvers::MilpOnly] {
            let r = explain::roadmap_with(&i, LIMIT, solvers).map_err(|e| format!("case {case}: {e}"))?;
            let case = format!("{case} ({solvers:?})");
            let (opt, simple) = (&r.optimal, &r.simple);
            independent(&i, &starts_of(opt)).map_err(|e| format!("case {case} optimal: {e}"))?;
            independent(&i, &starts_of(simple)).map_err(|e| format!("case {case} simple: {e}"))?;
            let sum: Decimal = (0..i.zones.len())
                .filter_map(|k| match opt.placements[k] {
                    Placement::Planned { quarter } => Some(worth(&i, k, quarter)),
                    _ => None,
                })
                .sum();
            if !(opt.proven && opt.value == best && sum == best && opt.bound == best) {
                return Err(format!(
                    "case {case}: {} (bound {}, proven {}) vs brute force {best}: {i:?}",
                    opt.value, opt.bound, opt.proven
                ));
            }
            if simple.value > opt.value {
                return Err(format!("case {case}: simple {} beats optimal {}", simple.value, opt.value));
            }
        }
    }
    Ok(())
}

/// Three candidates, one plan year of 1,000.00, one introduction at a time, 1% a month.
/// Windows are 2 + 1 = 3 months, one quarter each.
///   A: 1,000.00 value, 600.00 one-off   B: 900.00, 500.00   C: 300.00, 400.00
/// Every start is in year 0, so A and B (1,100.00) never both fit; A + C = 1,000.00 fits.
/// C a quarter later is worth 300 / 1.01^3 = 300 / 1.030301 = 291.177... = 291.18;
/// A a quarter later 1000 / 1.030301 = 970.59; C two quarters later 300 / 1.0615201506 = 282.61.
/// Plans: A@0 + C@1 = 1,291.18; C@0 + A@1 = 300 + 970.59 = 1,270.59; B@0 + C@1 = 1,191.18.
/// Profitability index: B 900/500 = 1.8, A 1000/600 = 1.67, C 300/400 = 0.75: the simple plan
/// takes B@0, then A never fits the budget (over by 100.00), then C at quarter 1 (capacity
/// holds quarter 0): 1,191.18, 100.00 less.
#[test]
fn worked_example_budget_and_capacity() -> R {
    let i = inst(
        1,
        &[100_000],
        1,
        0.01,
        vec![
            zone("A", "", dec!(1000), &[(0, 60_000)], 2, 1),
            zone("B", "", dec!(900), &[(0, 50_000)], 2, 1),
            zone("C", "", dec!(300), &[(0, 40_000)], 2, 1),
        ],
    );
    assert_eq!(value_at(&i, 2, 1), dec!(291.18));
    assert_eq!(value_at(&i, 0, 1), dec!(970.59));
    let r = roadmap(&i, LIMIT).map_err(|e| e.to_string())?;
    let planned = |q| Placement::Planned { quarter: q };
    assert_eq!(r.optimal.placements[0], planned(0));
    assert_eq!(r.optimal.placements[2], planned(1));
    // B at any quarter: A + B + C = 1,500.00 against 1,000.00: 500.00 over.
    let over = Rule::Budget { year: 0, over: 50_000 };
    assert_eq!(r.optimal.placements[1], Placement::NotPlanned(NotPlanned::Blocked(vec![over; 4])));
    assert_eq!((r.optimal.value, r.optimal.proven, r.optimal.bound), (dec!(1291.18), true, dec!(1291.18)));
    assert_eq!(r.simple.placements[1], planned(0));
    assert_eq!(r.simple.placements[2], planned(1));
    let a_over = Rule::Budget { year: 0, over: 10_000 };
    assert_eq!(r.simple.placements[0], Placement::NotPlanned(NotPlanned::Blocked(vec![a_over; 4])));
    assert_eq!(r.optimal.value - r.simple.value, dec!(100.00));
    // A's delay: 1,000.00 - 970.59; C's: 291.18 - 282.61, blocked a quarter earlier by A.
    assert_eq!(r.delays[0], Some(Delay { cost: dec!(29.41), earlier: None }));
    assert_eq!(r.delays[2], Some(Delay { cost: dec!(8.57), earlier: Some(Rule::Capacity { month: 0 }) }));
    assert_eq!(r.delays[1], None);
    assert!(r.overruns.is_empty());
    Ok(())
}

/// Committed K, P and D needing P, as in the worked example below, one per area, capacity 2.
fn press_and_paint(budgets: &[i64], rate: f64) -> Instance {
    let mut k = zone("K", "press shop", dec!(0), &[(4, 20_000)], 3, 3);
    k.committed_start = Some(-3);
    let p = zone("P", "press shop", dec!(800), &[(0, 60_000)], 2, 1);
    let mut d = zone("D", "paint shop", dec!(500), &[(0, 20_000)], 2, 1);
    d.needs = vec![1];
    let mut i = inst(2, budgets, 2, rate, vec![k, p, d]);
    i.one_per_area = true;
    i
}

/// Two years of 500.00 each, carried forward, 1% a month, one introduction per area. Committed K (press shop) started
/// three months before the plan with a 6-month window (plan months 0..2) and 200.00 in month 1.
/// P (press shop, 800.00 value, 600.00 one-off, 3-month window) and D (paint shop, 500.00
/// value, 200.00, 3-month window, needs P live).
/// With carry-over: year 0 allows 500 - 200 = 300 < 600, so P waits for year 1 (quarter 4,
/// month 12), cumulative 200 + 600 = 800 <= 1,000; P is live in month 15, D starts at quarter
/// 5 with 200 + 600 + 200 = 1,000 <= 1,000, exactly at the limit. Values: 1.01^12 = 1.1268250,
/// 1.01^15 = 1.1609690, 1.01^18 = 1.1961475: P 800 / 1.1268250 = 709.96, D 500 / 1.1609690 =
/// 430.67, total 1,140.63; a quarter later P 689.08 (delay 20.88), D 418.01 (delay 12.66).
/// Without carry-over P's 600.00 exceeds every year's 500.00, and D needs P: nothing, 0.
#[test]
fn worked_example_needs_committed_and_carry_over() -> R {
    let mut i = press_and_paint(&[50_000, 50_000], 0.01);
    i.carry_over = true;
    let r = roadmap(&i, LIMIT).map_err(|e| e.to_string())?;
    assert_eq!(r.optimal.placements[0], Placement::Committed { start: -3 });
    assert_eq!(r.optimal.placements[1], Placement::Planned { quarter: 4 });
    assert_eq!(r.optimal.placements[2], Placement::Planned { quarter: 5 });
    assert_eq!((r.optimal.value, r.optimal.proven), (dec!(1140.63), true));
    assert_eq!(capital_use(&i, &r.optimal.placements), vec![20_000, 80_000]);
    // P a quarter earlier is in year 0: 600.00 against the 300.00 left, 300.00 over.
    let p_delay = Delay { cost: dec!(20.88), earlier: Some(Rule::Budget { year: 0, over: 30_000 }) };
    assert_eq!(r.delays[1], Some(p_delay));
    // D a quarter earlier (month 12) starts before P is live (month 15).
    assert_eq!(r.delays[2], Some(Delay { cost: dec!(12.66), earlier: Some(Rule::Needs("P".into())) }));
    let intro = introductions(&i, &r.optimal.placements);
    assert_eq!(&intro[..3], &[1, 1, 1]);
    assert_eq!(&intro[12..18], &[1, 1, 1, 1, 1, 1]);

    i.carry_over = false;
    let r = roadmap(&i, LIMIT).map_err(|e| e.to_string())?;
    let over = Rule::Budget { year: 0, over: 30_000 };
    let later = Rule::Budget { year: 1, over: 10_000 };
    let mut blocked = vec![over; 4];
    blocked.extend(vec![later; 4]);
    assert_eq!(r.optimal.placements[1], Placement::NotPlanned(NotPlanned::Blocked(blocked)));
    assert_eq!(r.optimal.placements[2], Placement::NotPlanned(NotPlanned::Needs("P".into())));
    assert_eq!((r.optimal.value, r.optimal.proven), (dec!(0), true));
    Ok(())
}

/// `check` by hand on the instance above with room in the budget: one rule at a time.
#[test]
fn check_names_the_first_broken_rule() -> R {
    let mut i = press_and_paint(&[100_000, 100_000], 0.0);
    // Positive control: P in month 3 (K's window ends in month 2), D in month 6 (P live).
    assert_eq!(check(&i, &[None, Some(3), Some(6)]), Ok(()));
    // Committed K is taken at its own start whatever the slice says.
    assert_eq!(check(&i, &[Some(30), Some(3), Some(6)]), Ok(()));
    assert_eq!(check(&i, &[None, Some(0), None]), Err(Rule::Area { month: 0 }));
    assert_eq!(check(&i, &[None, Some(3), Some(3)]), Err(Rule::Needs("P".into())));
    assert_eq!(check(&i, &[None, None, Some(6)]), Err(Rule::Needs("P".into())));
    // 200 (K) + 600 + 200 = 1,000.00 in year 0 against 999.99: one cent over.
    i.budgets[0] = 99_999;
    assert_eq!(check(&i, &[None, Some(3), Some(6)]), Err(Rule::Budget { year: 0, over: 1 }));
    i.budgets[0] = 100_000;
    // Capacity 1: K fills months 0..2, so D (no need now) at month 0 is one too many.
    i.capacity = 1;
    i.zones[2].needs.clear();
    assert_eq!(check(&i, &[None, None, Some(0)]), Err(Rule::Capacity { month: 0 }));
    assert_eq!(check(&i, &[None, None, Some(3)]), Ok(()));
    // K overruns year 0 alone (200.00 against 100.00): no room for a candidate's one-off there,
    // though K's own overrun is not the plan's.
    i.budgets[0] = 10_000;
    assert_eq!(check(&i, &[None, None, None]), Ok(()));
    assert_eq!(check(&i, &[None, None, Some(3)]), Err(Rule::Budget { year: 0, over: 20_000 }));
    assert_eq!(check(&i, &[None, None, Some(12)]), Ok(()));
    let r = roadmap(&i, LIMIT).map_err(|e| e.to_string())?;
    assert_eq!(r.overruns, vec![Rule::Budget { year: 0, over: 10_000 }]);
    // Both fit in year 1 only, one after the other (no discount: 800 + 500).
    assert_eq!(r.optimal.value, dec!(1300));
    assert!(starts_of(&r.optimal)[1..].iter().all(|s| s.is_some_and(|m| m >= 12)));
    Ok(())
}

/// Two candidates each within the budget alone, together one cent over: 6e14 + (4e14 + 1)
/// cents against 1e15, and 6,000,000.00 + 4,000,000.01 against 10,000,000.00. A float solver's
/// tolerance (1e-9 relative and more) accepts both; the answer must take only the larger.
#[test]
fn one_cent_over_the_budget_is_refused() -> R {
    for (a, b, budget) in
        [(600_000_000_000_000, 400_000_000_000_001, 1_000_000_000_000_000), (600_000_000, 400_000_001, 1_000_000_000)]
    {
        let i = inst(
            1,
            &[budget],
            2,
            0.0,
            vec![zone("A", "", dec!(1000), &[(0, a)], 2, 1), zone("B", "", dec!(900), &[(0, b)], 2, 1)],
        );
        let r = roadmap(&i, LIMIT).map_err(|e| e.to_string())?;
        independent(&i, &starts_of(&r.optimal))?;
        assert_eq!(r.optimal.value, dec!(1000));
        // No discount: A is worth as much at any quarter.
        assert!(matches!(r.optimal.placements[0], Placement::Planned { .. }));
        assert_eq!(
            r.optimal.placements[1],
            Placement::NotPlanned(NotPlanned::Blocked(vec![Rule::Budget { year: 0, over: 1 }; 4]))
        );
        // Positive control: one cent more budget takes both.
        let mut more = i.clone();
        more.budgets[0] += 1;
        assert_eq!(roadmap(&more, LIMIT).map_err(|e| e.to_string())?.optimal.value, dec!(1900));
    }
    Ok(())
}

/// A 24-candidate, 3-year plan with near-equal values and a millisecond: the answer keeps every
/// rule and, unless the solver proved it in time, says so with a bound at or above its value.
#[test]
fn time_limit_gives_an_honest_bound() -> R {
    let mut rng = ChaCha8Rng::seed_from_u64(24);
    let mut i = random_instance(&mut rng, 24, 3);
    for z in &mut i.zones {
        z.value = Decimal::new(1_000_000 + rng.random_range(0..1_000), 2);
    }
    i.capacity = 3;
    i.budgets = vec![400_000; 3];
    let full = roadmap(&i, Duration::from_secs(3)).map_err(|e| e.to_string())?;
    for solvers in [Solvers::Both, Solvers::SearchOnly, Solvers::MilpOnly] {
        let r = explain::roadmap_with(&i, Duration::from_millis(1), solvers).map_err(|e| e.to_string())?;
        independent(&i, &starts_of(&r.optimal))?;
        assert!(r.optimal.bound >= r.optimal.value, "{solvers:?}");
        assert!(!r.optimal.proven && r.optimal.bound > r.optimal.value, "{solvers:?}");
        assert!(r.optimal.value >= r.simple.value, "{solvers:?}");
        assert!(full.optimal.value <= r.optimal.bound, "{solvers:?}: {} > {}", full.optimal.value, r.optimal.bound);
    }
    Ok(())
}

/// Beyond brute force's reach (8 candidates over 12 quarters): our search and the MILP, each
/// alone, prove the same optimum, and both plans keep every rule.
#[test]
fn search_and_milp_agree_on_40_larger_instances() -> R {
    let mut rng = ChaCha8Rng::seed_from_u64(41);
    for case in 0..40 {
        let i = random_instance(&mut rng, 8, 3);
        let s = explain::roadmap_with(&i, LIMIT, Solvers::SearchOnly).map_err(|e| e.to_string())?;
        let m = explain::roadmap_with(&i, LIMIT, Solvers::MilpOnly).map_err(|e| e.to_string())?;
        independent(&i, &starts_of(&s.optimal)).map_err(|e| format!("case {case} search: {e}"))?;
        independent(&i, &starts_of(&m.optimal)).map_err(|e| format!("case {case} milp: {e}"))?;
        let both = (s.optimal.proven, m.optimal.proven, s.optimal.value == m.optimal.value);
        if both != (true, true, true) {
            return Err(format!("case {case}: search {} vs milp {} ({both:?})", s.optimal.value, m.optimal.value));
        }
    }
    Ok(())
}

#[test]
fn not_positive_and_outside_needs_are_never_planned() -> R {
    let mut dep = zone("D", "", dec!(5000), &[], 2, 1);
    dep.needs = vec![0];
    let mut out = zone("O", "", dec!(5000), &[], 2, 1);
    out.needs_outside = vec!["SHELVED".into()];
    let i =
        inst(1, &[0], 2, 0.01, vec![zone("N", "", dec!(0), &[], 2, 1), dep, out, zone("F", "", dec!(1), &[], 2, 1)]);
    let r = roadmap(&i, LIMIT).map_err(|e| e.to_string())?;
    assert_eq!(r.optimal.placements[0], Placement::NotPlanned(NotPlanned::NotPositive));
    assert_eq!(r.optimal.placements[1], Placement::NotPlanned(NotPlanned::Needs("N".into())));
    assert_eq!(r.optimal.placements[2], Placement::NotPlanned(NotPlanned::Needs("SHELVED".into())));
    // Positive control: free of one-offs and positive, planned at once despite a zero budget.
    assert_eq!(r.optimal.placements[3], Placement::Planned { quarter: 0 });
    assert_eq!(r.simple.placements, r.optimal.placements);
    Ok(())
}

#[test]
fn invalid_instances_are_refused_with_a_message() -> R {
    let mut a = zone("A", "", dec!(1), &[], 1, 1);
    let mut b = zone("B", "", dec!(1), &[], 1, 1);
    let good = inst(2, &[1, 1], 2, 0.0, vec![a.clone(), b.clone()]);
    assert!(roadmap(&good, LIMIT).is_ok());
    let err = |i: &Instance| roadmap(i, LIMIT).err().map(|e| e.to_string());
    let mut i = good.clone();
    i.budgets = vec![1];
    assert_eq!(err(&i).as_deref(), Some("the plan has 2 years but 1 yearly capital budgets"));
    let mut i = good.clone();
    i.capacity = 0;
    assert_eq!(err(&i).as_deref(), Some("introductions at a time must be at least 1"));
    a.needs = vec![1];
    b.needs = vec![0];
    let i = inst(2, &[1, 1], 2, 0.0, vec![a.clone(), b]);
    assert_eq!(err(&i).as_deref(), Some("the needs form a cycle among zones A, B"));
    a.needs = vec![7];
    let i = inst(2, &[1, 1], 2, 0.0, vec![a]);
    assert_eq!(err(&i).as_deref(), Some("zone A needs zone number 7, which is not in the plan"));
    Ok(())
}
