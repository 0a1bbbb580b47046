//! Domain types: parsed, valid values built from raw input through constructors that can fail.
//!
//! Raw input (form fields, JSON bodies, scenario files) is held in `*Input` structs of plain
//! strings; `parse` turns them into domain values or a list of [`FieldError`]s naming each
//! field. Nothing in here knows about HTTP or SQL.

mod approval;
mod audit;
mod case;
pub mod chain;
mod csv_cell;
mod figures;
mod history;
mod ids;
mod ledger;
pub mod ledger_csv;
mod local_time;
mod money;
mod numbers;
pub mod pack;
mod portfolio;
mod readiness;
mod realized;
mod roadmap;
mod scenario;
mod site;
mod uncertainty;
mod user;
mod zone;

pub use approval::{ApprovalKind, ApprovalSettings, Review, parse_comment, parse_return_comment};
pub use audit::{ACTIONS, AuditFacts, EntryFacts, audit_sentence};
pub use case::{
    BenefitDriver, CaseHeader, CaseHeaderInput, CaseSpec, CaseSpecInput, CaseState, CostCategory, CostInput, CostItem,
    CostKind, DriverInput, DriverKind, ExpertHours, MAX_EXPERT_MULTIPLIER, Month, NewBenefitDriver, NewCostItem,
    RateStyle, finance_input, parse_expert_multiplier,
};
pub use csv_cell::{FORMULA_STARTS, csv_safe, csv_unquote};
pub use figures::{CaseFigures, View, case_figures};
pub use history::{BaselineHistory, Expected, ExpectedDriver, InForce, settings_of};
pub use ids::{CaseId, CostItemId, DriverId, EntryId, UserId, ZoneId};
pub use ledger::{
    BaselineCost, BaselineDriver, Booking, BookingBaseline, BookingInput, EntryKind, IDEMPOTENCY_KEY_MAX, LedgerEntry,
    LedgerItem, Measurement, Method, NewEntry, PLAUSIBLE_FACTOR, Plausibility, idempotency_key,
};
pub use local_time::{LocalTime, PlantZone};
pub use money::{Money, Percent, count, money, pct, quantity};
pub use numbers::{NumberFormat, read, read_count, read_percent, read_whole};
pub use portfolio::{
    BaseFigures, BudgetChoice, CaseParts, LedgerTotals, Portfolio, PortfolioParams, PortfolioQuery, PortfolioRow,
    RankBy, Standing, ValueBasis, ZoneBase, ZoneData, build_portfolio, calibration_of, zone_base,
};
pub use readiness::{Criterion, MAX_WEIGHT, Readiness, SCORE_RANGE, parse_scores, parse_weights};
pub use realized::{DriverRealization, RealizedView, month_end, realized_view};
pub use roadmap::{
    MAX_TIME_LIMIT, PLAN_NAME_MAX, PlanRow, PlanVersion, RoadmapAnswer, RoadmapParams, RoadmapQuery, RoadmapZone,
    parse_plan_name, roadmap_answer, roadmap_instance,
};
pub use scenario::{Scenario, ScenarioEntry, ZoneScenario, layout_document};
pub use site::{DEFAULT_INTRODUCTION_CAPACITY, MAX_INTRODUCTION_CAPACITY, SiteSettings, SiteSettingsInput};
pub use uncertainty::{
    Calibration, CaseUncertainty, DEFAULT_SEED, DriverFigures, Trials, case_uncertainty, chance_weighted_npv,
    parse_seed, quantity_ranges,
};
pub use user::{
    TOKEN_DAYS_DEFAULT, TOKEN_DAYS_MAX, USER_NAME_MAX, check_token_days, issued_on_behalf, parse_token_days,
    parse_user_name,
};
pub use zone::{MAX_AREA_CHARS, MAX_NEEDS, NewZone, Zone, ZoneInput, ZoneStatus, cycle_message, cycle_through};

use serde::Serialize;
use std::fmt;

/// One rejected input field, with a message that says what would be accepted.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct FieldError {
    /// The field's name as the form or JSON body spells it (`costs[2].amount`).
    pub field: String,
    /// What is wrong and what would be accepted.
    pub message: String,
}

/// All the field errors of one input; empty means valid.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
#[serde(transparent)]
pub struct FieldErrors(pub Vec<FieldError>);

impl FieldErrors {
    /// A list holding one error.
    pub fn one(field: impl Into<String>, message: impl Into<String>) -> Self {
        let mut e = Self::default();
        e.push(field, message);
        e
    }

