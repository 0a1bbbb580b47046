"""Writes a group-scale scenario file: 1,000 zones with 4 drivers each and 60 months of ledger
entries per measuring zone's driver (240,000 bookings), all invented, for `pilot-ledger load`.

    python3 benches/scale_scenario.py target/scale.json [zones]
    cargo run --release -- --database-url sqlite://target/scale.db load target/scale.json

The file carries site settings (they replace a database's own). Every zone is "measuring" against an approved baseline that started 60 months ago, so the
ledger is full; codes are SCALE-0001 ... SCALE-1000 (new to any database holding the demo).
"""
import json
import random
import sys

ZONES, DRIVERS, MONTHS = 1000, 4, 60  # ZONES: the default; a second argument overrides it
KINDS = ["scrap", "energy", "downtime", "expert_time"]
UNITS = {"scrap": "pcs", "energy": "kWh", "downtime": "min", "expert_time": "h"}
VALUES = {"scrap": (8, 40), "energy": (0.08, 0.25), "downtime": (10, 40), "expert_time": (50, 110)}
QTY = {"scrap": (500, 5000), "energy": (20000, 400000), "downtime": (500, 5000), "expert_time": (100, 1500)}


def month(start_year, start_month, k):
    i = start_year * 12 + start_month - 1 + k
    return f"{i // 12:04d}-{i % 12 + 1:02d}"


def main(path, zones_count=ZONES):
    rng = random.Random(6)
    zones = []
    for z in range(zones_count):
        drivers = []
        for d in range(DRIVERS):
            kind = KINDS[d]
            likely = round(rng.uniform(*QTY[kind]))
            drivers.append({"label": f"{kind} {d + 1}", "kind": kind, "unit": UNITS[kind],
                            "qty_low": str(round(likely * 0.6)), "qty_likely": str(likely),
                            "qty_high": str(round(likely * 1.4)),
                            "unit_value": f"{rng.uniform(*VALUES[kind]):.2f}", "escalation": "0"})
        ledger = []
        for d in drivers:
            share = rng.uniform(0.5, 1.2)
            for k in range(MONTHS):
                q = float(d["qty_likely"]) / 12 * share * rng.uniform(0.8, 1.2)
                ledger.append({"kind": "saving", "driver": d["label"], "method": "direct",
                               "period": month(2021, 11, k), "quantity": f"{q:.1f}", "evidence": "meter export"})
        zones.append({
            "code": f"SCALE-{z + 1:05d}" if zones_count > 9999 else f"SCALE-{z + 1:04d}", "name": f"Generated zone {z + 1}", "status": "measuring",
            "readiness": {"data_reach": rng.randint(1, 5), "fit_with_systems": rng.randint(1, 5),
                          "expert_time": rng.randint(1, 5), "safe_while_running": rng.randint(1, 5)},
            "cases": [{"label": "Base", "horizon_months": 72, "start_month": "2021-11", "go_live_offset": 0,
                       "ramp_up_months": 0, "success_probability": "0.8", "state": "approved",
                       "costs": [{"label": "Kit", "category": "hardware", "kind": "one_off",
                                  "amount": str(rng.randint(20, 200) * 1000), "month_offset": 0, "capex": True},
                                 {"label": "Upkeep", "category": "people", "kind": "recurring",
                                  "amount": str(rng.randint(5, 30) * 1000), "month_offset": 1, "escalation": "0.03"}],
                       "drivers": drivers}],
            "ledger": ledger,
        })
    with open(path, "w") as f:
        site = {"plant_name": "Generated group (fictional)", "currency": "EUR", "hurdle_rate": "0.09"}
        json.dump({"format": "pilot-ledger-scenario", "version": 1, "site": site, "zones": zones}, f)
    print(f"{path}: {zones_count} zones, {zones_count * DRIVERS} drivers, {zones_count * DRIVERS * MONTHS} ledger entries")


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else "target/scale.json", int(sys.argv[2]) if len(sys.argv) > 2 else ZONES)
