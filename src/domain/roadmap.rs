//! The roll-out roadmap's inputs and answer: the plan's parameters read from a form, a query
//! string or a stored plan, and the instance built from the portfolio's zones for
//! [`crate::finance::roadmap`].
//!
//! # From the portfolio to the instance
//! - Approved, piloting and measuring zones are **committed**: they keep the start month of
//!   their case (relative to the plan start, possibly before it). Candidates get a quarter.
//!   Shelved and closed zones are out; a zone without a case, or whose figures fail, is listed
//!   in `left_out` with why.
//! - A zone's value is the portfolio's value on the chosen basis ([`super::PortfolioRow::value`]),
//!   its one-off amounts the schedule's one-off outlays by month offset (the portfolio's
//!   investment), its window the case's go-live offset and ramp-up.
//! - Needs name zones by code; a needed zone that is not in the instance is kept by code in
//!   `needs_outside`, so the solver says why the dependent cannot be planned.
//! - The monthly rate is the site's annual hurdle rate as an effective monthly rate.

use super::portfolio::{MAX_BUDGET, cents};
use super::read_count;
use super::{FieldErrors, Money, Month, NumberFormat, Portfolio, SiteSettings, ValueBasis, ZoneStatus};
use crate::finance::monthly_from_annual;
use crate::finance::roadmap::{Delay, Instance, NotPlanned, Placement, Plan, PlanZone, Roadmap, Rule};
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};
use std::collections::HashMap;
use std::time::Duration;

/// Longest plan, in years: bounds the solver's work (quarters x zones binaries).
pub const MAX_YEARS: u32 = 10;
/// Most introductions at a time a plan may allow.
pub const MAX_CAPACITY: u32 = 20;
/// Longest time limit of the solver, in seconds: what fits inside one request's own limit
/// (`web::REQUEST_TIMEOUT`, 30 s) with the portfolio's computation and the page's rendering.
pub const MAX_TIME_LIMIT: u32 = 25;
/// Plan length when none is given.
pub const DEFAULT_YEARS: u32 = 3;
/// Time limit when none is given, in seconds.
pub const DEFAULT_TIME_LIMIT: u32 = 10;

/// Raw plan inputs as a form, a query string or a stored plan gives them.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default)]
pub struct RoadmapQuery {
    /// First month of the plan, `YYYY-MM`; empty for next month.
    pub start: String,
    /// Plan length in years; empty for 3.
    pub years: String,
    /// Capital budget per plan year, separated by `;` (one value applies to every year).
    pub budgets: String,
    /// Introductions at a time; empty for the site setting.
    pub capacity: String,
    /// `true` when unspent budget carries forward.
    pub carry_over: String,
    /// `true` for at most one introduction at a time per area.
    pub one_per_area: String,
    /// `npv`, `chance_weighted_npv` or `calibrated_npv`; empty for npv.
    pub basis: String,
    /// Seconds the solver may search; empty for 10.
    pub time_limit: String,
}

/// Longest name of a named plan, in characters.
pub const PLAN_NAME_MAX: usize = 80;

/// One stored version of a named plan: its inputs, who saved it and when.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PlanVersion {
    /// Row id.
    pub id: i64,
    /// The plan's name.
    pub name: String,
    /// 1 for the first save under this name, then 2, 3 ...
    pub version: u32,
    /// The inputs as entered.
    pub inputs: RoadmapQuery,
    /// RFC 3339 time of the save.
    pub created_at: String,
    /// Who saved it.
    pub created_by: String,
}

/// A plan's name: trimmed, 1 to [`PLAN_NAME_MAX`] characters.
pub fn parse_plan_name(value: &str) -> Result<String, String> {
    let name = value.trim();
    let n = name.chars().count();
    if n == 0 {
        Err("required: a name for the plan, such as Three-year roll-out".into())
    } else if n > PLAN_NAME_MAX {
        Err(format!("at most {PLAN_NAME_MAX} characters (this one has {n})"))
    } else if name.chars().any(char::is_control) {
        Err("one line of text without control characters".into())
    } else {
        Ok(name.to_string())
    }
}