    /// Record one error.
    pub fn push(&mut self, field: impl Into<String>, message: impl Into<String>) {
        self.0.push(FieldError { field: field.into(), message: message.into() });
    }

    /// The message for `field`, if it was rejected (templates show it beside the input).
    pub fn get(&self, field: &str) -> Option<&str> {
        self.0.iter().find(|e| e.field == field).map(|e| e.message.as_str())
    }

    /// Whether no error was recorded.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    /// `Ok(value)` when nothing was recorded, else the errors.
    pub fn into_result<T>(self, value: impl FnOnce() -> T) -> Result<T, FieldErrors> {
        if self.is_empty() { Ok(value()) } else { Err(self) }
    }

    /// Keep `result`'s value, or record its message under `field` and return `None`.
    pub fn take<T>(&mut self, field: &str, result: Result<T, String>) -> Option<T> {
        match result {
            Ok(v) => Some(v),
            Err(message) => {
                self.push(field, message);
                None
            }
        }
    }

    /// Append another input's errors with their fields prefixed (`costs[1].` + `amount`).
    pub fn extend_prefixed(&mut self, prefix: &str, other: FieldErrors) {
        for e in other.0 {
            self.push(format!("{prefix}{}", e.field), e.message);
        }
    }
}

impl fmt::Display for FieldErrors {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let parts: Vec<String> = self.0.iter().map(|e| format!("{}: {}", e.field, e.message)).collect();
        f.write_str(&parts.join("; "))
    }
}

impl std::error::Error for FieldErrors {}

/// Trim a required text field, rejecting it when empty or longer than `max` characters.
pub(crate) fn required_text(value: &str, max: usize) -> Result<String, String> {
    let v = value.trim();
    if has_control(v) {
        Err(CONTROL.into())
    } else if v.is_empty() {
        Err("required: enter some text".into())
    } else if v.chars().count() > max {
        Err(format!("at most {max} characters"))
    } else {
        Ok(v.to_string())
    }
}

/// Trim an optional text field, rejecting it only when longer than `max` characters.
pub(crate) fn optional_text(value: &str, max: usize) -> Result<String, String> {
    let v = value.trim();
    if has_control(v) {
        Err(CONTROL.into())
    } else if v.chars().count() > max {
        Err(format!("at most {max} characters"))
    } else {
        Ok(v.to_string())
    }
}

const CONTROL: &str = "contains a control character (such as NUL); type plain text";

/// Control characters other than tab and line breaks: never meant as text, and NUL in particular
/// truncates strings in SQLite's C interface and in many tools that read an export.
fn has_control(v: &str) -> bool {
    v.chars().any(|c| c.is_control() && !matches!(c, '\t' | '\n' | '\r'))
}

/// Lenient deserializers: JSON bodies may give numbers as strings or numbers, and flags as
/// booleans or form-style strings.
pub mod de {
    use serde::{Deserialize, Deserializer};

    #[derive(Deserialize)]
    #[serde(untagged)]
    enum Raw {
        Text(String),
        Int(i64),
        Float(f64),
        Bool(bool),
    }

    /// Accept `"1.5"`, `1.5`, `2` or null (empty string) and keep the text as given.
    pub fn string_or_number<'de, D: Deserializer<'de>>(d: D) -> Result<String, D::Error> {
        Ok(match Option::<Raw>::deserialize(d)? {
            None => String::new(),
            Some(Raw::Text(s)) => s,
            Some(Raw::Int(i)) => i.to_string(),
            // Shortest round-trip text of the double, which is what the sender typed.
            Some(Raw::Float(f)) => f.to_string(),
            Some(Raw::Bool(b)) => b.to_string(),
        })
    }

    /// Accept `true`/`false`, or the strings a checkbox or CSV may send (`on`, `1`, `yes`).
    pub fn flexible_bool<'de, D: Deserializer<'de>>(d: D) -> Result<bool, D::Error> {
        Ok(match Option::<Raw>::deserialize(d)? {
            None => false,
            Some(Raw::Bool(b)) => b,
            Some(Raw::Int(i)) => i != 0,
            Some(Raw::Float(f)) => f != 0.0,
            Some(Raw::Text(s)) => flag_text(&s),
        })
    }

    /// A checkbox or CSV flag as text: `on`, `true`, `1` or `yes` (any case) is set.
    pub fn flag_text(s: &str) -> bool {
        matches!(s.trim().to_ascii_lowercase().as_str(), "on" | "true" | "1" | "yes")
    }
}
