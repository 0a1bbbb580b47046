//! An exact search of our own, tried before the MILP: depth-first branch and bound over the
//! candidates, each at one of its quarters or not in the plan, with every rule checked in exact
//! integers on the way down, and a Lagrangian bound at every node.
//!
//! The bound relaxes the budget, capacity and area rows with multipliers `λ >= 0` (and the
//! needs between zones not yet placed to "no earlier than the need's earliest live month"):
//! `L(λ) = Σ_rows λ_row room_row + Σ_free max(0, max_q (v_q - Σ_rows λ_row use_row(q)))`. For
//! any `λ >= 0` it is at least the value of every plan below the node (each such plan keeps the
//! rows, so every penalty it pays is covered by the first sum). At the root the multipliers are
//! the LP relaxation's dual (one LP, solved by microlp), so the root bound is the LP's; below it
//! a few subgradient steps per node improve the parent's. That costs microseconds per node
//! instead of a simplex solve, which is where it beats the MILP on a plant's 10 to 20
//! candidates (README, Performance). Past the deadline the bound reported is the largest of the
//! nodes left open.
//!
//! Values are compared in whole cents; the bound is a float, pruned with a margin for its
//! rounding, so a node is dropped only when no plan below it can be a cent better.

use super::Instance;
use super::rules::{self, Areas, Rooms, lone_starts, window_months};
use rust_decimal::prelude::ToPrimitive;
use std::time::Instant;

/// What the search gives back.
pub(super) struct Searched {
    /// Start months of every zone (committed ones at their own): the best plan found.
    pub(super) starts: Vec<Option<i32>>,
    /// Every branch was explored or pruned: `starts` is optimal.
    pub(super) proven: bool,
    /// An upper bound on any plan's value, money.
    pub(super) bound: f64,
}

/// One start a candidate could take alone.
struct Opt {
    quarter: u32,
    cents: i64,
    value: f64,
    /// (budget row, cents, cents over the row's room at the root).
    rows: Vec<(usize, i64, f64)>,
    /// Plan months of the window, `from .. to`.
    from: usize,
    to: usize,
    /// Month the zone is live.
    live: i64,
}

struct Cand {
    zone: usize,
    area: Option<usize>,
    opts: Vec<Opt>,
    /// Candidates (indices into `cands`) it needs.
    needs: Vec<usize>,
}

/// Search for the optimal plan over the `eligible` candidates until `deadline`, from the
/// incumbent `warm` (a plan that keeps every rule). `None` when a value does not fit whole
/// cents in an `i64`: the MILP alone answers then.
pub(super) fn search(inst: &Instance, eligible: &[bool], warm: &[Option<i32>], deadline: Instant) -> Option<Searched> {
    let mut s = Search::new(inst, eligible, warm, deadline)?;
    let mut mult = s.dual_multipliers().unwrap_or_else(|| vec![0.0; s.rows()]);
    s.node(&mut mult, ROOT_STEPS);
    let proven = !s.stopped;
    let bound = if proven { s.best as f64 } else { s.open_bound.max(s.best as f64) };
    let mut starts: Vec<Option<i32>> = inst.zones.iter().map(|z| z.committed_start).collect();
    for (c, k) in s.cands.iter().zip(&s.best_choice) {
        if let Some(k) = k {
            starts[c.zone] = Some(3 * c.opts[*k].quarter as i32);
        }
    }
    Some(Searched { starts, proven, bound: bound / 100.0 })
}

/// A candidate's place so far.
#[derive(Clone, Copy, PartialEq)]
enum Fixed {
    Free,
    Out,
    At(usize),
}

struct Search {
    cands: Vec<Cand>,
    /// Room left per budget row (cents), per month, per area and month; and each row's room at
    /// the root, to scale the budget multipliers.
    row_room: Vec<i64>,
    row_scale: Vec<f64>,
    cap_room: Vec<i64>,
    area_room: Vec<Vec<i64>>,
    fixed: Vec<Fixed>,
    value: i64,
    best: i64,
    best_choice: Vec<Option<usize>>,
    deadline: Instant,
    stopped: bool,
    /// The largest bound of a node left unexplored at the deadline (cents).
    open_bound: f64,
    nodes: u64,
}

