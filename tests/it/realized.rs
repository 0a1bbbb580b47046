//! Realized figures (src/finance/realized.rs) against outside references: a worked IPMVP-style
//! avoided-energy example (common practice, hand arithmetic), hand-computed realization and
//! forecast examples, and a scipy fixture of dated zone histories (tests/fixtures/scipy_xirr.py).

use pilot_ledger::finance::{
    FinanceError, Realization, forecast_at_completion, realization, realized_return, volume_adjusted_avoided,
    xirr_outcome,
};
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;
use serde::Deserialize;
use time::Date;
use time::macros::{date, format_description};

fn d(s: &str) -> Decimal {
    s.parse().unwrap()
}

fn ints(v: &[i64]) -> Vec<Decimal> {
    v.iter().map(|&x| Decimal::from(x)).collect()
}

// ---------------------------------------------------------------------------------------------
// Normalized avoided quantity
// ---------------------------------------------------------------------------------------------

#[test]
fn volume_adjusted_avoided_worked_example() {
    // Common practice, hand arithmetic (the IPMVP "avoided energy" idea: adjusted baseline minus
    // reporting-period consumption): a baseline of 41.5 kWh per unit, 3,100 units produced in the
    // reporting period: adjusted baseline 41.5 x 3,100 = 128,650 kWh; 124,000 kWh metered;
    // 128,650 - 124,000 = 4,650 kWh avoided.
    assert_eq!(volume_adjusted_avoided(d("41.5"), d("3100"), d("124000")).unwrap(), d("4650"));
    // Same intensity, fewer units (2,900): 41.5 x 2,900 = 120,350 kWh adjusted baseline; 124,000
    // metered: 120,350 - 124,000 = -3,650 kWh, a loss, returned negative (not clamped).
    assert_eq!(volume_adjusted_avoided(d("41.5"), d("2900"), d("124000")).unwrap(), d("-3650"));
    // Exact Decimal arithmetic with fractions: 0.37 x 12,345.6 - 4,500.25 = 4,567.872 - 4,500.25
    // = 67.622.
    assert_eq!(volume_adjusted_avoided(d("0.37"), d("12345.6"), d("4500.25")).unwrap(), d("67.622"));
    // Zeros are accepted: nothing produced, nothing metered.
    assert_eq!(volume_adjusted_avoided(d("41.5"), Decimal::ZERO, Decimal::ZERO).unwrap(), Decimal::ZERO);
    // No production but consumption: all of it is a loss.
    assert_eq!(volume_adjusted_avoided(d("41.5"), Decimal::ZERO, d("500")).unwrap(), d("-500"));
}

#[test]
fn volume_adjusted_avoided_rejects_negative_inputs() {
    let invalid = |field: &str| FinanceError::InvalidInput { field: field.into(), reason: "must be zero or more" };
    assert_eq!(volume_adjusted_avoided(d("-41.5"), d("3100"), d("124000")), Err(invalid("baseline intensity")));
    assert_eq!(volume_adjusted_avoided(d("41.5"), d("-1"), d("124000")), Err(invalid("reporting-period volume")));
    assert_eq!(volume_adjusted_avoided(d("41.5"), d("3100"), d("-0.01")), Err(invalid("measured consumption")));
    // The message names the input for the user.
    let msg = volume_adjusted_avoided(d("41.5"), d("3100"), d("-1")).unwrap_err().to_string();
    assert_eq!(msg, "measured consumption: must be zero or more");
    // Negative zero is zero, not negative.
    assert_eq!(volume_adjusted_avoided(d("-0"), d("3100"), d("0")).unwrap(), Decimal::ZERO);
}

// ---------------------------------------------------------------------------------------------
// Realization and forecast at completion
// ---------------------------------------------------------------------------------------------

