//! `POST /api/v1/metrics`: the stateless metrics endpoint (contract in the OpenAPI document).
//!
//! Body `{"rate", "flows", optional "dates", "finance_rate", "reinvest_rate"}`; numbers may be
//! JSON strings or numbers; rates are fractions per period. Answers NPV, IRR (with every root
//! when ambiguous), MIRR, payback, discounted payback, PI, and XNPV / XIRR when dates are given.
//! Values are decimal strings, or null where undefined.

use super::{ApiError, ApiQuery, AppError, JsonBody, NoQuery};
use crate::domain::{FieldErrors, NumberFormat};
use crate::finance::{self, FinanceError};
use axum::Json;
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};
use serde_json::{Value, json};

/// Most flows (and dates) one request may carry: 200 years of monthly flows, more than any
/// case here has, and a bound on the work of the root search (7 s in a debug build for the
/// worst series found: dated flows of random signs).
pub const MAX_FLOWS: usize = 2400;

/// Largest metrics body: 2,400 flows of 28 digits and their dates take about 120 KiB. The body
/// is read into a JSON tree before the flows are counted, and a 2 MiB body of 330,000 short
/// flows made a 60 MB tree: this bound keeps the tree of any body under about 10 MB.
pub const METRICS_MAX_BYTES: usize = 256 * 1024;

/// A rate as a decimal string, at full precision: the shortest text that reads back as the
/// same double (Rust never writes an exponent), so NPV at a returned IRR is as close to zero as
/// the double allows.
pub fn rate_text(r: f64) -> String {
    r.to_string()
}

/// Money (or a ratio) as a decimal string, at full precision (every digit the Decimal holds,
/// trailing zeros dropped).
pub fn money_text(d: Decimal) -> String {
    d.normalize().to_string()
}

/// The raw body: every field kept as JSON so that each can be rejected by name.
#[derive(Deserialize, Serialize)]
pub struct MetricsRequest {
    rate: Option<Value>,
    flows: Option<Value>,
    dates: Option<Value>,
    finance_rate: Option<Value>,
    reinvest_rate: Option<Value>,
}

fn number(v: &Value) -> Result<Decimal, String> {
    match v {
        Value::String(s) => NumberFormat::Plain.read(s),
        // Rust writes a double's shortest round-trip text without an exponent.
        Value::Number(n) => match n.as_i64() {
            Some(i) => Ok(Decimal::from(i)),
            None => NumberFormat::Plain.read(&n.as_f64().map_or_else(|| n.to_string(), |f| f.to_string())),
        },
        _ => Err("a number, as a JSON number or a decimal string such as \"-1000.50\"".into()),
    }
}

fn rate(v: &Value) -> Result<f64, String> {
    use rust_decimal::prelude::ToPrimitive;
    let d = number(v)?;
    if d <= Decimal::NEGATIVE_ONE {
        return Err("a rate greater than -1 (rates are fractions: 0.1 = 10 %)".into());
    }
    // The finance engine computes in doubles, where a rate this close to -1 is -1 itself.
    match d.to_f64() {
        Some(r) if r > -1.0 => Ok(r),
        Some(_) => {
            Err(format!("a rate greater than -1: {d} is -1 in double precision, where the figures are computed"))
        }
        None => Err("a rate within range".into()),
    }
}

struct Parsed {
    rate: f64,
    flows: Vec<Decimal>,
    dates: Option<Vec<time::Date>>,
    finance_rate: f64,
    reinvest_rate: f64,
}

fn parse(req: &MetricsRequest) -> Result<Parsed, FieldErrors> {
    let mut e = FieldErrors::default();
    let rate_v = match &req.rate {
        Some(v) => e.take("rate", rate(v)),
        None => e.take("rate", Err("required: the discount rate per period, e.g. \"0.1\"".into())),
    };
    let mut flows = Vec::new();
    match &req.flows {
        Some(Value::Array(items)) if items.len() > MAX_FLOWS => {
            e.push("flows", format!("at most {MAX_FLOWS} flows per request: {} given", items.len()));
        }
        Some(Value::Array(items)) if !items.is_empty() => {
            for (i, v) in items.iter().enumerate() {
                if let Some(d) = e.take(&format!("flows[{i}]"), number(v)) {
                    flows.push(d);
                }
            }
        }
        Some(Value::Array(_)) => e.push("flows", "at least one cash flow is needed"),
        _ => e.push("flows", "required: an array of cash flows, first at time 0, e.g. [\"-1000\", \"300\"]"),
    }
    let dates = match &req.dates {
        None | Some(Value::Null) => None,
        Some(Value::Array(items)) => {
            if let Some(Value::Array(f)) = &req.flows
                && f.len() != items.len()
            {
                e.push("dates", format!("one date per flow: {} dates for {} flows", items.len(), f.len()));
            }
            let format = time::macros::format_description!("[year]-[month]-[day]");
            let mut out = Vec::with_capacity(items.len().min(MAX_FLOWS));
            // Past the limit the flows are refused: no need to read a date of them.
            for (i, v) in items.iter().enumerate().take(MAX_FLOWS) {
                let parsed =
                    v.as_str().ok_or_else(|| "an ISO date string such as \"2026-03-31\"".to_string()).and_then(|s| {
                        time::Date::parse(s, &format).map_err(|_| format!("not an ISO date (YYYY-MM-DD): {s:?}"))
                    });
                if let Some(d) = e.take(&format!("dates[{i}]"), parsed) {
                    out.push(d);
                }
            }
            Some(out)
        }
        Some(_) => {
            e.push("dates", "an array of ISO dates, one per flow");
            None
        }
    };
    let optional_rate = |e: &mut FieldErrors, name: &str, v: &Option<Value>| match v {
        None | Some(Value::Null) => rate_v,
        Some(v) => e.take(name, rate(v)),
    };
    let finance_rate = optional_rate(&mut e, "finance_rate", &req.finance_rate);
    let reinvest_rate = optional_rate(&mut e, "reinvest_rate", &req.reinvest_rate);
    match (rate_v, finance_rate, reinvest_rate) {
        (Some(rate), Some(finance_rate), Some(reinvest_rate)) if e.is_empty() => {
            Ok(Parsed { rate, flows, dates, finance_rate, reinvest_rate })
        }
        _ => Err(e),
    }
}