impl Search {
    fn new(inst: &Instance, eligible: &[bool], warm: &[Option<i32>], deadline: Instant) -> Option<Self> {
        let areas = Areas::of(inst);
        let rooms = Rooms::of(inst, &areas);
        let order = rules::validate(inst).ok()?;
        let lone = lone_starts(inst, eligible, &order, &rooms, &areas);
        let Rooms { budget: row_room, months: cap_room, area: area_room } = rooms;
        let row_scale: Vec<f64> = row_room.iter().map(|r| (*r).max(1) as f64).collect();
        let mut local: Vec<Option<usize>> = vec![None; inst.zones.len()];
        let mut cands: Vec<Cand> = Vec::new();
        for &i in &order {
            let z = &inst.zones[i];
            if z.committed_start.is_some() || !eligible.get(i).copied().unwrap_or(false) {
                continue;
            }
            // Needs on committed zones hold at every lone start; needs on candidates stay to check.
            let needs: Vec<usize> = z.needs.iter().filter_map(|a| local[*a]).collect();
            let area = if inst.one_per_area { areas.index(&z.area) } else { None };
            let mut opts = Vec::new();
            for &q in &lone[i] {
                let start = 3 * q as i32;
                let cents_by_row = rules::row_cents(inst, i, q);
                let w = window_months(inst, z, start);
                let cents = (rules::value_at(inst, i, q) * rust_decimal::Decimal::ONE_HUNDRED).to_i64()?;
                let rows = cents_by_row
                    .iter()
                    .enumerate()
                    .filter(|(_, c)| **c > 0)
                    .map(|(r, c)| (r, *c, *c as f64 / row_scale[r]))
                    .collect();
                let live = i64::from(start) + i64::from(z.window());
                opts.push(Opt {
                    quarter: q,
                    cents,
                    value: cents as f64,
                    rows,
                    from: w.start as usize,
                    to: w.end as usize,
                    live,
                });
            }
            local[i] = Some(cands.len());
            cands.push(Cand { zone: i, area, opts, needs });
        }
        let n = cands.len();
        let mut s = Self {
            cands,
            row_room,
            row_scale,
            cap_room,
            area_room,
            fixed: vec![Fixed::Free; n],
            value: 0,
            best: 0,
            best_choice: vec![None; n],
            deadline,
            stopped: false,
            open_bound: f64::NEG_INFINITY,
            nodes: 0,
        };
        s.offer_warm(warm);
        Some(s)
    }

    /// Take the warm plan as the first incumbent, if its starts are options of ours.
    fn offer_warm(&mut self, warm: &[Option<i32>]) {
        let mut choice = vec![None; self.cands.len()];
        let mut total = 0i64;
        for (k, c) in self.cands.iter().enumerate() {
            let Some(start) = warm.get(c.zone).copied().flatten() else { continue };
            let Some(o) = c.opts.iter().position(|o| 3 * o.quarter as i32 == start) else { return };
            choice[k] = Some(o);
            total += c.opts[o].cents;
        }
        if total > self.best {
            self.best = total;
            self.best_choice = choice;
        }
    }

