//! The MILP through `good_lp`: binary `x[z,q]` per eligible candidate and quarter, one start
//! per zone, budget rows per plan year, capacity rows per month, area rows per area and month,
//! precedence rows; maximise the value. `microlp` by default, HiGHS with the `highs` feature.

use super::Instance;
use super::rules::{self, Areas, Rooms, lone_starts, row_cents, window_months};
use good_lp::constraint::leq;
use good_lp::{Constraint, Expression, ProblemVariables, SolverModel, Variable, variable};
#[cfg(not(feature = "highs"))]
use good_lp::{Solution, SolutionStatus, WithInitialSolution, WithTimeLimit};
use rust_decimal::prelude::ToPrimitive;
use std::time::Instant;

/// One binary variable: candidate `zone` starts in `quarter`.
#[derive(Debug, Clone, Copy)]
struct Start {
    zone: usize,
    quarter: u32,
}

/// What a solve gives back.
pub(super) struct Solved {
    /// Start months of the candidates (committed zones at their own).
    pub(super) starts: Vec<Option<i32>>,
    /// The solver proved its plan optimal.
    pub(super) proven: bool,
    /// An upper bound on any plan's value, money, when the solver or the LP relaxation gave one.
    pub(super) bound: Option<f64>,
}

/// The share of the time limit our search gets before this backend (1 / N): half before
/// microlp; a hundredth before HiGHS, enough to prove a small plan in milliseconds, sooner than
/// HiGHS sets up its model, while past that HiGHS proves sooner (README, Performance).
pub(super) const SEARCH_SHARE: u32 = if cfg!(feature = "highs") { 100 } else { 2 };

/// The model's pieces, rebuilt for every solve because `good_lp` consumes a model.
struct Model {
    starts: Vec<Start>,
    /// Cents of each start per budget row.
    cents: Vec<Vec<i64>>,
    /// Rows as (terms (variable index, coefficient), right-hand side).
    rows: Vec<(Vec<(usize, f64)>, f64)>,
    objective: Vec<f64>,
}

/// Solve the MILP over the `eligible` candidates within the `deadline`, starting from `warm`
/// (a plan that keeps every rule; microlp's start, HiGHS takes none, see `backend`; returned
/// unproven if the backend gives nothing better in time). The answer is re-checked in exact cents: a plan a float
/// tolerance let over a limit is cut off and the model solved again (a few times at most).
pub(super) fn solve(inst: &Instance, eligible: &[bool], warm: &[Option<i32>], deadline: Instant) -> Solved {
    let model = build(inst, eligible);
    if model.starts.is_empty() {
        // No candidate can start anywhere: the committed zones alone are the plan.
        let starts = inst.zones.iter().map(|z| z.committed_start).collect();
        return Solved { starts, proven: true, bound: Some(0.0) };
    }
    let mut cuts: Vec<(Vec<(usize, f64)>, f64)> = Vec::new();
    let mut bound = None;
    for _ in 0..20 {
        let secs = deadline.saturating_duration_since(Instant::now()).as_secs_f64();
        if secs <= 0.0 {
            break;
        }
        // A backend that fails or stops before any plan leaves the warm plan, unproven.
        let Ok(out) = run(&model, &cuts, warm, true, secs) else { break };
        bound = bound.or(out.bound);
        let starts = to_starts(inst, &model, &out.values);
        match rules::check(inst, &starts) {
            Ok(()) => return Solved { starts, proven: out.proven, bound },
            Err(rule) => cuts.push(cut(&model, &out.values, &rule)),
        }
    }
    // Out of time or of cuts: the warm plan, with what bound the relaxation gives.
    Solved { starts: warm.to_vec(), proven: false, bound }
}

/// An upper bound from the LP relaxation (the same rows, `0 <= x <= 1`), money.
pub(super) fn relaxation_bound(inst: &Instance, eligible: &[bool], deadline: Instant) -> Option<f64> {
    let model = build(inst, eligible);
    if model.starts.is_empty() {
        return Some(0.0);
    }
    let secs = deadline.saturating_duration_since(Instant::now()).as_secs_f64().max(1.0);
    let out = run(&model, &[], &[], false, secs).ok()?;
    let value: f64 = out.values.iter().zip(&model.objective).map(|(x, c)| x * c).sum();
    out.proven.then_some(value)
}

