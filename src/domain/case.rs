//! Business cases: a scenario version's header, its cost items and its benefit drivers, and
//! the translation into the finance engine's pure input.

use super::de::{flexible_bool, string_or_number};
use super::{FieldErrors, NumberFormat, optional_text, read_count, required_text};
use crate::finance::schedule::{CaseInput, CostInput as FinCost, CostTiming, DriverInput as FinDriver, TaxInput};
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};
use std::fmt;

/// How the numbers of a case were typed: forms take percentages (`2.5`), JSON and scenario
/// files take fractions (`0.025`); each in its number format (the site's, or the API's plain).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RateStyle {
    /// `2.5` means 2.5 %.
    Percent(NumberFormat),
    /// `0.025` means 2.5 %.
    Fraction(NumberFormat),
}

impl RateStyle {
    /// The number format of every field.
    pub fn numbers(self) -> NumberFormat {
        match self {
            Self::Percent(f) | Self::Fraction(f) => f,
        }
    }

    fn parse(self, value: &str) -> Result<Decimal, String> {
        let v = match self {
            Self::Percent(f) => f.read_percent(value)?,
            Self::Fraction(f) => f.read(value)?,
        };
        if v <= Decimal::NEGATIVE_ONE {
            return Err("greater than -100 %".into());
        }
        Ok(v)
    }
}

/// A calendar month, `YYYY-MM`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Month {
    /// Year, 2000 to 2100.
    pub year: i32,
    /// Month 1 to 12.
    pub month: u8,
}

impl Month {
    /// Parse `YYYY-MM`.
    pub fn parse(value: &str) -> Result<Self, String> {
        let bad = || "a month as YYYY-MM, e.g. 2026-03".to_string();
        let (y, m) = value.trim().split_once('-').ok_or_else(bad)?;
        let year: i32 = y.parse().map_err(|_| bad())?;
        let month: u8 = m.parse().map_err(|_| bad())?;
        if y.len() != 4 || m.len() != 2 || !(2000..=2100).contains(&year) || !(1..=12).contains(&month) {
            return Err(bad());
        }
        Ok(Self { year, month })
    }

    /// The month a date falls in.
    pub fn of(date: time::Date) -> Self {
        Self { year: date.year(), month: u8::from(date.month()) }
    }

    /// The month `n` months later.
    pub fn plus(self, n: u32) -> Self {
        let index = self.year * 12 + i32::from(self.month) - 1 + n as i32;
        Self { year: index.div_euclid(12), month: (index.rem_euclid(12) + 1) as u8 }
    }
}

impl fmt::Display for Month {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:04}-{:02}", self.year, self.month)
    }
}

/// Review state of a case version (used by the approval flow of a later issue).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CaseState {
    /// Being written.
    Draft,
    /// Waiting for approval.
    Submitted,
    /// Frozen baseline.
    Approved,
    /// An older approved version replaced by a newer one.
    Superseded,
}

impl CaseState {
    /// Stored spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Draft => "draft",
            Self::Submitted => "submitted",
            Self::Approved => "approved",
            Self::Superseded => "superseded",
        }
    }

    /// Parse the stored spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        match value.trim() {
            "" | "draft" => Ok(Self::Draft),
            "submitted" => Ok(Self::Submitted),
            "approved" => Ok(Self::Approved),
            "superseded" => Ok(Self::Superseded),
            _ => Err("one of draft, submitted, approved, superseded".into()),
        }
    }
}

