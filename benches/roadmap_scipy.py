"""The reference side of the roadmap benchmark: scipy.optimize.milp (HiGHS) on the instances
that `cargo bench --bench roadmap` writes to target/roadmap-bench/ (JSON format documented in
benches/roadmap/instances.rs), with the formulation of finance::roadmap:

- binary x[z, q] for each candidate z worth planning (value > 0, no need outside the plan,
  every zone it needs committed or itself worth planning) and each quarter q = 0 .. 4Y - 1;
  maximise sum value_z (1 + r_m)^(-3q) x[z, q] (each coefficient rounded to the cent);
- one start per zone: sum_q x[z, q] <= 1;
- budget rows per plan year (or, with carry_over, cumulative over years 0..y) in cents: the
  one-offs that fall in year y when z starts in month 3q, against the budget less what the
  committed zones spend there;
- capacity rows per plan month: zones inside their window <= capacity less the committed
  zones inside theirs; with one_per_area, the same per non-empty area against 1;
- precedence rows, aggregated: z started by quarter q (sum of x[z, q''] for q'' <= q) <= sum
  of x[a, q'] over the quarters q' in which a needed candidate a is live by month 3q
  (3q' + window_a <= 3q); a committed need removes the quarters before it is live.
Rows whose right-hand side the committed zones alone overrun are clamped at zero (no candidate
there), as the roadmap's overruns are reported, not made infeasible.

Usage (from the repository root; `pip install -r benches/requirements-roadmap.txt`):
    python3 benches/roadmap_scipy.py [--time-limit 10] [--table] [--highspy] INSTANCE.json ...
with the instances as target/roadmap-bench/{realistic,adversarial}-*.json (not results-*).
Prints one JSON object per instance (or, with --table, a markdown table): the time of the
milp() call alone (building the matrices is timed apart), whether HiGHS proved the optimum
(mip_rel_gap = 0), the gap at the time limit, the plan's value summed exactly from the rounded
coefficients, the start quarter of every zone, and an exact re-check of every rule in integer
cents (a float MILP may accept a plan a cent over budget).
"""
import argparse
import json
import sys
import time
from decimal import ROUND_HALF_UP, Decimal, localcontext

import numpy as np
import scipy
from scipy.optimize import Bounds, LinearConstraint, milp
from scipy.sparse import coo_matrix

CENT = Decimal("0.01")


def window(z):
    return z["go_live"] + max(z["ramp_up"], 1)


def value_at(z, q, rate):
    """The objective coefficient: the file's value_by_quarter (written by
    finance::roadmap::value_at), else value / (1 + r_m)^(3q) in 28-digit decimals, rounded to
    the cent, half away from zero."""
    if z.get("value_by_quarter"):
        return Decimal(z["value_by_quarter"][q])
    with localcontext() as ctx:
        ctx.prec = 28
        v = Decimal(z["value"]) / (1 + Decimal(repr(rate))) ** (3 * q)
        return v.quantize(CENT, rounding=ROUND_HALF_UP)


def plannable(inst):
    """Candidates worth planning: positive value, no need outside the plan, and every need
    committed or itself plannable (a fixpoint, so chains of needs resolve in any order)."""
    zones = inst["zones"]
    ok = [z["committed_start"] is None and Decimal(z["value"]) > 0 and not z["needs_outside"] for z in zones]
    changed = True
    while changed:
        changed = False
        for i, z in enumerate(zones):
            if ok[i] and any(zones[a]["committed_start"] is None and not ok[a] for a in z["needs"]):
                ok[i] = False
                changed = True
    return ok