    /// The best multipliers at the root: the dual of the LP relaxation (the same rows, each
    /// candidate at most one start, needs between candidates left out), solved by microlp.
    /// Its minimum is the Lagrangian bound's; any answer, float error included, is only a
    /// starting point, because `lagrange` bounds with whatever non-negative multipliers it has.
    fn dual_multipliers(&self) -> Option<Vec<f64>> {
        use good_lp::{Expression, ProblemVariables, Solution, SolverModel, WithTimeLimit, constraint::geq, variable};
        let nr = self.row_room.len();
        let months = self.cap_room.len();
        let mut vars = ProblemVariables::new();
        let y: Vec<good_lp::Variable> = (0..self.rows()).map(|_| vars.add(variable().min(0))).collect();
        let u: Vec<good_lp::Variable> = self.cands.iter().map(|_| vars.add(variable().min(0))).collect();
        let mut objective = Expression::with_capacity(y.len() + u.len());
        for (r, rhs) in self.right_hand_sides().into_iter().enumerate() {
            objective.add_mul(rhs, y[r]);
        }
        for x in &u {
            objective.add_mul(1.0, *x);
        }
        let mut rows = Vec::new();
        for (k, c) in self.cands.iter().enumerate() {
            for o in &c.opts {
                let mut e = Expression::with_capacity(o.rows.len() + 2 * (o.to - o.from) + 1);
                for (r, _, scaled) in &o.rows {
                    e.add_mul(*scaled, y[*r]);
                }
                for m in o.from..o.to {
                    e.add_mul(1.0, y[nr + m]);
                    if let Some(a) = c.area {
                        e.add_mul(1.0, y[nr + months + a * months + m]);
                    }
                }
                e.add_mul(1.0, u[k]);
                rows.push(geq(e, o.value));
            }
        }
        let secs = self.deadline.saturating_duration_since(Instant::now()).as_secs_f64().min(2.0);
        if secs <= 0.0 {
            return None;
        }
        let mut model = good_lp::microlp(vars.minimise(objective)).with_time_limit(secs);
        for r in rows {
            model.add_constraint(r);
        }
        let solved = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| model.solve())).ok()?.ok()?;
        Some(y.iter().map(|v| solved.value(*v).max(0.0)).collect())
    }

    /// The rows' right-hand sides in the multipliers' order: the room left, budget rows over
    /// their room at the root.
    fn right_hand_sides(&self) -> Vec<f64> {
        let budgets = self.row_room.iter().zip(&self.row_scale).map(|(r, s)| (*r).max(0) as f64 / s);
        let months = self.cap_room.iter().map(|c| *c as f64);
        let areas = self.area_room.iter().flat_map(|a| a.iter().map(|c| *c as f64));
        budgets.chain(months).chain(areas).collect()
    }

    fn rows(&self) -> usize {
        self.row_room.len() + self.cap_room.len() + self.area_room.len() * self.cap_room.len()
    }

    /// Whether candidate `k` can take option `o` given the zones fixed so far; with `relaxed`,
    /// a need not yet fixed counts as live at its earliest.
    fn fits(&self, k: usize, o: usize, relaxed: bool) -> bool {
        let c = &self.cands[k];
        let opt = &c.opts[o];
        let start = 3 * i64::from(opt.quarter);
        for a in &c.needs {
            match self.fixed[*a] {
                Fixed::Out => return false,
                Fixed::At(ao) if self.cands[*a].opts[ao].live > start => return false,
                Fixed::Free if !relaxed => return false,
                _ => {}
            }
        }
        opt.rows.iter().all(|(r, cents, _)| *cents <= self.row_room[*r])
            && (opt.from..opt.to).all(|m| self.cap_room[m] > 0 && c.area.is_none_or(|a| self.area_room[a][m] > 0))
    }

    fn apply(&mut self, k: usize, o: usize, sign: i64) {
        let c = &self.cands[k];
        let opt = &c.opts[o];
        for (r, cents, _) in &opt.rows {
            self.row_room[*r] -= sign * cents;
        }
        for m in opt.from..opt.to {
            self.cap_room[m] -= sign;
            if let Some(a) = c.area {
                self.area_room[a][m] -= sign;
            }
        }
        self.value += sign * opt.cents;
    }

    /// One node: fix what has no start left, bound, and branch on a candidate whose needs are
    /// all fixed. `mult` holds the multipliers (budget rows, months, areas x months).
    fn node(&mut self, mult: &mut [f64], steps: usize) {
        self.nodes += 1;
        if self.nodes.is_multiple_of(64) && Instant::now() >= self.deadline {
            self.stopped = true;
        }
        // The options each free candidate still has (needs not fixed: relaxed); a candidate
        // with none is out, which may leave those needing it with none.
        let n = self.cands.len();
        let mut avail: Vec<Vec<usize>> = vec![Vec::new(); n];
        let mut outed: Vec<usize> = Vec::new();
        loop {
            let mut changed = false;
            for (k, left) in avail.iter_mut().enumerate() {
                if self.fixed[k] == Fixed::Free {
                    *left = (0..self.cands[k].opts.len()).filter(|o| self.fits(k, *o, true)).collect();
                    if left.is_empty() {
                        self.fixed[k] = Fixed::Out;
                        outed.push(k);
                        changed = true;
                    }
                }
            }
            if !changed {
                break;
            }
        }
        self.branch(mult, steps, &avail);
        for k in outed {
            self.fixed[k] = Fixed::Free;
        }
    }

    /// Bound the node and branch on a free candidate whose needs are all fixed.
    fn branch(&mut self, mult: &mut [f64], steps: usize, avail: &[Vec<usize>]) {
        let n = self.cands.len();
        let free: Vec<usize> = (0..n).filter(|k| self.fixed[*k] == Fixed::Free).collect();
        if free.is_empty() {
            self.leaf();
            return;
        }
        let bound = self.value as f64 + self.lagrange(mult, avail, &free, steps);
        if !self.improves(bound) {
            return;
        }
        if self.stopped {
            self.open_bound = self.open_bound.max(bound);
            return;
        }
        // Branch on the ready candidate with the fewest starts left (ties: the first): measured on
        // the benchmark's instances, this fails a hopeless branch soonest, with two to four
        // times fewer nodes than the most valuable or the most wanted candidate first.
        let ready = free.iter().copied().filter(|k| self.cands[*k].needs.iter().all(|a| self.fixed[*a] != Fixed::Free));
        let Some(k) = ready.min_by_key(|k| (avail[*k].len(), *k)) else {
            return;
        };
        // Its starts by penalised value, best first; "not in the plan" (worth 0) in its place.
        let mut children: Vec<(f64, Option<usize>)> = avail[k]
            .iter()
            .filter(|o| self.fits(k, **o, false))
            .map(|o| (self.penalised(k, *o, mult), Some(*o)))
            .collect();
        children.push((0.0, None));
        children.sort_by(|a, b| b.0.total_cmp(&a.0));
        for (_, child) in children {
            if self.stopped {
                self.open_bound = self.open_bound.max(bound);
                break;
            }
            let mut m = mult.to_vec();
            match child {
                Some(o) => {
                    self.fixed[k] = Fixed::At(o);
                    self.apply(k, o, 1);
                    self.node(&mut m, CHILD_STEPS);
                    self.apply(k, o, -1);
                }
                None => {
                    self.fixed[k] = Fixed::Out;
                    self.node(&mut m, CHILD_STEPS);
                }
            }
            self.fixed[k] = Fixed::Free;
        }
    }

    /// No free candidate has a start left: the fixed ones are a plan.
    fn leaf(&mut self) {
        if self.value > self.best {
            self.best = self.value;
            self.best_choice = self.fixed.iter().map(|f| if let Fixed::At(o) = f { Some(*o) } else { None }).collect();
        }
    }

    /// A bound (cents) can hold a plan at least a cent better than the incumbent, allowing for
    /// the float rounding of the bound.
    fn improves(&self, bound: f64) -> bool {
        bound * (1.0 + 1e-9) + 1e-3 >= (self.best + 1) as f64
    }

    fn penalised(&self, k: usize, o: usize, mult: &[f64]) -> f64 {
        let c = &self.cands[k];
        let opt = &c.opts[o];
        let nr = self.row_room.len();
        let months = self.cap_room.len();
        let mut p = opt.value;
        for (r, _, scaled) in &opt.rows {
            p -= mult[*r] * scaled;
        }
        for m in opt.from..opt.to {
            p -= mult[nr + m];
            if let Some(a) = c.area {
                p -= mult[nr + months + a * months + m];
            }
        }
        p
    }

    /// The Lagrangian bound on the free candidates' value (cents), after up to `steps`
    /// subgradient steps from `mult` (left at the best multipliers found).
    fn lagrange(&self, mult: &mut [f64], avail: &[Vec<usize>], free: &[usize], steps: usize) -> f64 {
        let nr = self.row_room.len();
        let months = self.cap_room.len();
        let mut best_l = f64::INFINITY;
        let mut best_mult = mult.to_vec();
        let mut theta = 1.0;
        let mut since = 0;
        let rhs = self.right_hand_sides();
        let mut grad = vec![0.0; mult.len()];
        let target = (self.best + 1) as f64 - self.value as f64;
        for _ in 0..steps.max(1) {
            grad.copy_from_slice(&rhs);
            let mut l = 0.0;
            for (g, x) in grad.iter().zip(mult.iter()) {
                l += g * x;
            }
            for &k in free {
                let mut top = 0.0;
                let mut pick = None;
                for &o in &avail[k] {
                    let p = self.penalised(k, o, mult);
                    if p > top {
                        top = p;
                        pick = Some(o);
                    }
                }
                l += top;
                if let Some(o) = pick {
                    let c = &self.cands[k];
                    let opt = &c.opts[o];
                    for (r, _, scaled) in &opt.rows {
                        grad[*r] -= scaled;
                    }
                    for m in opt.from..opt.to {
                        grad[nr + m] -= 1.0;
                        if let Some(a) = c.area {
                            grad[nr + months + a * months + m] -= 1.0;
                        }
                    }
                }
            }
            if l < best_l {
                best_l = l;
                best_mult.copy_from_slice(mult);
                since = 0;
            } else {
                since += 1;
                if since >= PATIENCE {
                    theta /= 2.0;
                    since = 0;
                }
            }
            if best_l < target {
                break;
            }
            // Only the rows pushed past their room, or with a multiplier to give back, move.
            let norm: f64 =
                grad.iter().zip(mult.iter()).filter(|(g, x)| **g < 0.0 || **x > 0.0).map(|(g, _)| g * g).sum();
            if norm <= 0.0 {
                break; // the relaxed choice keeps every row: the bound is reached.
            }
            let step = theta * (l - target).max(1.0) / norm;
            for (x, g) in mult.iter_mut().zip(&grad) {
                *x = (*x - step * g).max(0.0);
            }
        }
        mult.copy_from_slice(&best_mult);
        best_l
    }
}

/// Subgradient steps at the root (from the LP dual's multipliers) and at a node below it (from
/// its parent's); steps without a better bound before the step length halves. Tuned on the
/// benchmark's instances (README, Performance).
const ROOT_STEPS: usize = 200;
const CHILD_STEPS: usize = 12;
const PATIENCE: usize = 20;