/// Valid plan inputs.
#[derive(Debug, Clone, PartialEq)]
pub struct RoadmapParams {
    /// First month of the plan.
    pub start: Month,
    /// Plan length in years.
    pub years: u32,
    /// Capital budget per plan year, money.
    pub budgets: Vec<Decimal>,
    /// Introductions at a time.
    pub capacity: u32,
    /// Unspent budget carries forward.
    pub carry_over: bool,
    /// At most one introduction at a time per area.
    pub one_per_area: bool,
    /// Which NPV is the value.
    pub basis: ValueBasis,
    /// Seconds the solver may search.
    pub time_limit_seconds: u32,
}

/// `true`/`on` or `false`/empty (a checkbox sends `on` or nothing).
fn flag(value: &str) -> Result<bool, String> {
    match value.trim() {
        "true" | "on" => Ok(true),
        "false" | "" => Ok(false),
        other => Err(format!("{other:?} is not true or false")),
    }
}

/// A count from `min` to `max`, `default` when empty.
fn count_or(value: &str, min: u32, max: u32, default: u32) -> Result<u32, String> {
    if value.trim().is_empty() { Ok(default) } else { read_count(value, min, max) }
}

/// The budgets: `;`-separated amounts in `f`, one for every year or exactly `years` of them
/// (`None` when the plan length is itself invalid: then only each amount is checked).
fn budgets(value: &str, f: NumberFormat, years: Option<u32>) -> Result<Vec<Decimal>, String> {
    if value.trim().is_empty() {
        return Err(format!(
            "required: the capital budget of each plan year separated by ';', or one for every year, such as {}",
            f.write(Decimal::from(250_000), 2)
        ));
    }
    let parts: Vec<&str> = value.split(';').collect();
    let mut amounts = Vec::with_capacity(parts.len());
    let mut problems = Vec::new();
    for (i, p) in parts.iter().enumerate() {
        let amount = f.read(p).and_then(|b| {
            if b < Decimal::ZERO || b > MAX_BUDGET {
                Err(format!("an amount from 0 to {}", f.write(MAX_BUDGET, 0)))
            } else if b.round_dp(2) != b {
                Err(format!("{:?} has more than two decimals: enter whole cents", p.trim()))
            } else {
                Ok(b)
            }
        });
        match amount {
            Ok(b) => amounts.push(b),
            Err(m) => problems.push(format!("year {}: {m}", i + 1)),
        }
    }
    if !problems.is_empty() {
        return Err(problems.join("; "));
    }
    match years {
        Some(y) if amounts.len() == 1 => Ok(vec![amounts[0]; y as usize]),
        Some(y) if amounts.len() != y as usize => Err(format!(
            "{} amounts for a plan of {y} years: enter one for every year, or exactly {y} separated by ';'",
            amounts.len()
        )),
        _ => Ok(amounts),
    }
}

impl RoadmapParams {
    /// Read the inputs; `next_month` is the default start, the site gives the default capacity.
    pub fn parse(
        q: &RoadmapQuery,
        f: NumberFormat,
        next_month: Month,
        site: &SiteSettings,
    ) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let start = e.take("start", if q.start.trim().is_empty() { Ok(next_month) } else { Month::parse(&q.start) });
        let years = e.take("years", count_or(&q.years, 1, MAX_YEARS, DEFAULT_YEARS));
        let budgets = e.take("budgets", budgets(&q.budgets, f, years));
        let capacity = e.take(
            "capacity",
            count_or(&q.capacity, 1, MAX_CAPACITY, site.introduction_capacity.clamp(1, MAX_CAPACITY)),
        );
        let carry_over = e.take("carry_over", flag(&q.carry_over));
        let one_per_area = e.take("one_per_area", flag(&q.one_per_area));
        let basis = e.take("basis", ValueBasis::parse(&q.basis));
        let time_limit = e.take("time_limit", count_or(&q.time_limit, 1, MAX_TIME_LIMIT, DEFAULT_TIME_LIMIT));
        match (start, years, budgets, capacity, carry_over, one_per_area, basis, time_limit) {
            (
                Some(start),
                Some(years),
                Some(budgets),
                Some(capacity),
                Some(carry_over),
                Some(one_per_area),
                Some(basis),
                Some(time_limit_seconds),
            ) if e.is_empty() => {
                Ok(Self { start, years, budgets, capacity, carry_over, one_per_area, basis, time_limit_seconds })
            }
            _ => Err(e),
        }
    }

    /// The default plan start: the month after `now`'s (UTC, as a new case's start month).
    pub fn next_month(now: time::OffsetDateTime) -> Month {
        Month::of(now.date()).plus(1)
    }

    /// The month `offset` months after the plan start (before it when negative).
    pub fn month(&self, offset: i32) -> Month {
        month_at(self.start, offset)
    }
}