impl fmt::Display for CaseState {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Raw header fields of a case version.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct CaseHeaderInput {
    /// Scenario name, e.g. "Base" or "Two shifts".
    pub label: String,
    /// Horizon in months.
    #[serde(deserialize_with = "string_or_number")]
    pub horizon_months: String,
    /// First month, `YYYY-MM`.
    pub start_month: String,
    /// Months from the start until go-live.
    #[serde(deserialize_with = "string_or_number")]
    pub go_live_offset: String,
    /// Months of linear ramp-up after go-live.
    #[serde(deserialize_with = "string_or_number")]
    pub ramp_up_months: String,
    /// Chance the pilot works (fraction in JSON, percent in forms).
    #[serde(deserialize_with = "string_or_number")]
    pub success_probability: String,
}

/// A valid case header.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CaseHeader {
    /// Scenario name.
    pub label: String,
    /// Horizon in months (1 to 240).
    pub horizon_months: u32,
    /// First month of the schedule (month offset 0).
    #[serde(serialize_with = "ser_display")]
    pub start_month: Month,
    /// Go-live month offset; benefits start there.
    pub go_live_offset: u32,
    /// Ramp-up months.
    pub ramp_up_months: u32,
    /// Chance the pilot works, 0 to 1.
    pub success_probability: Decimal,
}

pub(crate) fn ser_display<S: serde::Serializer, T: fmt::Display>(v: &T, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(v)
}

impl CaseHeader {
    /// Validate a scenario label on its own (for copies).
    pub fn parse_label(value: &str) -> Result<String, String> {
        required_text(value, 80)
    }

    /// Validate the header; rates typed in `style`.
    pub fn parse(input: &CaseHeaderInput, style: RateStyle) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let label = e.take("label", required_text(&input.label, 80));
        let horizon = e.take("horizon_months", read_count(&input.horizon_months, 1, 240));
        let start = e.take("start_month", Month::parse(&input.start_month));
        let go_live = e.take("go_live_offset", read_count(&input.go_live_offset, 0, 239));
        let ramp = e.take("ramp_up_months", read_count(&input.ramp_up_months, 0, 120));
        let p = e.take(
            "success_probability",
            style.parse(&input.success_probability).and_then(|p| {
                if (Decimal::ZERO..=Decimal::ONE).contains(&p) { Ok(p) } else { Err("from 0 to 100 %".into()) }
            }),
        );
        if let (Some(h), Some(g)) = (horizon, go_live)
            && g >= h
        {
            e.push("go_live_offset", format!("must fall inside the horizon: 0 to {}", h - 1));
        }
        match (label, horizon, start, go_live, ramp, p) {
            (
                Some(label),
                Some(horizon_months),
                Some(start_month),
                Some(go_live_offset),
                Some(ramp_up_months),
                Some(success_probability),
            ) if e.is_empty() => {
                Ok(Self { label, horizon_months, start_month, go_live_offset, ramp_up_months, success_probability })
            }
            _ => Err(e),
        }
    }
}

/// Spending category of a cost item.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CostCategory {
    /// Sensors, edge devices, networking.
    Hardware,
    /// Integration engineering.
    Integration,
    /// Licences and subscriptions.
    Software,
    /// Data-engineering and upkeep time.
    People,
    /// Training.
    Training,
    /// Anything else.
    Other,
}

impl CostCategory {
    /// Every category (for select boxes).
    pub const ALL: [CostCategory; 6] =
        [Self::Hardware, Self::Integration, Self::Software, Self::People, Self::Training, Self::Other];

    /// Stored spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Hardware => "hardware",
            Self::Integration => "integration",
            Self::Software => "software",
            Self::People => "people",
            Self::Training => "training",
            Self::Other => "other",
        }
    }

    /// Parse the stored spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        Self::ALL
            .into_iter()
            .find(|c| c.as_str() == value.trim())
            .ok_or_else(|| "one of hardware, integration, software, people, training, other".into())
    }
}

/// Whether a cost is paid once or every year.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CostKind {
    /// Paid once, in its month.
    OneOff,
    /// Paid every year from its month, spread evenly over the months.
    Recurring,
}

impl CostKind {
    /// Stored spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::OneOff => "one_off",
            Self::Recurring => "recurring",
        }
    }

    /// Parse the stored spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        match value.trim() {
            "one_off" => Ok(Self::OneOff),
            "recurring" => Ok(Self::Recurring),
            _ => Err("one_off or recurring".into()),
        }
    }
}

