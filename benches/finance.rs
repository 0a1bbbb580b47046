#![expect(missing_docs, reason = "criterion's macros generate undocumented functions")]
//! Finance benchmarks (criterion): IRR of 11- and 121-flow series, NPV one by one (Decimal and
//! f64) and as a batch, XIRR of 60 dated flows, and 10,000 Monte Carlo trials of a demo case.
//! `cargo bench --bench finance`; the head-to-head against numpy-financial and scipy is
//! `python3 benches/compare.py` (see README, Performance).

use criterion::{BatchSize, Criterion, criterion_group, criterion_main};
use pilot_ledger::domain::{Scenario, finance_input, quantity_ranges};
use pilot_ledger::finance::float::{irr_f64, npv_batch, npv_f64};
use pilot_ledger::finance::linear::LinearNpv;
use pilot_ledger::finance::montecarlo::{DEFAULT_TRIALS, simulate};
use pilot_ledger::finance::{irr, npv, xirr};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rust_decimal::Decimal;
use rust_decimal::prelude::FromPrimitive;
use std::hint::black_box;
use time::{Date, Duration, Month};

/// An investment now, then `n - 1` mostly positive yearly or monthly returns.
fn series(rng: &mut ChaCha8Rng, n: usize) -> Vec<f64> {
    let invest = rng.random_range(10_000.0..1_000_000.0);
    let mut v = vec![-invest];
    let per = invest * rng.random_range(1.1..2.5) / (n - 1) as f64;
    v.extend((1..n).map(|_| (per * rng.random_range(0.2..1.8) * 100.0).round() / 100.0));
    v
}

fn decimals(v: &[f64]) -> Vec<Decimal> {
    v.iter().map(|x| Decimal::from_f64(*x).unwrap_or_default()).collect()
}

fn bench(c: &mut Criterion) {
    let mut rng = ChaCha8Rng::seed_from_u64(6);
    let yearly: Vec<Vec<f64>> = (0..64).map(|_| series(&mut rng, 11)).collect();
    let monthly: Vec<Vec<f64>> = (0..64).map(|_| series(&mut rng, 121)).collect();
    let (yearly_d, monthly_d): (Vec<_>, Vec<_>) =
        (yearly.iter().map(|s| decimals(s)).collect(), monthly.iter().map(|s| decimals(s)).collect());
    let mut i = 0;
    let mut next = |n: usize| {
        i = (i + 1) % n;
        i
    };
    c.bench_function("irr 11 yearly flows (Decimal in)", |b| b.iter(|| irr(black_box(&yearly_d[next(64)]))));
    c.bench_function("irr 11 yearly flows (f64 in)", |b| b.iter(|| irr_f64(black_box(&yearly[next(64)]))));
    c.bench_function("irr 121 monthly flows (Decimal in)", |b| b.iter(|| irr(black_box(&monthly_d[next(64)]))));
    c.bench_function("irr 121 monthly flows (f64 in)", |b| b.iter(|| irr_f64(black_box(&monthly[next(64)]))));
    let rate = 0.0075;
    c.bench_function("npv 121 flows (Decimal)", |b| b.iter(|| npv(rate, black_box(&monthly_d[next(64)]))));
    c.bench_function("npv 121 flows (f64)", |b| b.iter(|| npv_f64(rate, black_box(&monthly[next(64)]))));
    let batch: Vec<f64> = (0..10_000).flat_map(|_| series(&mut rng, 121)).collect();
    c.bench_function("npv batch of 10,000 x 121 flows (f64, all cores)", |b| {
        b.iter(|| npv_batch(rate, black_box(&batch), 121))
    });

    let start = Date::from_calendar_date(2026, Month::January, 1).unwrap_or(Date::MIN);
    let dated: Vec<(Vec<Decimal>, Vec<Date>)> = (0..64)
        .map(|_| {
            let flows = decimals(&series(&mut rng, 60));
            let mut day = 0;
            let dates = (0..60)
                .map(|_| {
                    let d = start + Duration::days(day);
                    day += rng.random_range(20..40);
                    d
                })
                .collect();
            (flows, dates)
        })
        .collect();
    c.bench_function("xirr 60 dated flows", |b| {
        b.iter(|| {
            let (f, d) = &dated[next(64)];
            xirr(black_box(f), black_box(d))
        })
    });

    // 10,000 trials of the demo plant's PAINT-1 case.
    let scenario = Scenario::parse(pilot_ledger::cli::DEMO_SCENARIO, pilot_ledger::domain::NumberFormat::default())
        .unwrap_or_else(|e| panic!("{e}"));
    let zone = scenario.zones.iter().find(|z| z.zone.code == "PAINT-1").unwrap_or_else(|| panic!("PAINT-1"));
    let case = &zone.cases[0];
    let input = finance_input(&case.header, &case.costs, &case.drivers, None);
    let model = LinearNpv::new(&input, 0.09).unwrap_or_else(|e| panic!("{e}"));
    let ranges = quantity_ranges(case.drivers.iter()).unwrap_or_else(|e| panic!("{e}"));
    c.bench_function("monte carlo 10,000 trials of a demo case", |b| {
        b.iter_batched(
            || next(1 << 30) as u64,
            |seed| simulate(&model, &ranges, DEFAULT_TRIALS, seed),
            BatchSize::SmallInput,
        )
    });
}

criterion_group!(benches, bench);
criterion_main!(benches);