fn month_at(start: Month, offset: i32) -> Month {
    let index = start.year * 12 + i32::from(start.month) - 1 + offset;
    Month { year: index.div_euclid(12), month: (index.rem_euclid(12) + 1) as u8 }
}

/// Months from `from` to `to` (negative when `to` is earlier).
fn months_between(from: Month, to: Month) -> i32 {
    (to.year - from.year) * 12 + i32::from(to.month) - i32::from(from.month)
}

/// What the page and the API show of one zone of the instance.
#[derive(Debug, Clone, PartialEq)]
pub struct RoadmapZone {
    /// Code.
    pub code: String,
    /// Name.
    pub name: String,
    /// Area; empty for none.
    pub area: String,
    /// Lifecycle status.
    pub status: ZoneStatus,
    /// Sum of its one-off amounts, money.
    pub one_off_total: Decimal,
}

impl RoadmapZone {
    /// Approved, piloting or measuring: kept where its baseline puts it.
    pub fn committed(&self) -> bool {
        is_committed(self.status)
    }
}

fn is_committed(s: ZoneStatus) -> bool {
    matches!(s, ZoneStatus::Approved | ZoneStatus::Piloting | ZoneStatus::Measuring)
}

/// The roadmap for one set of inputs.
#[derive(Debug, Clone, PartialEq)]
pub struct RoadmapAnswer {
    /// The inputs.
    pub params: RoadmapParams,
    /// The solver's instance (zones in the same order as `zones`).
    pub instance: Instance,
    /// The zones of the instance.
    pub zones: Vec<RoadmapZone>,
    /// The plans.
    pub result: Roadmap,
    /// Open zones left out of the plan, with why (no case, figures that fail).
    pub left_out: Vec<(String, String)>,
}

/// One zone of one plan, in calendar months and money, as the page, the CSV and the API show it.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanRow {
    /// Index into [`RoadmapAnswer::zones`].
    pub zone: usize,
    /// Start month, when it starts.
    pub start: Option<Month>,
    /// First live month (after the introduction window), when it starts.
    pub live: Option<Month>,
    /// Quarter of the plan (0-based) of a planned candidate.
    pub quarter: Option<u32>,
    /// One-off outlays per plan year (zeros when it does not start).
    pub one_off_by_year: Vec<Decimal>,
    /// Value at plan start of a planned candidate, `V_z (1 + r_m)^(-3q)`.
    pub value_at_start: Option<Decimal>,
    /// Cost of a quarter's delay of a planned candidate (optimal plan only).
    pub delay_cost: Option<Decimal>,
    /// What would start it a quarter earlier, in words (optimal plan only; `None` in quarter 0).
    pub earlier: Option<String>,
    /// Why a candidate is not in this plan, in words.
    pub reason: Option<String>,
}

impl RoadmapAnswer {
    /// The rows of `plan` (the optimal or the simple one); `delays` are the optimal plan's.
    pub fn rows(&self, plan: &Plan, delays: Option<&[Option<Delay>]>) -> Vec<PlanRow> {
        let inst = &self.instance;
        let to_money = |c: i64| Decimal::new(c, 2);
        plan.placements
            .iter()
            .enumerate()
            .map(|(i, p)| {
                let start = p.start_month();
                let quarter = match p {
                    Placement::Planned { quarter } => Some(*quarter),
                    _ => None,
                };
                let one_off = start.map_or_else(
                    || vec![Decimal::ZERO; inst.years as usize],
                    |s| crate::finance::roadmap::one_off_by_year(inst, i, s).into_iter().map(to_money).collect(),
                );
                let delay = delays.and_then(|d| d.get(i)).and_then(Option::as_ref);
                PlanRow {
                    zone: i,
                    start: start.map(|s| self.params.month(s)),
                    live: start.map(|s| self.params.month(s + inst.zones[i].window() as i32)),
                    quarter,
                    one_off_by_year: one_off,
                    value_at_start: quarter.map(|q| crate::finance::roadmap::value_at(inst, i, q)),
                    delay_cost: delay.map(|d| d.cost),
                    earlier: delay.and_then(|d| d.earlier.as_ref()).map(|r| self.rule_words(r)),
                    reason: match p {
                        Placement::NotPlanned(n) => Some(self.reason_words(n)),
                        _ => None,
                    },
                }
            })
            .collect()
    }