def load(inst, month):
    """For zones started in these months (None: not started): cents per plan year, zones inside
    their window per plan month, and the same per area."""
    years, months = inst["years"], 12 * inst["years"]
    spend, count, by_area = [0] * years, [0] * months, {}
    for z, s in zip(inst["zones"], month):
        if s is None:
            continue
        for m, c in z["one_off_cents"]:
            if 0 <= s + m < months:
                spend[(s + m) // 12] += c
        for m in range(max(s, 0), min(s + window(z), months)):
            count[m] += 1
            if z["area"]:
                by_area.setdefault(z["area"], [0] * months)[m] += 1
    return spend, count, by_area


def committed_load(inst):
    return load(inst, [z["committed_start"] for z in inst["zones"]])


def build(inst):
    """Variables, objective coefficients (Decimal) and the rows (sparse A, upper bounds)."""
    zones, rate = inst["zones"], inst["monthly_rate"]
    years, quarters, months = inst["years"], 4 * inst["years"], 12 * inst["years"]
    ok = plannable(inst)
    variables, coef, index = [], [], {}
    for i, z in enumerate(zones):
        if not ok[i]:
            continue
        # A committed need: only quarters from the month it is live.
        earliest = max([zones[a]["committed_start"] + window(zones[a]) for a in z["needs"]
                        if zones[a]["committed_start"] is not None] + [0])
        for q in range(quarters):
            if 3 * q >= earliest:
                index[(i, q)] = len(variables)
                variables.append((i, q))
                coef.append(value_at(z, q, rate))
    rows, cols, vals, ub = [], [], [], []

    def row(entries, bound):
        r = len(ub)
        for col, v in entries:
            rows.append(r)
            cols.append(col)
            vals.append(v)
        ub.append(bound)

    for i in range(len(zones)):
        own = [index[(i, q)] for q in range(quarters) if (i, q) in index]
        if own:
            row([(c, 1) for c in own], 1)
    spend, count, by_area = committed_load(inst)
    per_year = [[] for _ in range(years)]
    for col, (i, q) in enumerate(variables):
        by_year = [0] * years
        for m, c in zones[i]["one_off_cents"]:
            if 3 * q + m < months:
                by_year[(3 * q + m) // 12] += c
        for y, c in enumerate(by_year):
            if c:
                per_year[y].append((col, c))
    budgets = inst["budgets_cents"]
    for y in range(years):
        if inst["carry_over"]:
            entries = {}
            for yy in range(y + 1):
                for col, c in per_year[yy]:
                    entries[col] = entries.get(col, 0) + c
            room = sum(budgets[: y + 1]) - sum(spend[: y + 1])
            row(sorted(entries.items()), max(room, 0))
        else:
            row(per_year[y], max(budgets[y] - spend[y], 0))
    inside = [[] for _ in range(months)]
    for col, (i, q) in enumerate(variables):
        for m in range(3 * q, min(3 * q + window(zones[i]), months)):
            inside[m].append(col)
    for m in range(months):
        if inside[m]:
            row([(c, 1) for c in inside[m]], max(inst["capacity"] - count[m], 0))
    if inst["one_per_area"]:
        areas = sorted({z["area"] for z in zones if z["area"]})
        for a in areas:
            busy = by_area.get(a, [0] * months)
            for m in range(months):
                cs = [c for c in inside[m] if zones[variables[c][0]]["area"] == a]
                if cs:
                    row([(c, 1) for c in cs], max(1 - busy[m], 0))
    for i, q in variables:
        for a in zones[i]["needs"]:
            if zones[a]["committed_start"] is not None:
                continue
            started_by = [(index[(i, qq)], 1) for qq in range(q + 1) if (i, qq) in index]
            live_by = [(index[(a, qq)], -1) for qq in range(quarters)
                       if (a, qq) in index and 3 * qq + window(zones[a]) <= 3 * q]
            row(started_by + live_by, 0)
    a = coo_matrix((vals, (rows, cols)), shape=(len(ub), len(variables))).tocsr()
    return variables, coef, a, np.array(ub, dtype=float)


def check(inst, starts):
    """Every rule in exact integers for these start quarters (None: not started): the first
    rule broken, or None."""
    zones, years, months = inst["zones"], inst["years"], 12 * inst["years"]
    month = [z["committed_start"] if z["committed_start"] is not None
             else (None if starts[i] is None else 3 * starts[i]) for i, z in enumerate(zones)]
    for i, z in enumerate(zones):
        s = month[i]
        if s is None or z["committed_start"] is not None:
            continue
        for a in z["needs"]:
            if month[a] is None or month[a] + window(zones[a]) > s:
                return f"{z['code']} starts before {zones[a]['code']} is live"
        if z["needs_outside"] or Decimal(z["value"]) <= 0:
            return f"{z['code']} cannot be planned"
    spend, count, area_count = load(inst, month)
    b = inst["budgets_cents"]
    for y in range(years):
        over = sum(spend[: y + 1]) - sum(b[: y + 1]) if inst["carry_over"] else spend[y] - b[y]
        if over > 0:
            return f"budget of plan year {y} over by {over} cents"
    for m in range(months):
        if count[m] > inst["capacity"]:
            return f"capacity exceeded in plan month {m}"
    if inst["one_per_area"]:
        for a, per in sorted(area_count.items()):
            if max(per) > 1:
                return f"two introductions in {a} in plan month {per.index(max(per))}"
    return None


def solve(inst, limit, runner=None):
    t0 = time.perf_counter()
    variables, coef, a, ub = build(inst)
    built = time.perf_counter() - t0
    out = {"name": inst["name"], "variables": len(variables), "rows": int(a.shape[0]),
           "build_seconds": built, "scipy": scipy.__version__, "numpy": np.__version__}
    if not variables:
        out.update(seconds=0.0, status=0, message="nothing to plan", proven=True, gap=0.0,
                   objective="0.00", bound=0.0, starts=[None] * len(inst["zones"]), check=None)
        return out
    c = -np.array([float(v) for v in coef])
    t1 = time.perf_counter()
    res = (runner or run)(c, a, ub, limit)
    out["seconds"] = time.perf_counter() - t1
    out["status"], out["message"] = int(res.status), str(res.message)
    out["proven"] = res.status == 0
    starts = [None] * len(inst["zones"])
    if res.x is not None:
        for col, x in enumerate(res.x):
            if x > 0.5:
                starts[variables[col][0]] = variables[col][1]
        objective = sum((coef[col] for col, x in enumerate(res.x) if x > 0.5), Decimal(0))
        out["objective"] = str(objective.quantize(CENT))
        out["check"] = check(inst, starts)
    else:
        out["objective"], out["check"] = None, None
    out["starts"] = starts
    out["bound"] = None if res.mip_dual_bound is None else -float(res.mip_dual_bound)
    out["gap"] = None if res.mip_gap is None else float(res.mip_gap)
    return out


def run(c, a, ub, limit):
    """Minimise c x over binary x with a x <= ub: scipy.optimize.milp, the reference."""
    return milp(c, integrality=np.ones(len(c)), bounds=Bounds(0, 1),
                constraints=LinearConstraint(a, -np.inf, ub),
                options={"time_limit": limit, "mip_rel_gap": 0.0, "presolve": True})


def run_highspy(c, a, ub, limit):
    """The same model and options as `run`, through the highspy package, whose HiGHS release
    can differ from the one scipy bundles (a check on the release, not the reference)."""
    import highspy
    from types import SimpleNamespace
    n, m = len(c), a.shape[0]
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = n, m
    lp.col_cost_, lp.col_lower_, lp.col_upper_ = c, np.zeros(n), np.ones(n)
    lp.row_lower_, lp.row_upper_ = np.full(m, -highspy.kHighsInf), ub
    csc = a.tocsc()
    lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    lp.a_matrix_.start_, lp.a_matrix_.index_ = csc.indptr, csc.indices
    lp.a_matrix_.value_ = csc.data.astype(float)
    lp.integrality_ = [highspy.HighsVarType.kInteger] * n
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    for k, v in {"time_limit": limit, "mip_rel_gap": 0.0, "presolve": "on"}.items():
        h.setOptionValue(k, v)
    h.passModel(lp)
    h.run()
    info, status = h.getInfo(), h.getModelStatus()
    has_x = info.primal_solution_status == 2  # kSolutionStatusFeasible
    return SimpleNamespace(
        status=0 if status == highspy.HighsModelStatus.kOptimal else 1, message=h.modelStatusToString(status),
        x=np.array(h.getSolution().col_value) if has_x else None,
        mip_dual_bound=info.mip_dual_bound if has_x else None, mip_gap=info.mip_gap if has_x else None)


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--time-limit", type=float, default=10.0, help="seconds per instance (default 10)")
    p.add_argument("--table", action="store_true", help="a markdown table instead of JSON lines")
    p.add_argument("--highspy", action="store_true",
                   help="solve through the installed highspy instead of scipy (same model and options)")
    p.add_argument("instances", nargs="+", help="instance JSON files")
    args = p.parse_args()
    results = []
    for path in args.instances:
        with open(path) as f:
            inst = json.load(f)
        if inst.get("format") != "pilot-ledger roadmap instance" or inst.get("version") != 1:
            sys.exit(f"{path}: not a version 1 pilot-ledger roadmap instance")
        r = solve(inst, args.time_limit, run_highspy if args.highspy else run)
        results.append(r)
        if not args.table:
            print(json.dumps(r), flush=True)
    if args.table:
        if args.highspy:
            import highspy
            solver = f"highspy {highspy.Highs().version()}"
        else:
            from scipy.optimize._highspy import _core
            solver = f"scipy {scipy.__version__} (HiGHS {_core.HIGHS_VERSION_MAJOR}.{_core.HIGHS_VERSION_MINOR}.{_core.HIGHS_VERSION_PATCH})"
        print(f"{solver}, numpy {np.__version__}, time limit {args.time_limit:g} s\n")
        print("| instance | variables | rows | seconds | proven or gap | objective | exact re-check |")
        print("|---|---|---|---|---|---|---|")
        for r in results:
            state = "proven" if r["proven"] else ("no plan" if r["gap"] is None else f"gap {100 * r['gap']:.2f} %")
            print(f"| {r['name']} | {r['variables']} | {r['rows']} | {r['seconds']:.2f} | {state} | "
                  f"{r['objective']} | {r['check'] or 'ok'} |")


if __name__ == "__main__":
    main()