/// Raw cost item fields.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct CostInput {
    /// What is bought.
    pub label: String,
    /// Category.
    pub category: String,
    /// `one_off` or `recurring`.
    pub kind: String,
    /// Amount (one-off) or amount per year (recurring), positive.
    #[serde(deserialize_with = "string_or_number")]
    pub amount: String,
    /// Month offset of a one-off, or first month of a recurring cost.
    #[serde(deserialize_with = "string_or_number")]
    pub month_offset: String,
    /// Yearly escalation of a recurring cost.
    #[serde(deserialize_with = "string_or_number")]
    pub escalation: String,
    /// Capital expenditure (depreciated in the after-tax view) rather than operating expense.
    #[serde(deserialize_with = "flexible_bool")]
    pub capex: bool,
    /// Where the figure comes from (a quote, a measurement, an estimate by whom); optional.
    pub source: String,
}

/// A valid cost item, not yet stored.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NewCostItem {
    /// What is bought.
    pub label: String,
    /// Category.
    pub category: CostCategory,
    /// One-off or recurring.
    pub kind: CostKind,
    /// Positive amount, or amount per year.
    pub amount: Decimal,
    /// Month offset.
    pub month_offset: u32,
    /// Yearly escalation fraction (recurring only; zero for one-offs).
    pub escalation: Decimal,
    /// Capex or opex.
    pub capex: bool,
    /// Where the figure comes from; empty when not given.
    pub source: String,
}

/// Longest source note of a cost item or driver, in characters.
pub const SOURCE_MAX: usize = 300;

impl NewCostItem {
    /// Validate a cost item of a case with `horizon` months.
    pub fn parse(input: &CostInput, horizon: u32, style: RateStyle) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let label = e.take("label", required_text(&input.label, 120));
        let category = e.take("category", CostCategory::parse(&input.category));
        let kind = e.take("kind", CostKind::parse(&input.kind));
        let f = style.numbers();
        let amount = e.take("amount", f.read(&input.amount).and_then(positive_money(f)));
        let month = e.take(
            "month_offset",
            read_count(
                if input.month_offset.trim().is_empty() { "0" } else { &input.month_offset },
                0,
                horizon.saturating_sub(1),
            )
            .map_err(|_| format!("a month offset inside the horizon: 0 to {}", horizon.saturating_sub(1))),
        );
        let escalation = e.take("escalation", optional_rate(&input.escalation, style));
        let source = e.take("source", optional_text(&input.source, SOURCE_MAX));
        match (label, category, kind, amount, month, escalation, source) {
            (
                Some(label),
                Some(category),
                Some(kind),
                Some(amount),
                Some(month_offset),
                Some(escalation),
                Some(source),
            ) if e.is_empty() => {
                Ok(Self { label, category, kind, amount, month_offset, escalation, capex: input.capex, source })
            }
            _ => Err(e),
        }
    }
}

/// A stored cost item.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CostItem {
    /// Row id.
    pub id: i64,
    /// Identity across the zone's versions (migration 0011): copies carry it.
    pub item_uid: i64,
    /// The validated fields.
    #[serde(flatten)]
    pub item: NewCostItem,
}

/// What a benefit driver saves.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DriverKind {
    /// Scrap parts avoided.
    Scrap,
    /// Energy saved (kWh).
    Energy,
    /// Minutes of line downtime avoided.
    Downtime,
    /// Expert hours freed.
    ExpertTime,
    /// Anything else with a unit of its own.
    Other,
}

impl DriverKind {
    /// Every kind (for select boxes). Adding a kind: see DEVELOPERS.md.
    pub const ALL: [DriverKind; 5] = [Self::Scrap, Self::Energy, Self::Downtime, Self::ExpertTime, Self::Other];