/// A finance failure that the caller's input caused, blamed on the field at fault: a date
/// before the first, a rate whose discounting leaves the representable range (a rate a hair
/// above -100 %), or else the flows (numbers too large).
fn input_error(e: FinanceError, p: &Parsed) -> ApiError {
    let field = match &e {
        FinanceError::DateBeforeFirst { index, .. } => format!("dates[{index}]"),
        FinanceError::RateOutOfRange { .. } => "rate".into(),
        // The flows are summable undiscounted: the discounting at this rate overflowed.
        FinanceError::NotRepresentable if finance::npv(0.0, &p.flows).is_ok() => {
            let message = format!(
                "discounting at this rate takes the flows beyond the largest number that can be held (about 7.9e28): {e}"
            );
            return ApiError(AppError::Invalid(FieldErrors::one("rate", message)));
        }
        _ => "flows".into(),
    };
    ApiError(AppError::Invalid(FieldErrors::one(&field, e.to_string())))
}

/// Every root as text, and the chosen one, keeping only real rates above -100 %: a root that a
/// double cannot tell from -1 is not a rate anyone can use (and is refused as input), so it is
/// dropped with a warning.
fn rates_of(outcome: &finance::IrrOutcome, what: &str, warnings: &mut Vec<String>) -> (Option<String>, Vec<String>) {
    let usable = |r: f64| r.is_finite() && r > -1.0;
    let roots: Vec<String> = outcome.roots.iter().copied().filter(|&r| usable(r)).map(rate_text).collect();
    if roots.len() < outcome.roots.len() {
        warnings.push(format!("a {what} root at or below -100 % (a double cannot tell it from -1) is left out"));
    }
    let chosen = outcome.chosen.filter(|&r| usable(r));
    if chosen.is_none() {
        let reason = if roots.is_empty() {
            "no rate above -100 % makes the present value zero".to_string()
        } else {
            format!("several rates make the present value zero ({}); let NPV or MIRR decide", roots.join(", "))
        };
        warnings.push(format!("no {what}: {reason}"));
    }
    (chosen.map(rate_text), roots)
}

/// POST /api/v1/metrics
pub async fn metrics(_: ApiQuery<NoQuery>, JsonBody(req): JsonBody<MetricsRequest>) -> Result<Json<Value>, ApiError> {
    let p = parse(&req)?;
    // Root searches are CPU-bound: on the bounded pool, never on the async threads.
    let body = crate::app::cpu::run(move || compute(&p)).await.map_err(AppError::from)??;
    Ok(Json(body))
}

/// The answer's body for parsed input.
fn compute(p: &Parsed) -> Result<Value, ApiError> {
    let mut warnings: Vec<String> = Vec::new();
    let npv = finance::npv(p.rate, &p.flows).map_err(|e| input_error(e, p))?;
    let (irr, irr_roots) = match finance::irr(&p.flows) {
        Ok(outcome) => {
            if outcome.ambiguous {
                warnings.push("the flows change sign more than once: IRR is ambiguous; let NPV or MIRR decide".into());
            }
            rates_of(&outcome, "IRR", &mut warnings)
        }
        Err(e) => {
            warnings.push(format!("no IRR: {e}"));
            (None, Vec::new())
        }
    };
    let mirr = match finance::mirr(&p.flows, p.finance_rate, p.reinvest_rate) {
        Ok(m) => Some(rate_text(m)),
        Err(e) => {
            warnings.push(format!("no MIRR: {e}"));
            None
        }
    };
    let payback = finance::payback(&p.flows);
    let discounted = finance::discounted_payback(p.rate, &p.flows).map_err(|e| input_error(e, p))?;
    for (what, pb) in [("payback", &payback), ("discounted payback", &discounted)] {
        if pb.as_ref().is_some_and(|p| p.turns_negative_again) {
            warnings.push(format!("the cumulative flow turns negative again after the {what} period"));
        }
    }
    let pi = finance::profitability_index(p.rate, &p.flows).map_err(|e| input_error(e, p))?;
    let dated = match &p.dates {
        Some(dates) => {
            let xnpv = finance::xnpv(p.rate, &p.flows, dates).map_err(|e| input_error(e, p))?;
            let (xirr, xirr_roots) = match finance::xirr_outcome(&p.flows, dates) {
                Ok(outcome) => rates_of(&outcome, "XIRR", &mut warnings),
                Err(e) => {
                    warnings.push(format!("no XIRR: {e}"));
                    (None, Vec::new())
                }
            };
            Some((xnpv, xirr, xirr_roots))
        }
        None => None,
    };
    let mut body = json!({
        "npv": money_text(npv),
        "irr": irr,
        "irr_roots": irr_roots,
        "mirr": mirr,
        "payback": payback.map(|p| money_text(p.periods)),
        "discounted_payback": discounted.map(|p| money_text(p.periods)),
        "profitability_index": pi.map(money_text),
        "warnings": warnings,
    });
    if let Some((xnpv, xirr, xirr_roots)) = dated {
        body["xnpv"] = json!(money_text(xnpv));
        body["xirr"] = json!(xirr);
        body["xirr_roots"] = json!(xirr_roots);
    }
    Ok(body)
}