/// The variables and rows. Starts a zone could not take even alone (a need not live yet, a
/// year or month without room) get no variable: integers, so this stays exact.
fn build(inst: &Instance, eligible: &[bool]) -> Model {
    let areas = Areas::of(inst);
    let rooms = Rooms::of(inst, &areas);
    let order = rules::validate(inst).unwrap_or_default();
    let lone = lone_starts(inst, eligible, &order, &rooms, &areas);
    let starts: Vec<Start> =
        order.iter().flat_map(|&i| lone[i].iter().map(move |&q| Start { zone: i, quarter: q })).collect();

    let objective: Vec<f64> =
        starts.iter().map(|s| rules::value_at(inst, s.zone, s.quarter).to_f64().unwrap_or(0.0)).collect();
    let mut rows: Vec<(Vec<(usize, f64)>, f64)> = Vec::new();
    // One start per zone.
    let mut by_zone: Vec<Vec<usize>> = vec![Vec::new(); inst.zones.len()];
    for (v, s) in starts.iter().enumerate() {
        by_zone[s.zone].push(v);
    }
    for vars in by_zone.iter().filter(|v| v.len() > 1) {
        rows.push((vars.iter().map(|v| (*v, 1.0)).collect(), 1.0));
    }
    // Budgets, each row scaled to a right-hand side of 1 for the float solver.
    let cents: Vec<Vec<i64>> = starts.iter().map(|s| row_cents(inst, s.zone, s.quarter)).collect();
    for (r, limit) in rooms.budget.iter().enumerate() {
        let terms: Vec<(usize, f64)> = (0..starts.len())
            .filter(|v| cents[*v][r] > 0)
            .map(|v| (v, cents[v][r] as f64 / (*limit).max(1) as f64))
            .collect();
        if distinct_zones(&starts, &terms) > 1 {
            rows.push((terms, 1.0));
        }
    }
    // Capacity and area per month: only rows that can bind.
    let months = rooms.months.len();
    let covers = |v: usize, m: usize| {
        let s = starts[v];
        window_months(inst, &inst.zones[s.zone], 3 * s.quarter as i32).contains(&(m as i64))
    };
    for (m, room_m) in rooms.months.iter().enumerate() {
        let terms: Vec<(usize, f64)> = (0..starts.len()).filter(|v| covers(*v, m)).map(|v| (v, 1.0)).collect();
        if distinct_zones(&starts, &terms) as i64 > *room_m {
            rows.push((terms, *room_m as f64));
        }
    }
    if inst.one_per_area {
        for (a, per_month) in rooms.area.iter().enumerate() {
            for (m, room_m) in per_month.iter().enumerate().take(months) {
                let terms: Vec<(usize, f64)> = (0..starts.len())
                    .filter(|v| areas.index(&inst.zones[starts[*v].zone].area) == Some(a))
                    .filter(|v| covers(*v, m))
                    .map(|v| (v, 1.0))
                    .collect();
                if distinct_zones(&starts, &terms) as i64 > *room_m {
                    rows.push((terms, *room_m as f64));
                }
            }
        }
    }
    // Precedence, in the aggregated form: z started by quarter q needs each candidate a it
    // needs started by a quarter q' with 3q' + window_a <= 3q.
    for s in &starts {
        let z = &inst.zones[s.zone];
        for a in &z.needs {
            if inst.zones[*a].committed_start.is_some() {
                continue;
            }
            let wa = i64::from(inst.zones[*a].window());
            let mut terms: Vec<(usize, f64)> =
                by_zone[s.zone][..].iter().filter(|u| starts[**u].quarter <= s.quarter).map(|u| (*u, 1.0)).collect();
            terms.extend(
                by_zone[*a]
                    .iter()
                    .filter(|u| 3 * i64::from(starts[**u].quarter) + wa <= 3 * i64::from(s.quarter))
                    .map(|u| (*u, -1.0)),
            );
            rows.push((terms, 0.0));
        }
    }
    Model { starts, cents, rows, objective }
}

