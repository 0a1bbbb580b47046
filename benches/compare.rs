//! The Rust side of `benches/compare.py`: reads target/compare/series.json, times our functions
//! on exactly those series (best of several runs) and writes target/compare/rust.json with the
//! results, so the script can check agreement before comparing times.
#![expect(clippy::unwrap_used, clippy::expect_used, reason = "a benchmark binary, not a request path")]

use pilot_ledger::domain::{Scenario, finance_input, quantity_ranges};
use pilot_ledger::finance::float::{npv_batch, npv_f64};
use pilot_ledger::finance::linear::LinearNpv;
use pilot_ledger::finance::montecarlo::{DEFAULT_TRIALS, simulate};
use pilot_ledger::finance::{irr, npv, xirr};
use rust_decimal::Decimal;
use rust_decimal::prelude::FromPrimitive;
use serde::Deserialize;
use serde_json::json;
use std::hint::black_box;
use std::time::Instant;
use time::{Date, Duration, Month};

#[derive(Deserialize)]
struct Input {
    irr11: Vec<Vec<f64>>,
    irr121: Vec<Vec<f64>>,
    npv121: Vec<Vec<f64>>,
    npv_rate: f64,
    xirr_flows: Vec<Vec<f64>>,
    xirr_days: Vec<Vec<i64>>,
}

/// Least wall time of `repeats` runs, and the last result.
fn best_of<T>(repeats: usize, mut f: impl FnMut() -> T) -> (f64, T) {
    let mut best = f64::INFINITY;
    let mut out = None;
    for _ in 0..repeats {
        let t = Instant::now();
        let r = black_box(f());
        best = best.min(t.elapsed().as_secs_f64());
        out = Some(r);
    }
    (best, out.expect("at least one run"))
}

fn decimals(v: &[f64]) -> Vec<Decimal> {
    v.iter().map(|x| Decimal::from_f64(*x).unwrap_or_default()).collect()
}

fn chosen(flows: &[Decimal]) -> f64 {
    irr(flows).ok().and_then(|o| o.chosen).unwrap_or(f64::NAN)
}

fn main() {
    let text = std::fs::read_to_string("target/compare/series.json").expect("run benches/compare.py");
    let input: Input = serde_json::from_str(&text).unwrap();
    let d11: Vec<Vec<Decimal>> = input.irr11.iter().map(|s| decimals(s)).collect();
    let d121: Vec<Vec<Decimal>> = input.irr121.iter().map(|s| decimals(s)).collect();
    let (t11, irr11) = best_of(5, || d11.iter().map(|s| chosen(s)).collect::<Vec<_>>());
    let (t121, irr121) = best_of(5, || d121.iter().map(|s| chosen(s)).collect::<Vec<_>>());
    let rate = input.npv_rate;
    let (t_each, npv_each) = best_of(5, || input.npv121.iter().map(|s| npv_f64(rate, s).unwrap()).collect::<Vec<_>>());
    // One matrix, row after row, as numpy's matrix product gets it.
    let width = input.npv121[0].len();
    let matrix: Vec<f64> = input.npv121.concat();
    let (t_batch, npv_b) = best_of(200, || npv_batch(rate, &matrix, width).unwrap());
    let dn: Vec<Vec<Decimal>> = input.npv121.iter().map(|s| decimals(s)).collect();
    let (t_dec, _) = best_of(3, || dn.iter().map(|s| npv(rate, s).unwrap()).collect::<Vec<_>>());

    let start = Date::from_calendar_date(2026, Month::January, 1).unwrap();
    let xflows: Vec<Vec<Decimal>> = input.xirr_flows.iter().map(|s| decimals(s)).collect();
    let xdates: Vec<Vec<Date>> =
        input.xirr_days.iter().map(|d| d.iter().map(|&n| start + Duration::days(n)).collect()).collect();
    let (t_x, xirrs) =
        best_of(5, || xflows.iter().zip(&xdates).map(|(f, d)| xirr(f, d).unwrap_or(f64::NAN)).collect::<Vec<_>>());

    let scenario =
        Scenario::parse(pilot_ledger::cli::DEMO_SCENARIO, pilot_ledger::domain::NumberFormat::default()).unwrap();
    let zone = scenario.zones.iter().find(|z| z.zone.code == "PAINT-1").unwrap();
    let case = &zone.cases[0];
    let model = LinearNpv::new(&finance_input(&case.header, &case.costs, &case.drivers, None), 0.09).unwrap();
    let ranges = quantity_ranges(case.drivers.iter()).unwrap();
    let mut seed = 0;
    let (t_mc, _) = best_of(50, || {
        seed += 1;
        simulate(&model, &ranges, DEFAULT_TRIALS, seed).unwrap()
    });

    let out = json!({
        "irr11": {"seconds": t11, "values": irr11},
        "irr121": {"seconds": t121, "values": irr121},
        "npv_each": {"seconds": t_each, "values": npv_each},
        "npv_batch": {"seconds": t_batch, "values": npv_b},
        "xirr": {"seconds": t_x, "values": xirrs},
        "montecarlo": {"seconds": t_mc},
        "notes": [
            format!("IRR and XIRR rows time pilot_ledger::finance::irr / xirr (Decimal flows in); NPV rows time finance::float::npv_f64 / npv_batch (f64)."),
            format!("Decimal NPV (finance::npv, what the pages show): {:.2} us per 121-flow series.", t_dec / dn.len() as f64 * 1e6),
        ],
    });
    std::fs::write("target/compare/rust.json", out.to_string()).unwrap();
}