    /// Stored spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Scrap => "scrap",
            Self::Energy => "energy",
            Self::Downtime => "downtime",
            Self::ExpertTime => "expert_time",
            Self::Other => "other",
        }
    }

    /// Words for people.
    pub fn label(self) -> &'static str {
        match self {
            Self::Scrap => "Scrap avoided",
            Self::Energy => "Energy saved",
            Self::Downtime => "Downtime avoided",
            Self::ExpertTime => "Expert time freed",
            Self::Other => "Other",
        }
    }

    /// The unit proposed for a new driver of this kind.
    pub fn default_unit(self) -> &'static str {
        match self {
            Self::Scrap => "pcs",
            Self::Energy => "kWh",
            Self::Downtime => "min",
            Self::ExpertTime => "h",
            Self::Other => "unit",
        }
    }

    /// Parse the stored spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        Self::ALL
            .into_iter()
            .find(|k| k.as_str() == value.trim())
            .ok_or_else(|| "one of scrap, energy, downtime, expert_time, other".into())
    }
}

/// Raw benefit driver fields.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct DriverInput {
    /// What is saved, in words.
    pub label: String,
    /// Kind.
    pub kind: String,
    /// Unit; empty takes the kind's default.
    pub unit: String,
    /// Low yearly quantity.
    #[serde(deserialize_with = "string_or_number")]
    pub qty_low: String,
    /// Likely yearly quantity.
    #[serde(deserialize_with = "string_or_number")]
    pub qty_likely: String,
    /// High yearly quantity.
    #[serde(deserialize_with = "string_or_number")]
    pub qty_high: String,
    /// Money per unit.
    #[serde(deserialize_with = "string_or_number")]
    pub unit_value: String,
    /// Yearly escalation of the unit value.
    #[serde(deserialize_with = "string_or_number")]
    pub escalation: String,
    /// Expert time only: hours a year spent with the analytics; empty for a driver whose
    /// quantities are given directly.
    #[serde(deserialize_with = "string_or_number")]
    pub hours_spent: String,
    /// Expert time only: expert hours freed per hour spent with the analytics; empty takes the
    /// site's multiplier.
    #[serde(deserialize_with = "string_or_number")]
    pub hours_multiplier: String,
    /// Where the figures come from; optional.
    pub source: String,
}

/// An expert-time estimate by the rule of thumb of the trade (common practice, no published
/// source): every hour spent with the analytics frees `multiplier` expert hours at most, so
/// `hours_spent x multiplier` is an upper bound, taken as the driver's likely quantity.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct ExpertHours {
    /// Hours a year spent with the analytics.
    pub hours_spent: Decimal,
    /// Expert hours freed per hour spent (the site's multiplier unless the driver says).
    pub hours_multiplier: Decimal,
}

impl ExpertHours {
    /// The expected expert hours freed a year: hours spent x multiplier, in `Decimal`.
    pub fn expected(self) -> Decimal {
        self.hours_spent * self.hours_multiplier
    }
}

/// The largest expert-time multiplier accepted (the site's and a driver's).
pub const MAX_EXPERT_MULTIPLIER: Decimal = Decimal::from_parts(100, 0, 0, false, 0);

/// Read an expert-time multiplier: more than 0, at most [`MAX_EXPERT_MULTIPLIER`].
pub fn parse_expert_multiplier(value: &str, f: NumberFormat) -> Result<Decimal, String> {
    let m = f.read(value)?;
    if m > Decimal::ZERO && m <= MAX_EXPERT_MULTIPLIER {
        Ok(m)
    } else {
        Err(format!("more than 0 and at most {}, e.g. 3 expert hours freed per hour spent", MAX_EXPERT_MULTIPLIER))
    }
}

/// A valid benefit driver, not yet stored.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NewBenefitDriver {
    /// What is saved.
    pub label: String,
    /// Kind.
    pub kind: DriverKind,
    /// Unit (pcs, kWh, min, h or a custom word).
    pub unit: String,
    /// Low yearly quantity.
    pub qty_low: Decimal,
    /// Likely yearly quantity.
    pub qty_likely: Decimal,
    /// High yearly quantity.
    pub qty_high: Decimal,
    /// Money per unit.
    pub unit_value: Decimal,
    /// Yearly escalation fraction.
    pub escalation: Decimal,
    /// The two inputs of an expert-time driver estimated as hours spent x multiplier (its
    /// likely quantity is their product); `None` for quantities given directly.
    #[serde(flatten)]
    pub expert_hours: Option<ExpertHours>,
    /// Where the figures come from; empty when not given.
    pub source: String,
}