    /// A rule in words: what it would take for it to hold.
    pub fn rule_words(&self, rule: &Rule) -> String {
        match rule {
            Rule::Needs(code) => format!("{code} live a quarter sooner"),
            Rule::Budget { year, over } => format!(
                "{} more budget in plan year {} (from {})",
                Money(Decimal::new(*over, 2)),
                year + 1,
                self.params.month(12 * *year as i32)
            ),
            Rule::Capacity { month } => {
                format!("one more introduction at a time in {}", self.params.month(*month))
            }
            Rule::Area { month } => format!("its area free of other introductions in {}", self.params.month(*month)),
        }
    }

    /// Why a candidate is not in the plan, in words: the kinds of rules that block it.
    pub fn reason_words(&self, n: &NotPlanned) -> String {
        match n {
            NotPlanned::NotPositive => "value: not positive".into(),
            NotPlanned::Needs(code) => format!("dependency: needs {code}, which is not in this plan"),
            NotPlanned::Blocked(rules) => {
                let mut kinds: Vec<String> = Vec::new();
                for r in rules {
                    let k = match r {
                        Rule::Budget { .. } => "budget".to_string(),
                        Rule::Capacity { .. } => "capacity".to_string(),
                        Rule::Area { .. } => "area".to_string(),
                        Rule::Needs(code) => format!("dependency on {code}"),
                    };
                    if !kinds.contains(&k) {
                        kinds.push(k);
                    }
                }
                if kinds.is_empty() { "no quarter fits".into() } else { kinds.join(", ") }
            }
        }
    }
}

/// The instance, its zones as shown, and the open zones left out with why.
pub type Built = (Instance, Vec<RoadmapZone>, Vec<(String, String)>);

/// Build the instance from the portfolio's zones (see the [module docs](self)).
pub fn roadmap_instance(portfolio: &Portfolio, params: &RoadmapParams, site: &SiteSettings) -> Result<Built, String> {
    let mut rows: Vec<_> = portfolio
        .rows
        .iter()
        .filter(|r| !matches!(r.zone().status, ZoneStatus::Shelved | ZoneStatus::Closed))
        .collect();
    // By code: the instance, and so the plan's ties, do not depend on the portfolio's ranking.
    rows.sort_by(|a, b| a.zone().code.cmp(&b.zone().code));
    let mut left_out = Vec::new();
    let mut kept = Vec::new();
    for r in rows {
        match (r.figures(), r.value(params.basis)) {
            (Some(f), Some(v)) => kept.push((r, f, v)),
            _ => left_out.push((r.zone().code.clone(), r.problem().unwrap_or("no figures on this basis").to_string())),
        }
    }
    let index: HashMap<&str, usize> =
        kept.iter().enumerate().map(|(i, (r, _, _))| (r.zone().code.as_str(), i)).collect();
    let mut zones = Vec::with_capacity(kept.len());
    let mut shown = Vec::with_capacity(kept.len());
    for (r, f, v) in &kept {
        let z = r.zone();
        let (mut needs, mut needs_outside) = (Vec::new(), Vec::new());
        for code in &z.needs {
            match index.get(code.as_str()) {
                Some(&i) => needs.push(i),
                None => needs_outside.push(code.clone()),
            }
        }
        zones.push(PlanZone {
            code: z.code.clone(),
            area: z.area.clone(),
            needs,
            needs_outside,
            committed_start: is_committed(z.status).then(|| months_between(params.start, f.start_month)),
            value: *v,
            one_off: f.one_off_months.clone(),
            go_live: f.go_live_offset,
            ramp_up: f.ramp_up_months,
        });
        shown.push(RoadmapZone {
            code: z.code.clone(),
            name: z.name.clone(),
            area: z.area.clone(),
            status: z.status,
            one_off_total: f.metrics.total_one_off,
        });
    }
    let monthly_rate =
        monthly_from_annual(site.hurdle_f64()).map_err(|e| format!("the hurdle rate cannot be used: {e}"))?;
    let instance = Instance {
        years: params.years,
        budgets: params.budgets.iter().map(|b| cents(*b)).collect(),
        carry_over: params.carry_over,
        capacity: params.capacity,
        one_per_area: params.one_per_area,
        monthly_rate,
        zones,
    };
    Ok((instance, shown, left_out))
}