#[test]
fn realization_hand_computed() {
    let expected = ints(&[500, 1000, 1000, 1000, 1000, 1000]);
    let measured = ints(&[400, 900, 1100, 700]);
    // Two months: expected 500 + 1,000 = 1,500, measured 400 + 900 = 1,300; 1,300 / 1,500 =
    // 0.8666...
    let r = realization(&expected, &measured, 2);
    assert_eq!((r.expected_to_date, r.measured_to_date), (d("1500"), d("1300")));
    assert!((r.rate.unwrap() - 13.0 / 15.0).abs() < 1e-15);
    // Four months: 3,500 expected, 400 + 900 + 1,100 + 700 = 3,100 measured.
    let r = realization(&expected, &measured, 4);
    assert_eq!((r.expected_to_date, r.measured_to_date), (d("3500"), d("3100")));
    assert!((r.rate.unwrap() - 31.0 / 35.0).abs() < 1e-15);
    // Five months: the measured slice has only four; month 4 counts as zero: 4,500 expected,
    // 3,100 measured.
    let r = realization(&expected, &measured, 5);
    assert_eq!((r.expected_to_date, r.measured_to_date), (d("4500"), d("3100")));
    // Elapsed beyond both slices: all of each: 5,500 and 3,100.
    let r = realization(&expected, &measured, 100);
    assert_eq!((r.expected_to_date, r.measured_to_date), (d("5500"), d("3100")));
    // Measured entries past the elapsed months are ignored: 1 month, 500 vs 400 = 0.8 exactly.
    assert_eq!(realization(&expected, &measured, 1).rate, Some(0.8));
    // Exactly as expected.
    assert_eq!(realization(&expected, &expected, 6).rate, Some(1.0));
    // A measured loss against a positive plan: 500 expected, -250 measured: -0.5.
    assert_eq!(realization(&expected, &ints(&[-250]), 1).rate, Some(-0.5));
}

#[test]
fn realization_zero_expected_and_nothing_elapsed() {
    let zero = Realization { expected_to_date: Decimal::ZERO, measured_to_date: Decimal::ZERO, rate: None };
    // Nothing elapsed.
    assert_eq!(realization(&ints(&[100]), &ints(&[100]), 0), zero);
    // Empty slices.
    assert_eq!(realization(&[], &[], 12), zero);
    // Go-live in month 2: nothing expected in months 0 and 1, but 30 measured: no rate.
    let r = realization(&ints(&[0, 0, 100]), &ints(&[10, 20]), 2);
    assert_eq!((r.expected_to_date, r.measured_to_date, r.rate), (Decimal::ZERO, d("30"), None));
    // Expected amounts that cancel (+100, -100) also have no rate.
    assert_eq!(realization(&ints(&[100, -100]), &ints(&[50, 50]), 2).rate, None);
}

#[test]
fn forecast_at_completion_hand_computed() {
    let expected = ints(&[500, 1000, 1000, 1000, 1000, 1000]);
    let measured = ints(&[400, 900, 1100, 700]);
    // Four months: 3,100 measured of 3,500 expected; remaining 1,000 + 1,000 = 2,000 at 31/35:
    // 2,000 x 3,100 / 3,500 = 1,771.428571...; FAC = 3,100 + 1,771.428571... = 4,871.428571...
    let fac = forecast_at_completion(&expected, &measured, 4);
    assert_eq!(fac.round_dp(10), d("4871.4285714286"));
    // Computed in Decimal (28 significant digits), not through an f64 rate.
    assert_eq!(fac, d("3100") + d("2000") * d("3100") / d("3500"));
    // One month: 400 of 500 (0.8); remaining 5,000 x 0.8 = 4,000; FAC = 4,400.
    assert_eq!(forecast_at_completion(&expected, &measured, 1), d("4400"));
    // Nothing elapsed: no rate, so rate 1: the whole plan, 5,500.
    assert_eq!(forecast_at_completion(&expected, &measured, 0), d("5500"));
    // Elapsed at the end of the plan: nothing remains, FAC = measured over 6 months = 3,100
    // (months 4 and 5 missing: zero).
    assert_eq!(forecast_at_completion(&expected, &measured, 6), d("3100"));
    // Elapsed beyond both slices: the same 3,100.
    assert_eq!(forecast_at_completion(&expected, &measured, 60), d("3100"));
    // Measured longer than the plan, elapsed past both: every measured month counts.
    assert_eq!(forecast_at_completion(&ints(&[100, 100]), &ints(&[90, 90, 90]), 3), d("270"));
}