impl NewBenefitDriver {
    /// Validate a driver; quantities must satisfy 0 <= low <= likely <= high. An expert-time
    /// driver with `hours_spent` takes its likely quantity from [`ExpertHours::expected`]
    /// (the multiplier defaults to `site_multiplier`), and an empty low or high quantity is
    /// that product too.
    pub fn parse(input: &DriverInput, style: RateStyle, site_multiplier: Decimal) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let label = e.take("label", required_text(&input.label, 120));
        let kind = e.take("kind", DriverKind::parse(&input.kind));
        let unit = if input.unit.trim().is_empty() {
            kind.map(|k| k.default_unit().to_string())
        } else {
            e.take("unit", required_text(&input.unit, 20))
        };
        let f = style.numbers();
        let quantity = |v: &str| f.read(v).and_then(bounded(MAX_QUANTITY, f));
        let expert = Self::parse_expert_hours(input, kind, site_multiplier, f, &mut e);
        let (low, likely, high) = match expert {
            Some(Some(x)) => {
                let product = x.expected();
                let given = |e: &mut FieldErrors, field: &str, v: &str| {
                    if v.trim().is_empty() { Some(product) } else { e.take(field, quantity(v)) }
                };
                let likely = e.take("qty_likely", bounded(MAX_QUANTITY, f)(product));
                if !input.qty_likely.trim().is_empty() && f.read(&input.qty_likely).ok() != Some(product) {
                    e.push(
                        "qty_likely",
                        format!(
                            "leave empty: the likely quantity is hours spent x multiplier ({})",
                            f.write_quantity(product)
                        ),
                    );
                }
                (given(&mut e, "qty_low", &input.qty_low), likely, given(&mut e, "qty_high", &input.qty_high))
            }
            // Hours given but unreadable: the quantities wait for them.
            Some(None) => (None, None, None),
            None => (
                e.take("qty_low", quantity(&input.qty_low)),
                e.take("qty_likely", quantity(&input.qty_likely)),
                e.take("qty_high", quantity(&input.qty_high)),
            ),
        };
        if let (Some(l), Some(m)) = (low, likely)
            && l > m
        {
            e.push("qty_low", "must not exceed the likely quantity");
        }
        if let (Some(m), Some(h)) = (likely, high)
            && m > h
        {
            e.push("qty_high", "must be at least the likely quantity");
        }
        let unit_value = e.take("unit_value", f.read(&input.unit_value).and_then(bounded(MAX_UNIT_VALUE, f)));
        let escalation = e.take("escalation", optional_rate(&input.escalation, style));
        // An error is pushed to `e`, which the guard below checks.
        let source = e.take("source", optional_text(&input.source, SOURCE_MAX)).unwrap_or_default();
        match (label, kind, unit, low, likely, high, unit_value, escalation) {
            (
                Some(label),
                Some(kind),
                Some(unit),
                Some(qty_low),
                Some(qty_likely),
                Some(qty_high),
                Some(unit_value),
                Some(escalation),
            ) if e.is_empty() => Ok(Self {
                label,
                kind,
                unit,
                qty_low,
                qty_likely,
                qty_high,
                unit_value,
                escalation,
                expert_hours: expert.flatten(),
                source,
            }),
            _ => Err(e),
        }
    }

    /// The expert-hours inputs: `None` when no hours are given (quantities given directly),
    /// `Some(None)` when they are refused (errors pushed), `Some(Some(_))` when valid.
    fn parse_expert_hours(
        input: &DriverInput,
        kind: Option<DriverKind>,
        site_multiplier: Decimal,
        f: NumberFormat,
        e: &mut FieldErrors,
    ) -> Option<Option<ExpertHours>> {
        if input.hours_spent.trim().is_empty() {
            if !input.hours_multiplier.trim().is_empty() {
                e.push("hours_spent", "required with a multiplier: the hours a year spent with the analytics");
                return Some(None);
            }
            return None;
        }
        if kind.is_some_and(|k| k != DriverKind::ExpertTime) {
            e.push("hours_spent", "only for an expert time driver (kind expert_time)");
            return Some(None);
        }
        let hours = e.take("hours_spent", f.read(&input.hours_spent).and_then(bounded(MAX_QUANTITY, f)));
        let multiplier = if input.hours_multiplier.trim().is_empty() {
            Some(site_multiplier)
        } else {
            e.take("hours_multiplier", parse_expert_multiplier(&input.hours_multiplier, f))
        };
        match (hours, multiplier) {
            (Some(hours_spent), Some(hours_multiplier)) => Some(Some(ExpertHours { hours_spent, hours_multiplier })),
            _ => Some(None),
        }
    }
}