/// Build the instance from the portfolio's zones and solve it.
pub fn roadmap_answer(
    portfolio: &Portfolio,
    params: RoadmapParams,
    site: &SiteSettings,
) -> Result<RoadmapAnswer, String> {
    let (instance, zones, left_out) = roadmap_instance(portfolio, &params, site)?;
    let limit = Duration::from_secs(u64::from(params.time_limit_seconds));
    let result = crate::finance::roadmap::roadmap(&instance, limit).map_err(|e| e.to_string())?;
    Ok(RoadmapAnswer { params, instance, zones, result, left_out })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::domain::{
        CaseHeader, CaseParts, CostCategory, CostKind, DriverKind, NewBenefitDriver, NewCostItem, PlantZone,
        PortfolioParams, RankBy, Trials, Zone, ZoneData, build_portfolio, zone_base,
    };
    use rust_decimal::dec;
    use std::sync::Arc;

    type TestResult = Result<(), String>;

    fn site() -> SiteSettings {
        SiteSettings {
            plant_name: "Test works".into(),
            currency: "EUR".into(),
            hurdle_rate: Decimal::new(1, 1),
            tax_rate: None,
            depreciation_years: None,
            default_horizon_months: 36,
            expert_multiplier: Decimal::ONE,
            number_format: NumberFormat::DecimalPoint,
            one_person_approval: false,
            time_zone: PlantZone::default(),
            introduction_capacity: 2,
        }
    }

    fn month(s: &str) -> Result<Month, String> {
        Month::parse(s)
    }

    fn query(budgets: &str) -> RoadmapQuery {
        RoadmapQuery { budgets: budgets.into(), ..RoadmapQuery::default() }
    }

    fn parse(q: &RoadmapQuery) -> Result<RoadmapParams, FieldErrors> {
        let next = Month { year: 2026, month: 12 };
        RoadmapParams::parse(q, NumberFormat::DecimalPoint, next, &site())
    }

    /// The one message of a refused query, by field.
    fn refused(q: &RoadmapQuery) -> Result<Vec<(String, String)>, String> {
        match parse(q) {
            Ok(p) => Err(format!("accepted: {p:?}")),
            Err(e) => Ok(e.0.into_iter().map(|f| (f.field, f.message)).collect()),
        }
    }

    #[test]
    fn defaults_fill_every_empty_field() -> TestResult {
        let p = parse(&query("250,000")).map_err(|e| format!("{e:?}"))?;
        assert_eq!(
            p,
            RoadmapParams {
                start: month("2026-12")?,
                years: 3,
                budgets: vec![dec!(250000); 3],
                capacity: 2,
                carry_over: false,
                one_per_area: false,
                basis: ValueBasis::Npv,
                time_limit_seconds: 10,
            }
        );
        Ok(())
    }

    #[test]
    fn every_field_is_read_when_given() -> TestResult {
        let q = RoadmapQuery {
            start: "2027-04".into(),
            years: "2".into(),
            budgets: "100,000.50; 0".into(),
            capacity: "3".into(),
            carry_over: "on".into(),
            one_per_area: "true".into(),
            basis: "calibrated_npv".into(),
            time_limit: "25".into(),
        };
        let p = parse(&q).map_err(|e| format!("{e:?}"))?;
        assert_eq!(
            p,
            RoadmapParams {
                start: month("2027-04")?,
                years: 2,
                budgets: vec![dec!(100000.50), Decimal::ZERO],
                capacity: 3,
                carry_over: true,
                one_per_area: true,
                basis: ValueBasis::Calibrated,
                time_limit_seconds: 25,
            }
        );
        // The plan's months: 2027-04 + 11 = 2028-03; 3 months before it, 2027-01.
        assert_eq!((p.month(11), p.month(-3)), (month("2028-03")?, month("2027-01")?));
        Ok(())
    }

    #[test]
    fn a_decimal_comma_site_reads_its_own_budgets() -> TestResult {
        let q = RoadmapQuery { years: "2".into(), budgets: "1.250,75;300".into(), ..RoadmapQuery::default() };
        let p = RoadmapParams::parse(&q, NumberFormat::DecimalComma, month("2026-12")?, &site())
            .map_err(|e| format!("{e:?}"))?;
        assert_eq!(p.budgets, vec![dec!(1250.75), dec!(300)]);
        Ok(())
    }

    #[test]
    fn each_bad_field_is_named_with_its_message() -> TestResult {
        let cases: Vec<(RoadmapQuery, &str, &str)> = vec![
            (RoadmapQuery { start: "2027-13".into(), ..query("1") }, "start", "a month as YYYY-MM, e.g. 2026-03"),
            (
                RoadmapQuery { years: "0".into(), ..query("1") },
                "years",
                "\"0\" is outside 1 to 10: enter a whole number from 1 to 10",
            ),
            (
                RoadmapQuery { years: "11".into(), ..query("1") },
                "years",
                "\"11\" is outside 1 to 10: enter a whole number from 1 to 10",
            ),
            (
                query(""),
                "budgets",
                "required: the capital budget of each plan year separated by ';', or one for every year, such as 250,000.00",
            ),
            (
                query("100;200"),
                "budgets",
                "2 amounts for a plan of 3 years: enter one for every year, or exactly 3 separated by ';'",
            ),
            (query("100;-5;7"), "budgets", "year 2: an amount from 0 to 1,000,000,000,000"),
            (query("100;200;0.125"), "budgets", "year 3: \"0.125\" has more than two decimals: enter whole cents"),
            (
                RoadmapQuery { capacity: "21".into(), ..query("1") },
                "capacity",
                "\"21\" is outside 1 to 20: enter a whole number from 1 to 20",
            ),
            (
                RoadmapQuery { capacity: "0".into(), ..query("1") },
                "capacity",
                "\"0\" is outside 1 to 20: enter a whole number from 1 to 20",
            ),
            (RoadmapQuery { carry_over: "yes".into(), ..query("1") }, "carry_over", "\"yes\" is not true or false"),
            (RoadmapQuery { one_per_area: "1".into(), ..query("1") }, "one_per_area", "\"1\" is not true or false"),
            (
                RoadmapQuery { basis: "irr".into(), ..query("1") },
                "basis",
                "one of npv, chance_weighted_npv, calibrated_npv",
            ),
            (
                RoadmapQuery { time_limit: "26".into(), ..query("1") },
                "time_limit",
                "\"26\" is outside 1 to 25: enter a whole number from 1 to 25",
            ),
        ];
        for (q, field, message) in cases {
            assert_eq!(refused(&q)?, vec![(field.to_string(), message.to_string())], "{q:?}");
        }
        // Positive control: the same query with a good value in each place is accepted.
        let good = RoadmapQuery {
            start: "2027-12".into(),
            years: "10".into(),
            capacity: "20".into(),
            carry_over: "false".into(),
            basis: "npv".into(),
            time_limit: "1".into(),
            ..query("0.12")
        };
        assert_eq!(parse(&good).map(|p| p.budgets), Ok(vec![dec!(0.12); 10]));
        Ok(())
    }

    #[test]
    fn several_bad_amounts_are_each_named_by_year() -> TestResult {
        assert_eq!(
            refused(&query("x;5;-1"))?,
            vec![(
                "budgets".to_string(),
                "year 1: not a number: \"x\"; enter digits with a decimal point, grouped in threes by comma or space or not at all, e.g. 1,250.75 or 1250.75; year 3: an amount from 0 to 1,000,000,000,000".to_string()
            )]
        );
        Ok(())
    }

    #[test]
    fn the_site_gives_the_default_capacity() -> TestResult {
        let s = SiteSettings { introduction_capacity: 4, ..site() };
        let p = RoadmapParams::parse(&query("1"), NumberFormat::Plain, month("2026-12")?, &s)
            .map_err(|e| format!("{e:?}"))?;
        assert_eq!(p.capacity, 4);
        Ok(())
    }

    // ---- the instance built from a hand-made portfolio ----

    fn zone(id: i64, code: &str, status: ZoneStatus, area: &str, needs: &[&str]) -> Zone {
        Zone {
            id,
            code: code.into(),
            name: format!("Zone {code}"),
            description: String::new(),
            owner: "owner".into(),
            status,
            created_at: "2026-01-01T00:00:00Z".into(),
            created_by: "t".into(),
            updated_at: "2026-01-01T00:00:00Z".into(),
            updated_by: "t".into(),
            area: area.into(),
            needs: needs.iter().map(|s| s.to_string()).collect(),
        }
    }

    fn cost(kind: CostKind, amount: i64, month_offset: u32) -> NewCostItem {
        NewCostItem {
            label: "Item".into(),
            category: CostCategory::Hardware,
            kind,
            amount: Decimal::from(amount),
            month_offset,
            escalation: Decimal::ZERO,
            capex: true,
            source: String::new(),
        }
    }

    /// A case of 36 months from `start`: the cost items given and 60,000 a year of energy
    /// (120,000 kWh x 0.50).
    fn case(id: i64, start: &str, go_live: u32, ramp: u32, costs: Vec<NewCostItem>) -> Result<CaseParts, String> {
        let header = CaseHeader {
            label: "Base".into(),
            horizon_months: 36,
            start_month: month(start)?,
            go_live_offset: go_live,
            ramp_up_months: ramp,
            success_probability: dec!(0.5),
        };
        let driver = NewBenefitDriver {
            label: "Energy".into(),
            kind: DriverKind::Energy,
            unit: "kWh".into(),
            qty_low: dec!(100000),
            qty_likely: dec!(120000),
            qty_high: dec!(140000),
            unit_value: dec!(0.5),
            escalation: Decimal::ZERO,
            expert_hours: None,
            source: String::new(),
        };
        let n = costs.len();
        Ok(CaseParts {
            id,
            version: 1,
            baseline: false,
            header,
            costs: (0..).zip(costs).collect(),
            drivers: vec![(1, driver)],
            frozen: None,
            cost_uids: (0..n as i64).collect(),
            driver_uids: vec![1],
        })
    }

    fn portfolio(zones: Vec<(Zone, Option<CaseParts>)>, basis: ValueBasis) -> Portfolio {
        let trials = Trials { seed: 7, count: 200 };
        let bases = zones
            .into_iter()
            .map(|(zone, case)| {
                let data = ZoneData { zone, case, ledger: Default::default(), history: None, scores: HashMap::new() };
                Arc::new(zone_base(data, &site(), trials, None))
            })
            .collect();
        let params = PortfolioParams { budget: None, rank: RankBy::Npv, basis, min_readiness: None, trials };
        build_portfolio(bases, &[], &Default::default(), params)
    }

    #[test]
    fn the_instance_takes_committed_zones_and_candidates_from_the_portfolio() -> TestResult {
        use CostKind::{OneOff, Recurring};
        let p = portfolio(
            vec![
                // Listed out of code order: the instance sorts by code.
                (
                    zone(2, "B", ZoneStatus::Approved, "paint shop", &["A", "S", "NOPE"]),
                    Some(case(20, "2026-10", 3, 0, vec![cost(OneOff, 20_000, 0), cost(OneOff, 5_000, 4)])?),
                ),
                (
                    zone(1, "A", ZoneStatus::Candidate, "press shop", &[]),
                    Some(case(
                        10,
                        "2026-03",
                        2,
                        1,
                        vec![cost(OneOff, 30_000, 0), cost(OneOff, 10_000, 2), cost(Recurring, 1_200, 3)],
                    )?),
                ),
                (zone(3, "S", ZoneStatus::Shelved, "", &[]), Some(case(30, "2026-01", 1, 1, vec![])?)),
                (zone(4, "C", ZoneStatus::Closed, "", &[]), Some(case(40, "2026-01", 1, 1, vec![])?)),
                (zone(5, "D", ZoneStatus::Candidate, "press shop", &["A"]), None),
                (
                    zone(6, "E", ZoneStatus::Piloting, "", &[]),
                    Some(case(60, "2027-03", 0, 2, vec![cost(OneOff, 1_000, 1)])?),
                ),
            ],
            ValueBasis::ChanceWeighted,
        );
        let params = parse(&RoadmapQuery {
            start: "2027-01".into(),
            years: "2".into(),
            budgets: "50,000;40,000.25".into(),
            capacity: "3".into(),
            one_per_area: "on".into(),
            basis: "chance_weighted_npv".into(),
            ..RoadmapQuery::default()
        })
        .map_err(|e| format!("{e:?}"))?;
        let (inst, shown, left_out) = roadmap_instance(&p, &params, &site())?;
        let value = |code: &str| -> Result<Decimal, String> {
            p.rows
                .iter()
                .find(|r| r.zone().code == code)
                .and_then(|r| r.value(ValueBasis::ChanceWeighted))
                .ok_or_else(|| format!("no value for {code}"))
        };
        assert_eq!(inst.years, 2);
        // 50,000 and 40,000.25 in cents.
        assert_eq!(inst.budgets, vec![5_000_000, 4_000_025]);
        assert_eq!((inst.capacity, inst.carry_over, inst.one_per_area), (3, false, true));
        // (1 + 10 %)^(1/12) - 1 = 0.0079741404289 (python: 1.1 ** (1 / 12) - 1).
        assert!((inst.monthly_rate - 0.007_974_140_428_9).abs() < 1e-12, "{}", inst.monthly_rate);
        assert_eq!(
            inst.zones,
            vec![
                PlanZone {
                    code: "A".into(),
                    area: "press shop".into(),
                    needs: vec![],
                    needs_outside: vec![],
                    committed_start: None,
                    value: value("A")?,
                    // The recurring item is not a one-off: only 30,000 in month 0, 10,000 in month 2.
                    one_off: vec![(0, 3_000_000), (2, 1_000_000)],
                    go_live: 2,
                    ramp_up: 1,
                },
                PlanZone {
                    code: "B".into(),
                    area: "paint shop".into(),
                    // A is zone 0; the shelved S and an unknown code are outside the plan.
                    needs: vec![0],
                    needs_outside: vec!["S".into(), "NOPE".into()],
                    // 2026-10 is three months before the plan start 2027-01.
                    committed_start: Some(-3),
                    value: value("B")?,
                    one_off: vec![(0, 2_000_000), (4, 500_000)],
                    go_live: 3,
                    ramp_up: 0,
                },
                PlanZone {
                    code: "E".into(),
                    area: String::new(),
                    needs: vec![],
                    needs_outside: vec![],
                    // 2027-03 is two months after 2027-01.
                    committed_start: Some(2),
                    value: value("E")?,
                    one_off: vec![(1, 100_000)],
                    go_live: 0,
                    ramp_up: 2,
                },
            ]
        );
        // The value is on the basis asked for (chance-weighted, success 50 %), not the NPV.
        assert_ne!(Some(value("A")?), p.rows.iter().find(|r| r.zone().code == "A").and_then(|r| r.npv()));
        assert_eq!(
            shown.iter().map(|z| (z.code.as_str(), z.committed(), z.one_off_total)).collect::<Vec<_>>(),
            vec![("A", false, dec!(40000)), ("B", true, dec!(25000)), ("E", true, dec!(1000))]
        );
        assert_eq!(left_out, vec![("D".to_string(), "no business case yet".to_string())]);
        Ok(())
    }

    #[test]
    fn rule_and_reason_words() -> TestResult {
        let params = parse(&RoadmapQuery { start: "2027-01".into(), ..query("1") }).map_err(|e| format!("{e:?}"))?;
        let inst = Instance {
            years: 3,
            budgets: vec![100; 3],
            carry_over: false,
            capacity: 2,
            one_per_area: false,
            monthly_rate: 0.0,
            zones: vec![],
        };
        let result = Roadmap {
            optimal: crate::finance::roadmap::simple_plan(&inst),
            simple: crate::finance::roadmap::simple_plan(&inst),
            delays: vec![],
            overruns: vec![],
        };
        let a = RoadmapAnswer { params, instance: inst, zones: vec![], result, left_out: vec![] };
        let words = NumberFormat::DecimalPoint.sync_scope(|| a.rule_words(&Rule::Budget { year: 1, over: 1_250_075 }));
        assert_eq!(words, "12,500.75 more budget in plan year 2 (from 2028-01)");
        assert_eq!(a.rule_words(&Rule::Capacity { month: 4 }), "one more introduction at a time in 2027-05");
        assert_eq!(a.rule_words(&Rule::Area { month: 0 }), "its area free of other introductions in 2027-01");
        assert_eq!(a.rule_words(&Rule::Needs("A".into())), "A live a quarter sooner");
        assert_eq!(a.reason_words(&NotPlanned::NotPositive), "value: not positive");
        assert_eq!(a.reason_words(&NotPlanned::Needs("S".into())), "dependency: needs S, which is not in this plan");
        let blocked = NotPlanned::Blocked(vec![
            Rule::Budget { year: 0, over: 5 },
            Rule::Capacity { month: 3 },
            Rule::Budget { year: 1, over: 5 },
            Rule::Needs("A".into()),
        ]);
        assert_eq!(a.reason_words(&blocked), "budget, capacity, dependency on A");
        Ok(())
    }
}