#[test]
fn forecast_at_completion_zero_expected_and_losses() {
    // Go-live in month 2: 0 expected in months 0-1, 30 measured anyway; no rate, so rate 1:
    // FAC = 30 + (100 + 100) = 230.
    assert_eq!(forecast_at_completion(&ints(&[0, 0, 100, 100]), &ints(&[10, 20]), 2), d("230"));
    // Nothing measured against 1,000 expected (rate 0): FAC = 0 + 2,000 x 0 = 0.
    assert_eq!(forecast_at_completion(&ints(&[1000, 1000, 1000]), &ints(&[0]), 1), Decimal::ZERO);
    // A loss so far (-200 of 1,000, rate -0.2): FAC = -200 + 2,000 x -0.2 = -600.
    assert_eq!(forecast_at_completion(&ints(&[1000, 1000, 1000]), &ints(&[-200]), 1), d("-600"));
    // Over-realization (1,500 of 1,000, rate 1.5): FAC = 1,500 + 2,000 x 1.5 = 4,500.
    assert_eq!(forecast_at_completion(&ints(&[1000, 1000, 1000]), &ints(&[1500]), 1), d("4500"));
    // Empty plan and no measurements.
    assert_eq!(forecast_at_completion(&[], &[], 0), Decimal::ZERO);
}

// ---------------------------------------------------------------------------------------------
// Realized XNPV / XIRR
// ---------------------------------------------------------------------------------------------

#[test]
fn realized_return_aggregates_by_date_in_any_order() {
    // -1,000 on 2021-01-01 (two entries: -600, -400), +1,210 on 2023-01-01 (1,300 savings, -90
    // spending), listed out of order. 2021-01-01 to 2023-01-01 is 730 days = 2 years of 365:
    // at 10 %, 1,210 / 1.21 = 1,000, so XNPV = 0 exactly and XIRR = 10 %.
    let flows = [
        (date!(2023 - 01 - 01), d("1300")),
        (date!(2021 - 01 - 01), d("-600")),
        (date!(2023 - 01 - 01), d("-90")),
        (date!(2021 - 01 - 01), d("-400")),
    ];
    let r = realized_return(0.10, &flows).unwrap();
    assert_eq!(r.xnpv, Decimal::ZERO);
    assert!((r.xirr.unwrap() - 0.10).abs() < 1e-12);
    assert_eq!(r.xirr_note, None);
    // Every order gives the same result, and the same as the flows pre-summed and sorted.
    let summed = [(date!(2021 - 01 - 01), d("-1000")), (date!(2023 - 01 - 01), d("1210"))];
    let reference = realized_return(0.10, &summed).unwrap();
    let mut permuted = flows.to_vec();
    for _ in 0..flows.len() {
        permuted.rotate_left(1);
        permuted.swap(0, 2);
        assert_eq!(realized_return(0.10, &permuted).unwrap(), reference);
    }
    // The earliest date is d_0 even when listed last: the savings a year later are discounted,
    // not the outlay compounded (which is what xnpv does from the first listed date).
    let late_first = [(date!(2022 - 01 - 01), d("1100")), (date!(2021 - 01 - 01), d("-1000"))];
    let r = realized_return(0.10, &late_first).unwrap();
    assert_eq!(r.xnpv, Decimal::ZERO); // 1,100 / 1.1 - 1,000
    // At 0 %: the plain sum.
    assert_eq!(realized_return(0.0, &late_first).unwrap().xnpv, d("100"));
}

#[test]
fn realized_return_without_xirr_and_errors() {
    assert_eq!(realized_return(0.09, &[]), Err(FinanceError::EmptyFlows));
    let flows = [(date!(2024 - 03 - 31), d("-5000")), (date!(2024 - 04 - 30), d("100"))];
    assert_eq!(realized_return(-1.0, &flows), Err(FinanceError::RateOutOfRange { rate: -1.0 }));
    assert!(matches!(realized_return(f64::NAN, &flows), Err(FinanceError::RateOutOfRange { .. })));
    // Only the outlay so far: XNPV is the outlay, no XIRR, a note for the user.
    let r = realized_return(0.09, &flows[..1]).unwrap();
    assert_eq!((r.xnpv, r.xirr), (d("-5000"), None));
    assert!(r.xirr_note.unwrap().contains("never change sign"));
    // Savings on the outlay's date cancel it: one date, zero flow.
    let cancel = [(date!(2024 - 03 - 31), d("-5000")), (date!(2024 - 03 - 31), d("5000"))];
    let r = realized_return(0.09, &cancel).unwrap();
    assert_eq!((r.xnpv, r.xirr), (Decimal::ZERO, None));
    assert!(r.xirr_note.is_some());
}

#[derive(Deserialize)]
struct Fixture {
    scipy_version: String,
    annual_rate: f64,
    cases: Vec<History>,
}