/// A stored benefit driver.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BenefitDriver {
    /// Row id.
    pub id: i64,
    /// Identity across the zone's versions (migration 0011): copies carry it.
    pub item_uid: i64,
    /// The validated fields.
    #[serde(flatten)]
    pub driver: NewBenefitDriver,
}

/// A whole case as JSON bodies and scenario files give it.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct CaseSpecInput {
    /// Header fields.
    #[serde(flatten)]
    pub header: CaseHeaderInput,
    /// Review state (scenario files only; the API always creates drafts).
    pub state: String,
    /// Cost items.
    pub costs: Vec<CostInput>,
    /// Benefit drivers.
    pub drivers: Vec<DriverInput>,
}

/// A valid whole case.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CaseSpec {
    /// Header.
    #[serde(flatten)]
    pub header: CaseHeader,
    /// Review state.
    pub state: CaseState,
    /// Cost items.
    pub costs: Vec<NewCostItem>,
    /// Benefit drivers.
    pub drivers: Vec<NewBenefitDriver>,
}

impl CaseSpec {
    /// Validate header, every cost and every driver; field names carry their list position
    /// (`costs[1].amount`).
    /// `site_multiplier` is the expert-time multiplier a driver without one takes.
    pub fn parse(input: &CaseSpecInput, style: RateStyle, site_multiplier: Decimal) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let header = CaseHeader::parse(&input.header, style).map_err(|err| e.extend_prefixed("", err)).ok();
        let state = e.take("state", CaseState::parse(&input.state));
        let horizon = header.as_ref().map_or(240, |h| h.horizon_months);
        let mut costs = Vec::with_capacity(input.costs.len());
        for (i, c) in input.costs.iter().enumerate() {
            match NewCostItem::parse(c, horizon, style) {
                Ok(c) => costs.push(c),
                Err(err) => e.extend_prefixed(&format!("costs[{i}]."), err),
            }
        }
        let mut drivers = Vec::with_capacity(input.drivers.len());
        for (i, d) in input.drivers.iter().enumerate() {
            match NewBenefitDriver::parse(d, style, site_multiplier) {
                Ok(d) => drivers.push(d),
                Err(err) => e.extend_prefixed(&format!("drivers[{i}]."), err),
            }
        }
        match (header, state) {
            (Some(header), Some(state)) if e.is_empty() => Ok(Self { header, state, costs, drivers }),
            _ => Err(e),
        }
    }
}

/// Build the finance engine's input from a case's parts, at likely quantities.
pub fn finance_input<'a>(
    header: &CaseHeader,
    costs: impl IntoIterator<Item = &'a NewCostItem>,
    drivers: impl IntoIterator<Item = &'a NewBenefitDriver>,
    tax: Option<TaxInput>,
) -> CaseInput {
    CaseInput {
        horizon_months: header.horizon_months,
        go_live_month: header.go_live_offset,
        ramp_up_months: header.ramp_up_months,
        costs: costs
            .into_iter()
            .map(|c| FinCost {
                label: c.label.clone(),
                amount: c.amount,
                timing: match c.kind {
                    CostKind::OneOff => CostTiming::OneOff { month: c.month_offset },
                    CostKind::Recurring => {
                        CostTiming::Recurring { from_month: c.month_offset, escalation: c.escalation }
                    }
                },
                capex: c.capex,
            })
            .collect(),
        drivers: drivers
            .into_iter()
            .map(|d| FinDriver {
                label: d.label.clone(),
                quantity_per_year: d.qty_likely,
                unit_value: d.unit_value,
                escalation: d.escalation,
            })
            .collect(),
        tax,
    }
}