fn distinct_zones(starts: &[Start], terms: &[(usize, f64)]) -> usize {
    let mut zones: Vec<usize> = terms.iter().map(|(v, _)| starts[*v].zone).collect();
    zones.sort_unstable();
    zones.dedup();
    zones.len()
}

/// The candidates' start months from the solver's values (committed zones at their own).
fn to_starts(inst: &Instance, model: &Model, values: &[f64]) -> Vec<Option<i32>> {
    let mut starts: Vec<Option<i32>> = inst.zones.iter().map(|z| z.committed_start).collect();
    for (s, x) in model.starts.iter().zip(values) {
        if *x > 0.5 {
            starts[s.zone] = Some(3 * s.quarter as i32);
        }
    }
    starts
}

/// A cut against the starts the solver chose that break `rule` in exact cents. For a budget
/// row, an extended cover: the zones with cents in the broken row cannot all start again at
/// quarters costing each at least as much in that row (any such plan is over it too, and each
/// zone starts once). Otherwise not all of the chosen starts again (the rows only grow with
/// more starts). Either way no plan that keeps the rules is cut off.
fn cut(model: &Model, values: &[f64], rule: &super::Rule) -> (Vec<(usize, f64)>, f64) {
    let chosen: Vec<usize> = (0..model.starts.len()).filter(|v| values.get(*v).is_some_and(|x| *x > 0.5)).collect();
    let row = match rule {
        super::Rule::Budget { year, .. } => Some(*year as usize),
        _ => None,
    };
    let Some(r) = row else {
        let n = chosen.len() as f64;
        return (chosen.into_iter().map(|v| (v, 1.0)).collect(), n - 1.0);
    };
    let cents = &model.cents;
    let cover: Vec<usize> = chosen.into_iter().filter(|v| cents[*v][r] > 0).collect();
    let terms: Vec<(usize, f64)> = (0..model.starts.len())
        .filter(|u| {
            cover.iter().any(|v| model.starts[*u].zone == model.starts[*v].zone && cents[*u][r] >= cents[*v][r])
        })
        .map(|u| (u, 1.0))
        .collect();
    (terms, cover.len() as f64 - 1.0)
}

/// What one call of the backend gives back.
struct Outcome {
    values: Vec<f64>,
    proven: bool,
    bound: Option<f64>,
}

/// Build the `good_lp` problem (binary, or relaxed to `0..=1`) and solve it with the backend.
fn run(
    model: &Model,
    cuts: &[(Vec<(usize, f64)>, f64)],
    warm: &[Option<i32>],
    integer: bool,
    secs: f64,
) -> Result<Outcome, String> {
    let mut vars = ProblemVariables::new();
    let xs: Vec<Variable> = model
        .starts
        .iter()
        .map(|_| vars.add(if integer { variable().binary() } else { variable().min(0).max(1) }))
        .collect();
    let mut objective = Expression::with_capacity(xs.len());
    for (x, c) in xs.iter().zip(&model.objective) {
        objective.add_mul(*c, *x);
    }
    let constraints: Vec<Constraint> = model
        .rows
        .iter()
        .chain(cuts)
        .map(|(terms, rhs)| {
            let mut e = Expression::with_capacity(terms.len());
            for (v, c) in terms {
                e.add_mul(*c, xs[*v]);
            }
            leq(e, *rhs)
        })
        .collect();
    let initial: Vec<(Variable, f64)> = if integer && !warm.is_empty() {
        model
            .starts
            .iter()
            .zip(&xs)
            .map(|(s, x)| {
                let on = warm.get(s.zone).copied().flatten() == Some(3 * s.quarter as i32);
                (*x, if on { 1.0 } else { 0.0 })
            })
            .collect()
    } else {
        Vec::new()
    };
    let problem = vars.maximise(objective);
    // A panic inside the backend becomes an error, not a failed request.
    std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| backend(problem, constraints, initial, &xs, secs)))
        .unwrap_or_else(|_| Err("the solver stopped unexpectedly".into()))
}

