"""Head-to-head: pilot-ledger's finance functions against numpy-financial (and, for XIRR, which
numpy-financial lacks, a bracketing scipy brentq on XNPV) on the same generated series.

Run from the repository root (installs nothing; needs `pip install numpy-financial==1.0.0 scipy`):
    python3 benches/compare.py
It writes target/compare/series.json, runs `cargo bench --bench compare` (the Rust side, in
release mode, reading that file), checks that both sides agree before any time counts, and
prints per-series times and ratios against the targets of the README's Performance table.
"""
import json
import os
import platform
import subprocess
import sys
import time

import numpy as np
import numpy_financial as npf
import scipy
from scipy.optimize import brentq

OUT = "target/compare"
RATE_YEARLY, RATE_MONTHLY = 0.09, (1.09 ** (1 / 12) - 1)


def series(rng, count, n):
    invest = rng.uniform(10_000, 1_000_000, size=count)
    ret = invest * rng.uniform(1.1, 2.5, size=count) / (n - 1)
    body = np.round(ret[:, None] * rng.uniform(0.2, 1.8, size=(count, n - 1)), 2)
    return np.hstack([-invest[:, None].round(2), body])


def best_of(repeats, fn):
    """Least wall time of `repeats` runs, in seconds, and the last result."""
    best, result = float("inf"), None
    for _ in range(repeats):
        t = time.perf_counter()
        result = fn()
        best = min(best, time.perf_counter() - t)
    return best, result


def xnpv(rate, flows, years):
    return float(np.sum(flows / (1.0 + rate) ** years))


def main():
    rng = np.random.default_rng(20261202)
    irr11 = series(rng, 10_000, 11)
    irr121 = series(rng, 1_000, 121)
    npv121 = series(rng, 10_000, 121)
    x_flows = series(rng, 1_000, 60)
    x_days = np.cumsum(np.hstack([np.zeros((1_000, 1)), rng.integers(20, 40, size=(1_000, 59))]), axis=1)
    os.makedirs(OUT, exist_ok=True)
    with open(f"{OUT}/series.json", "w") as f:
        json.dump({"irr11": irr11.tolist(), "irr121": irr121.tolist(), "npv121": npv121.tolist(),
                   "npv_rate": RATE_MONTHLY, "xirr_flows": x_flows.tolist(), "xirr_days": x_days.astype(int).tolist()}, f)

    ref = {}
    ref["irr11"] = best_of(3, lambda: [npf.irr(s) for s in irr11])
    ref["irr121"] = best_of(1, lambda: [npf.irr(s) for s in irr121])
    ref["npv_each"] = best_of(3, lambda: [npf.npv(RATE_MONTHLY, s) for s in npv121])
    disc = (1.0 + RATE_MONTHLY) ** -np.arange(121)
    ref["npv_batch"] = best_of(200, lambda: npv121 @ disc)
    years = x_days / 365.0
    ref["xirr"] = best_of(3, lambda: [brentq(xnpv, -0.99, 10.0, args=(x_flows[i], years[i]), xtol=1e-12)
                                      for i in range(len(x_flows))])

    subprocess.run(["cargo", "bench", "--bench", "compare", "--quiet"], check=True)
    with open(f"{OUT}/rust.json") as f:
        ours = json.load(f)

    def agree(name, a, b, tol):
        a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
        ok = ~np.isnan(a)
        worst = float(np.max(np.abs(a[ok] - b[ok]) / np.maximum(1.0, np.abs(a[ok])))) if ok.any() else 0.0
        if worst > tol or ok.sum() == 0:
            sys.exit(f"{name}: results disagree (worst relative difference {worst:.3g}); no time counts")
        return int(ok.sum()), worst

    checks = {
        "irr11": agree("irr11", ref["irr11"][1], ours["irr11"]["values"], 1e-9),
        "irr121": agree("irr121", ref["irr121"][1], ours["irr121"]["values"], 1e-9),
        "npv_each": agree("npv", ref["npv_each"][1], ours["npv_each"]["values"], 1e-9),
        "npv_batch": agree("npv batch", ref["npv_batch"][1], ours["npv_batch"]["values"], 1e-9),
        "xirr": agree("xirr", ref["xirr"][1], ours["xirr"]["values"], 1e-7),
    }
    rows = [
        ("IRR, 10,000 eleven-flow yearly series", "irr11", 10_000, "numpy-financial irr", 100),
        ("IRR, 1,000 121-flow monthly series", "irr121", 1_000, "numpy-financial irr", 1_000),
        ("NPV, 10,000 121-flow series one by one", "npv_each", 10_000, "numpy-financial npv", 20),
        ("NPV, 10,000 x 121 as one batch", "npv_batch", 10_000, "numpy matrix product", 1),
        ("XIRR, 1,000 series of 60 dated flows", "xirr", 1_000, "scipy brentq on XNPV", 20),
    ]
    print(f"machine: {platform.machine()}, {os.cpu_count()} cores; numpy {np.__version__}, "
          f"numpy-financial {npf.__version__}, scipy {scipy.__version__}")
    print(f"{'series':44} {'reference':>13} {'ours':>12} {'ratio':>9} {'target':>8}  agree (n, worst rel.)")
    for label, key, n, refname, target in rows:
        r, o = ref[key][0] / n, ours[key]["seconds"] / n
        ratio = r / o
        print(f"{label:44} {r * 1e6:10.3f} us {o * 1e6:9.4f} us {ratio:8.2f}x {target:>7}x  "
              f"{checks[key][0]}, {checks[key][1]:.1e}  {'met' if ratio >= target else 'MISSED'}  ({refname})")
    mc = ours["montecarlo"]["seconds"]
    print(f"{'Monte Carlo, 10,000 trials of PAINT-1':44} {'':>13} {mc * 1e3:9.3f} ms {'':>9} {'< 5 ms':>8}  "
          f"{'met' if mc < 0.005 else 'MISSED'}")
    for extra in ours.get("notes", []):
        print(extra)


if __name__ == "__main__":
    main()