/// Upper bounds that keep every schedule sum far inside `Decimal`'s range (about 7.9e28), so a
/// stored case can always be computed: 240 months x many drivers x 1e9 units x 1e6 per unit x
/// (1 + 100 %)^20 years of escalation stays below 1e28.
const MAX_AMOUNT: Decimal = Decimal::from_parts(0xD4A5_1000, 0xE8, 0, false, 0); // 1e12
const MAX_QUANTITY: Decimal = Decimal::from_parts(1_000_000_000, 0, 0, false, 0);
const MAX_UNIT_VALUE: Decimal = Decimal::from_parts(1_000_000, 0, 0, false, 0);

fn positive_money(f: NumberFormat) -> impl Fn(Decimal) -> Result<Decimal, String> {
    move |d| {
        if d <= Decimal::ZERO {
            Err("a positive amount, e.g. 12500".into())
        } else if d > MAX_AMOUNT {
            Err(format!("at most {}", f.write(MAX_AMOUNT, 0)))
        } else {
            Ok(d)
        }
    }
}

fn bounded(max: Decimal, f: NumberFormat) -> impl Fn(Decimal) -> Result<Decimal, String> {
    move |d| {
        if d < Decimal::ZERO {
            Err("zero or more".into())
        } else if d > max {
            Err(format!("at most {}", f.write(max, 0)))
        } else {
            Ok(d)
        }
    }
}