/// Load the rows and the starting plan into a backend's model and solve it: the variables'
/// values and whether the backend proved them optimal.
#[cfg(not(feature = "highs"))]
fn load<M>(
    mut m: M,
    constraints: Vec<Constraint>,
    initial: Vec<(Variable, f64)>,
    xs: &[Variable],
) -> Result<(M::Solution, Vec<f64>, bool), String>
where
    M: SolverModel + WithInitialSolution,
    M::Error: std::fmt::Display,
{
    if !initial.is_empty() {
        m = m.with_initial_solution(initial);
    }
    for c in constraints {
        m.add_constraint(c);
    }
    let sol = m.solve().map_err(|e| e.to_string())?;
    let values = xs.iter().map(|x| sol.value(*x)).collect();
    let proven = matches!(sol.status(), SolutionStatus::Optimal);
    Ok((sol, values, proven))
}

/// The backend: microlp by default, HiGHS with the `highs` feature.
fn backend(
    problem: good_lp::variable::UnsolvedProblem,
    constraints: Vec<Constraint>,
    initial: Vec<(Variable, f64)>,
    xs: &[Variable],
    secs: f64,
) -> Result<Outcome, String> {
    #[cfg(not(feature = "highs"))]
    let (values, proven, bound) = {
        let m = good_lp::microlp(problem).with_time_limit(secs);
        let (sol, values, proven) = load(m, constraints, initial, xs)?;
        (values, proven, sol.into_inner().stats().best_bound)
    };
    #[cfg(feature = "highs")]
    let (values, proven, bound) = {
        let mut m = good_lp::highs(problem);
        // No MIP start for HiGHS: HiGHS 1.16 maps the start into the presolved model and takes
        // that image's value as its incumbent, but keeps the start's own columns as the answer.
        // Where presolve fixed a column the start leaves at 0, the image is a better plan than
        // the start, and if the search finds nothing better still, HiGHS reports "optimal"
        // with the image's value and the start's columns (case 218 of the brute-force test).
        // Without a start, its answer is always postsolved from its incumbent. The warm plan
        // is still the answer when HiGHS gives nothing better (`solve`, `explain::roadmap`).
        drop(initial);
        for c in constraints {
            m.add_constraint(c);
        }
        // HiGHS is run here rather than through good_lp's `solve`, which keeps HiGHS's proven
        // bound to itself: past the time limit the answer's gap is HiGHS's own.
        let mut model = m.try_into_inner().map_err(|e| e.to_string())?;
        model.set_option("threads", 1);
        // HiGHS stops at a relative gap of 1e-4 by default: the plan must be the exact optimum.
        model.set_option("mip_rel_gap", 0.0);
        model.set_option("time_limit", secs);
        // HiGHS restarts from presolve when the root fixes many columns; on these models that
        // repeats the root's cuts and heuristics for little. Without restarts the benchmark's
        // proven instances took 15 to 40 % less time here and the gaps at the limit stayed
        // the same (README, Performance).
        model.set_option("mip_allow_restart", false);
        let solved = model.try_solve().map_err(|e| format!("HiGHS: {e:?}"))?;
        if solved.primal_solution_status() != highs::HighsSolutionStatus::Feasible {
            return Err(format!("HiGHS found no plan ({:?})", solved.status()));
        }
        // The problem's variables are `xs`, in order: HiGHS's columns are theirs.
        let values = solved.get_solution().columns().to_vec();
        if values.len() != xs.len() {
            return Err(format!("HiGHS answered {} columns for {} variables", values.len(), xs.len()));
        }
        let gap = solved.mip_gap();
        let proven = solved.status() == highs::HighsModelStatus::Optimal && gap == 0.0;
        let bound = solved.double_info_value(c"mip_dual_bound").ok().filter(|b| b.is_finite());
        (values, proven, bound)
    };
    Ok(Outcome { values, proven, bound })
}