#[derive(Deserialize)]
struct History {
    name: String,
    months: usize,
    entries: usize,
    dates: usize,
    negative_months: usize,
    sign_changes: usize,
    shuffled: bool,
    flows: Vec<(String, String)>,
    xnpv: String,
    roots: Vec<f64>,
    xirr: Option<f64>,
}

impl History {
    fn flows(&self) -> Vec<(Date, Decimal)> {
        let iso = format_description!("[year]-[month]-[day]");
        self.flows.iter().map(|(t, a)| (Date::parse(t, &iso).unwrap(), d(a))).collect()
    }
}

fn fixture() -> Fixture {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/scipy_xirr.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

#[test]
fn scipy_fixture_covers_what_it_claims() {
    let fx = fixture();
    assert_eq!(fx.scipy_version, "1.17.1");
    assert_eq!(fx.annual_rate, 0.09);
    let cases = &fx.cases;
    assert!(cases.len() >= 50, "{} histories", cases.len());
    assert_eq!(cases.iter().map(|c| c.months).min(), Some(12));
    assert_eq!(cases.iter().map(|c| c.months).max(), Some(60));
    for c in cases {
        assert_eq!(c.flows.len(), c.entries, "{}", c.name);
    }
    // Some months with a negative net, several entries on one date, shuffled entries.
    assert!(cases.iter().filter(|c| c.negative_months > 0).count() >= 20);
    assert!(cases.iter().all(|c| c.dates < c.entries));
    assert!(cases.iter().filter(|c| c.shuffled).count() >= 20);
    // Positive and negative XIRRs, several sign changes, no XIRR at all.
    assert!(cases.iter().filter(|c| c.xirr.is_some_and(|r| r > 0.0)).count() >= 20);
    assert!(cases.iter().filter(|c| c.xirr.is_some_and(|r| r < 0.0)).count() >= 20);
    assert!(cases.iter().filter(|c| c.sign_changes > 1).count() >= 30);
    assert!(cases.iter().filter(|c| c.xirr.is_none()).count() >= 3);
}

#[test]
fn realized_return_matches_scipy_fixture() {
    let fx = fixture();
    let (mut with_xirr, mut several_roots) = (0, 0);
    for c in &fx.cases {
        let flows = c.flows();
        let r = realized_return(fx.annual_rate, &flows).unwrap();
        // XNPV: the fixture's is computed in 50-digit decimal arithmetic; ours uses an f64
        // discount factor per flow. 1e-9 relative.
        let reference = d(&c.xnpv);
        let diff = (r.xnpv - reference).abs().to_f64().unwrap();
        assert!(diff <= 1e-9 * reference.abs().to_f64().unwrap(), "{}: xnpv {} vs {reference}", c.name, r.xnpv);
        // XIRR: scipy brentq on scanned brackets; 1e-7.
        match (r.xirr, c.xirr) {
            (Some(ours), Some(scipy)) => {
                assert!((ours - scipy).abs() <= 1e-7, "{}: xirr {ours} vs scipy {scipy}", c.name);
                with_xirr += 1;
            }
            (None, None) => assert!(r.xirr_note.is_some(), "{}", c.name),
            (ours, scipy) => panic!("{}: xirr {ours:?} vs scipy {scipy:?} ({:?})", c.name, r.xirr_note),
        }
        // Every root scipy found, and no other: compare with the full outcome on the same flows.
        // In date order: a date before the first listed one is refused, and the roots (annual
        // rates) do not depend on which date is time 0.
        let mut sorted = flows.clone();
        sorted.sort_by_key(|&(day, _)| day);
        let (dates, amounts): (Vec<Date>, Vec<Decimal>) = sorted.into_iter().unzip();
        let roots = xirr_outcome(&amounts, &dates).map(|o| o.roots).unwrap_or_default();
        assert_eq!(roots.len(), c.roots.len(), "{}: roots {roots:?} vs scipy {:?}", c.name, c.roots);
        for (ours, scipy) in roots.iter().zip(&c.roots) {
            assert!((ours - scipy).abs() <= 1e-7, "{}: root {ours} vs scipy {scipy}", c.name);
        }
        if c.roots.len() > 1 {
            several_roots += 1;
            assert!(r.xirr_note.is_some(), "{}: several roots need a note", c.name);
        }
    }
    assert!(with_xirr >= 50, "{with_xirr} histories with an XIRR");
    assert!(several_roots >= 1);
}