/// An escalation rate: empty means none; from -100 % (exclusive) to +100 % a year.
fn optional_rate(value: &str, style: RateStyle) -> Result<Decimal, String> {
    if value.trim().is_empty() {
        return Ok(Decimal::ZERO);
    }
    let r = style.parse(value)?;
    if r > Decimal::ONE { Err("at most 100 % a year".into()) } else { Ok(r) }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::domain::FieldError;

    #[test]
    fn months_add_across_years() {
        let m = Month::parse("2026-11").map(|m| m.plus(14).to_string());
        assert_eq!(m, Ok("2028-01".to_string()));
        assert!(Month::parse("2026-13").is_err());
        assert!(Month::parse("26-01").is_err());
    }

    #[test]
    fn driver_quantities_must_be_ordered() {
        let input = DriverInput {
            label: "Scrap".into(),
            kind: "scrap".into(),
            qty_low: "10".into(),
            qty_likely: "5".into(),
            qty_high: "20".into(),
            unit_value: "3".into(),
            ..Default::default()
        };
        let err = NewBenefitDriver::parse(&input, RateStyle::Percent(NumberFormat::DecimalPoint), Decimal::from(3))
            .err()
            .unwrap_or_default();
        assert_eq!(err.get("qty_low"), Some("must not exceed the likely quantity"));
    }

    fn expert(hours: &str, multiplier: &str) -> DriverInput {
        DriverInput {
            label: "Analysis hours".into(),
            kind: "expert_time".into(),
            hours_spent: hours.into(),
            hours_multiplier: multiplier.into(),
            unit_value: "68".into(),
            ..Default::default()
        }
    }

    #[test]
    fn expert_time_is_hours_spent_times_the_multiplier() -> Result<(), FieldErrors> {
        // Common practice (a rule of thumb of the trade, an upper bound): 40 h spent with the
        // analytics x 3 = 120 expert hours freed a year; 12.5 h x 2.4 = 30 h (by hand).
        let point = RateStyle::Percent(NumberFormat::DecimalPoint);
        let d = NewBenefitDriver::parse(&expert("40", ""), point, Decimal::from(3))?;
        assert_eq!((d.qty_low, d.qty_likely, d.qty_high), (Decimal::from(120), Decimal::from(120), Decimal::from(120)));
        assert_eq!(
            d.expert_hours,
            Some(ExpertHours { hours_spent: Decimal::from(40), hours_multiplier: Decimal::from(3) })
        );
        assert_eq!(d.unit, "h");
        let comma = RateStyle::Percent(NumberFormat::DecimalComma);
        let mut input = expert("12,5", "2,4");
        input.qty_low = "10".into();
        input.qty_high = "45".into();
        let d = NewBenefitDriver::parse(&input, comma, Decimal::from(3))?;
        assert_eq!(d.qty_likely.to_string(), "30.00");
        assert_eq!((d.qty_low, d.qty_high), (Decimal::from(10), Decimal::from(45)));
        // Quantities given directly (positive control for the old drivers): no hours kept.
        let direct =
            DriverInput { qty_low: "1".into(), qty_likely: "2".into(), qty_high: "3".into(), ..expert("", "") };
        assert_eq!(NewBenefitDriver::parse(&direct, point, Decimal::from(3))?.expert_hours, None);
        Ok(())
    }

    #[test]
    fn expert_hours_refusals_name_their_field() {
        let point = RateStyle::Percent(NumberFormat::DecimalPoint);
        let refused =
            |input: DriverInput| NewBenefitDriver::parse(&input, point, Decimal::from(3)).err().unwrap_or_default().0;
        let one = |field: &str, message: &str| vec![FieldError { field: field.into(), message: message.into() }];
        assert_eq!(
            refused(expert("40", "0")),
            one("hours_multiplier", "more than 0 and at most 100, e.g. 3 expert hours freed per hour spent")
        );
        assert_eq!(
            refused(expert("", "2")),
            one("hours_spent", "required with a multiplier: the hours a year spent with the analytics")
        );
        assert_eq!(
            refused(DriverInput { kind: "scrap".into(), ..expert("40", "") }),
            one("hours_spent", "only for an expert time driver (kind expert_time)")
        );
        assert_eq!(
            refused(DriverInput { qty_likely: "100".into(), ..expert("40", "") }),
            one("qty_likely", "leave empty: the likely quantity is hours spent x multiplier (120)")
        );
        // The product sent back as the likely quantity (as the API answers it) is accepted.
        assert_eq!(refused(DriverInput { qty_likely: "120".into(), ..expert("40", "") }), vec![]);
        assert_eq!(
            refused(DriverInput { qty_high: "100".into(), ..expert("40", "") }),
            one("qty_high", "must be at least the likely quantity")
        );
    }

    #[test]
    fn bounds_keep_cases_computable() {
        assert_eq!(MAX_AMOUNT, Decimal::from(1_000_000_000_000_i64));
        let point = NumberFormat::DecimalPoint;
        let too_much = Decimal::from(2_000_000_000_000_i64);
        assert_eq!(positive_money(point)(too_much), Err("at most 1,000,000,000,000".into()));
        let comma = NumberFormat::DecimalComma;
        assert_eq!(positive_money(comma)(too_much), Err("at most 1.000.000.000.000".into()));
        assert_eq!(bounded(MAX_UNIT_VALUE, point)(Decimal::from(2_000_000)), Err("at most 1,000,000".into()));
        assert_eq!(optional_rate("150", RateStyle::Percent(point)), Err("at most 100 % a year".into()));
    }

    #[test]
    fn spec_errors_carry_positions() {
        let input = CaseSpecInput {
            header: CaseHeaderInput {
                label: "Base".into(),
                horizon_months: "36".into(),
                start_month: "2026-01".into(),
                go_live_offset: "3".into(),
                ramp_up_months: "2".into(),
                success_probability: "0.8".into(),
            },
            costs: vec![CostInput {
                label: "Sensors".into(),
                category: "hardware".into(),
                kind: "one_off".into(),
                amount: "-5".into(),
                ..Default::default()
            }],
            ..Default::default()
        };
        let err = CaseSpec::parse(&input, RateStyle::Fraction(NumberFormat::Plain), Decimal::from(3))
            .err()
            .unwrap_or_default();
        assert_eq!(err.0.len(), 1);
        assert_eq!(err.0[0].field, "costs[0].amount");
    }
}
