//! Ledger bookings: measured savings (direct, or adjusted to the period's volume) and actual
//! spending, as raw input
//! and as validated bookings. Context checks (the item belongs to the zone's baseline, the
//! month lies inside its horizon and not in the future) need the stored case: see `db::ledger`.

use super::de::{flexible_bool, string_or_number};
use super::{CostItemId, DriverId, EntryId, FieldErrors, Month, NumberFormat, required_text};
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};

/// Saving (positive amount) or spending (negative amount).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum EntryKind {
    /// A measured saving against a benefit driver.
    Saving,
    /// Money actually spent against a cost item.
    Spending,
}

impl EntryKind {
    /// Stored spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Saving => "saving",
            Self::Spending => "spending",
        }
    }

    /// Parse the stored spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        match value.trim() {
            "saving" => Ok(Self::Saving),
            "spending" => Ok(Self::Spending),
            _ => Err("saving or spending".into()),
        }
    }
}

/// What an entry is booked against: a benefit driver (a saving) or a cost item (spending).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum LedgerItem {
    /// A benefit driver of the baseline: the entry is a saving.
    Driver(DriverId),
    /// A cost item of the baseline: the entry is spending.
    Cost(CostItemId),
}

impl LedgerItem {
    /// The item of an entry of `kind` with row id `id`.
    pub fn new(kind: EntryKind, id: i64) -> Self {
        match kind {
            EntryKind::Saving => Self::Driver(DriverId(id)),
            EntryKind::Spending => Self::Cost(CostItemId(id)),
        }
    }

    /// The item of a stored row's `driver_id` and `cost_id` columns (exactly one is set).
    pub fn from_columns(driver_id: Option<i64>, cost_id: Option<i64>) -> Option<Self> {
        match (driver_id, cost_id) {
            (Some(d), None) => Some(Self::Driver(DriverId(d))),
            (None, Some(c)) => Some(Self::Cost(CostItemId(c))),
            _ => None,
        }
    }

    /// Saving for a driver, spending for a cost item.
    pub fn kind(self) -> EntryKind {
        match self {
            Self::Driver(_) => EntryKind::Saving,
            Self::Cost(_) => EntryKind::Spending,
        }
    }

    /// The item's row id.
    pub fn id(self) -> i64 {
        match self {
            Self::Driver(DriverId(id)) | Self::Cost(CostItemId(id)) => id,
        }
    }

    /// The driver, for a saving.
    pub fn driver(self) -> Option<DriverId> {
        if let Self::Driver(d) = self { Some(d) } else { None }
    }

    /// The cost item, for spending.
    pub fn cost(self) -> Option<CostItemId> {
        if let Self::Cost(c) = self { Some(c) } else { None }
    }

    /// The running-totals key: `driver:<id>` or `cost:<id>`.
    pub fn key(self) -> String {
        match self {
            Self::Driver(d) => format!("driver:{d}"),
            Self::Cost(c) => format!("cost:{c}"),
        }
    }
}

/// The API's spelling of an item: `kind` with `driver_id` or `cost_id`.
impl Serialize for LedgerItem {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut st = s.serialize_struct("LedgerItem", 3)?;
        st.serialize_field("kind", &self.kind())?;
        st.serialize_field("driver_id", &self.driver())?;
        st.serialize_field("cost_id", &self.cost())?;
        st.end()
    }
}

/// How an entry was measured: the method of the glossary (DEVELOPERS.md).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// The avoided quantity itself.
    Direct,
    /// Baseline intensity x the reporting period's volume - measured consumption.
    VolumeAdjusted,
    /// Money spent.
    Spend,
}

impl Method {
    /// The spelling of the API, the CSV files and scenario files.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Direct => "direct",
            Self::VolumeAdjusted => "volume_adjusted",
            Self::Spend => "spend",
        }
    }

    /// The code stored in `ledger_entries.method` (under its CHECK and inside the hash
    /// chain, so it never changes): `volume_adjusted` is stored as `normalized`.
    pub fn stored(self) -> &'static str {
        match self {
            Self::Direct => "direct",
            Self::VolumeAdjusted => "normalized",
            Self::Spend => "spend",
        }
    }

    /// The API's spelling before 0.2.0 (`method` of an entry, deprecated; removed in 0.3.0).
    pub fn deprecated_name(self) -> &'static str {
        self.stored()
    }

    /// The page's words.
    pub fn label(self) -> &'static str {
        match self {
            Self::Direct => "direct",
            Self::VolumeAdjusted => "adjusted to the period's volume",
            Self::Spend => "money spent",
        }
    }

    /// Read a stored code.
    pub fn from_stored(code: &str) -> Option<Self> {
        match code {
            "direct" => Some(Self::Direct),
            "normalized" => Some(Self::VolumeAdjusted),
            "spend" => Some(Self::Spend),
            _ => None,
        }
    }

    /// Read the input spelling (form, JSON, CSV, scenario file): `volume_adjusted`, or the old
    /// `normalized`, still accepted until 0.3.0.
    pub fn from_input(value: &str) -> Option<Self> {
        match value.trim() {
            "direct" => Some(Self::Direct),
            "volume_adjusted" | "normalized" => Some(Self::VolumeAdjusted),
            "spend" => Some(Self::Spend),
            _ => None,
        }
    }
}

impl Serialize for Method {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.as_str())
    }
}

/// How a saving was measured, with its inputs.
#[derive(Debug, Clone, PartialEq)]
pub enum Measurement {
    /// The avoided quantity itself (e.g. 1,240 kWh): always more than zero.
    Direct {
        /// Avoided quantity in the driver's unit, more than zero (a period that did worse than
        /// its baseline is measured with [`Measurement::VolumeAdjusted`], which may be negative).
        quantity: Decimal,
    },
    /// Adjusted to the period's volume: baseline intensity x reporting volume - measured
    /// consumption (IPMVP's avoided quantity on the reporting-period basis); negative when the
    /// zone did worse than its baseline.
    VolumeAdjusted {
        /// Baseline consumption per unit of volume (e.g. kWh per unit produced).
        baseline_intensity: Decimal,
        /// The reporting period's volume (e.g. units produced).
        reporting_volume: Decimal,
        /// What was metered in the reporting period.
        measured_consumption: Decimal,
    },
    /// Money spent (positive as typed; booked as a negative flow).
    Spend {
        /// Amount spent.
        amount: Decimal,
    },
}

impl Measurement {
    /// Its method.
    pub fn method(&self) -> Method {
        match self {
            Self::Direct { .. } => Method::Direct,
            Self::VolumeAdjusted { .. } => Method::VolumeAdjusted,
            Self::Spend { .. } => Method::Spend,
        }
    }
}

/// Raw booking fields as a form, JSON body or CSV row gives them.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct BookingInput {
    /// `saving` or `spending`.
    pub kind: String,
    /// `direct`, `volume_adjusted` (or the deprecated `normalized`) or (spending) empty /
    /// `spend`.
    pub method: String,
    /// Driver id (saving) or cost item id (spending) of the baseline case.
    #[serde(deserialize_with = "string_or_number")]
    pub item: String,
    /// Month, `YYYY-MM`.
    pub period: String,
    /// Direct: avoided quantity.
    #[serde(deserialize_with = "string_or_number")]
    pub quantity: String,
    /// Adjusted to the period's volume: baseline intensity.
    #[serde(deserialize_with = "string_or_number")]
    pub baseline_intensity: String,
    /// Adjusted to the period's volume: reporting-period volume.
    #[serde(deserialize_with = "string_or_number")]
    pub reporting_volume: String,
    /// Adjusted to the period's volume: measured consumption.
    #[serde(deserialize_with = "string_or_number")]
    pub measured_consumption: String,
    /// Spending: amount spent.
    #[serde(deserialize_with = "string_or_number")]
    pub amount: String,
    /// How it was measured (meter, report, sample...).
    pub evidence: String,
    /// Spending: the day it was paid, `YYYY-MM-DD` inside the booked month (optional).
    pub paid_on: String,
    /// Book it although it is far outside its item's expectation (see [`Plausibility`]).
    #[serde(deserialize_with = "flexible_bool")]
    pub confirm_implausible: bool,
}

/// A booking whose fields are each valid.
#[derive(Debug, Clone, PartialEq)]
pub struct Booking {
    /// The driver (saving) or cost item (spending).
    pub item: LedgerItem,
    /// The month booked.
    pub period: Month,
    /// Method and inputs.
    pub measurement: Measurement,
    /// Evidence note.
    pub evidence: String,
    /// Spending: the payment date, inside `period`.
    pub paid_on: Option<time::Date>,
    /// The author confirmed a booking beyond the plausibility threshold.
    pub confirm_implausible: bool,
}

impl Booking {
    /// The booking in one canonical text, for an `Idempotency-Key` fingerprint: the parsed
    /// values with numbers normalised (`"1.50"` and `1.5` are the same booking), text quoted.
    pub fn canonical(&self) -> String {
        let n = |d: &Decimal| d.normalize().to_string();
        let numbers = match &self.measurement {
            Measurement::Direct { quantity } => n(quantity),
            Measurement::VolumeAdjusted { baseline_intensity, reporting_volume, measured_consumption } => {
                format!("{} {} {}", n(baseline_intensity), n(reporting_volume), n(measured_consumption))
            }
            Measurement::Spend { amount } => n(amount),
        };
        format!(
            "kind={}\nitem={}\nperiod={}\nmethod={}\nnumbers={numbers}\nevidence={:?}\npaid_on={}\nconfirm={}",
            self.item.kind().as_str(),
            self.item.id(),
            self.period,
            // The stored code, so that a retry across the rename keeps its fingerprint.
            self.measurement.method().stored(),
            self.evidence,
            self.paid_on.map(|d| d.to_string()).unwrap_or_default(),
            self.confirm_implausible
        )
    }
}

/// Parse an optional payment date (`YYYY-MM-DD`) that must fall in `period`.
fn paid_on(value: &str, period: Option<Month>) -> Result<Option<time::Date>, String> {
    let v = value.trim();
    if v.is_empty() {
        return Ok(None);
    }
    let format = time::macros::format_description!("[year]-[month]-[day]");
    let date = time::Date::parse(v, &format).map_err(|_| "a date as YYYY-MM-DD, e.g. 2025-12-12".to_string())?;
    match period {
        Some(p) if Month::of(date) != p => Err(format!("a day of the booked month {p} (YYYY-MM-DD)")),
        _ => Ok(Some(date)),
    }
}

fn positive(message: &'static str) -> impl Fn(Decimal) -> Result<Decimal, String> {
    move |d| if d > Decimal::ZERO { Ok(d) } else { Err(message.into()) }
}

fn non_negative(field: &'static str) -> impl Fn(Decimal) -> Result<Decimal, String> {
    move |d| if d < Decimal::ZERO { Err(format!("{field} cannot be negative")) } else { Ok(d) }
}

/// Bounds that keep ledger sums far inside `Decimal`'s range.
const MAX_MAGNITUDE: Decimal = Decimal::from_parts(0xD4A5_1000, 0xE8, 0, false, 0); // 1e12

fn bounded(f: NumberFormat) -> impl Fn(Decimal) -> Result<Decimal, String> {
    move |d| {
        if d.abs() > MAX_MAGNITUDE { Err(format!("at most {} in size", f.write(MAX_MAGNITUDE, 0))) } else { Ok(d) }
    }
}

impl Booking {
    /// Validate each field, numbers typed in `f`; the names match the form and the CSV columns.
    pub fn parse(input: &BookingInput, f: NumberFormat) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let kind = e.take("kind", EntryKind::parse(&input.kind));
        let item_id = e.take(
            "item",
            input.item.trim().parse::<i64>().map_err(|_| "choose the driver or cost item (its id)".to_string()),
        );
        let period = e.take("period", Month::parse(&input.period));
        let evidence = e.take(
            "evidence",
            required_text(&input.evidence, 500).map_err(|_| {
                "required: say how it was measured (meter, report, sample), at most 500 characters".to_string()
            }),
        );
        // Empty is spending's default; `None` for anything else unknown.
        let method =
            if input.method.trim().is_empty() { Some(Method::Spend) } else { Method::from_input(&input.method) };
        let measurement = match (kind, method) {
            (Some(EntryKind::Saving), Some(Method::Direct)) => e
                .take(
                    "quantity",
                    f.read(&input.quantity).and_then(bounded(f)).and_then(positive(
                        "an avoided quantity, more than zero: a period that did worse than its baseline is booked \
                         with the method volume_adjusted (adjusted to the period's volume); a wrong entry is \
                         corrected by reversal",
                    )),
                )
                .map(|quantity| Measurement::Direct { quantity }),
            (Some(EntryKind::Saving), Some(Method::VolumeAdjusted)) => {
                let i = e.take(
                    "baseline_intensity",
                    f.read(&input.baseline_intensity).and_then(bounded(f)).and_then(non_negative("baseline intensity")),
                );
                let v = e.take(
                    "reporting_volume",
                    f.read(&input.reporting_volume).and_then(bounded(f)).and_then(non_negative("volume")),
                );
                let c = e.take(
                    "measured_consumption",
                    f.read(&input.measured_consumption).and_then(bounded(f)).and_then(non_negative("consumption")),
                );
                match (i, v, c) {
                    (Some(baseline_intensity), Some(reporting_volume), Some(measured_consumption)) => {
                        Some(Measurement::VolumeAdjusted { baseline_intensity, reporting_volume, measured_consumption })
                    }
                    _ => None,
                }
            }
            (Some(EntryKind::Saving), _) => {
                e.push("method", "direct or volume_adjusted");
                None
            }
            (Some(EntryKind::Spending), Some(Method::Spend)) => e
                .take(
                    "amount",
                    f.read(&input.amount)
                        .and_then(bounded(f))
                        .and_then(positive("the amount spent, more than zero (correct by reversal)")),
                )
                .map(|amount| Measurement::Spend { amount }),
            (Some(EntryKind::Spending), _) => {
                e.push("method", "leave empty (or spend) for spending");
                None
            }
            (None, _) => None,
        };
        let paid_on = match kind {
            Some(EntryKind::Saving) if !input.paid_on.trim().is_empty() => {
                e.push("paid_on", "only spending carries a payment date: leave it empty for a saving");
                None
            }
            _ => e.take("paid_on", paid_on(&input.paid_on, period)).flatten(),
        };
        let confirm_implausible = input.confirm_implausible;
        match (kind, item_id, period, measurement, evidence) {
            (Some(kind), Some(item_id), Some(period), Some(measurement), Some(evidence)) if e.is_empty() => {
                let item = LedgerItem::new(kind, item_id);
                Ok(Self { item, period, measurement, evidence, paid_on, confirm_implausible })
            }
            _ => Err(e),
        }
    }
}

/// A stored ledger entry.
#[derive(Debug, Clone, Serialize)]
pub struct LedgerEntry {
    /// Row id.
    pub id: EntryId,
    /// Zone.
    pub zone_id: i64,
    /// The baseline case version it was measured against.
    pub case_id: i64,
    /// The driver (saving) or cost item (spending).
    #[serde(flatten)]
    pub item: LedgerItem,
    /// Month booked.
    #[serde(serialize_with = "super::case::ser_display")]
    pub period: Month,
    /// How it was measured (stored as its code, [`Method::stored`]). The API writes it twice:
    /// `booking_method` (`volume_adjusted`) and the deprecated `method` (`normalized`, the
    /// spelling before 0.2.0; removed in 0.3.0).
    #[serde(flatten, serialize_with = "ser_methods")]
    pub method: Method,
    /// Avoided quantity (savings).
    pub quantity: Option<Decimal>,
    /// Unit value frozen at booking (savings).
    pub unit_value: Option<Decimal>,
    /// Signed money flow: savings positive, spending negative.
    pub amount: Decimal,
    /// Adjusted to the period's volume: input.
    pub baseline_intensity: Option<Decimal>,
    /// Adjusted to the period's volume: input.
    pub reporting_volume: Option<Decimal>,
    /// Adjusted to the period's volume: input.
    pub measured_consumption: Option<Decimal>,
    /// Evidence note.
    pub evidence: String,
    /// The entry this one reverses.
    pub reverses_id: Option<EntryId>,
    /// The entry that reversed this one, if any.
    pub reversed_by: Option<EntryId>,
    /// RFC 3339 booking time.
    pub booked_at: String,
    /// Who booked it.
    pub booked_by: String,
    /// Spending: the day it was paid (XNPV / XIRR date; the month's end when `None`).
    #[serde(serialize_with = "ser_date")]
    pub paid_on: Option<time::Date>,
    /// Beyond the plausibility threshold and confirmed by its author.
    pub implausible_confirmed: bool,
    /// Booked with a token that someone else (this name, e.g. an admin) made for `booked_by`:
    /// they booked it on `booked_by`'s behalf. `None`: booked by `booked_by` themselves.
    pub on_behalf_by: Option<String>,
}

impl LedgerEntry {
    /// Who booked the entry, in words: `booked by t-admin on behalf of t-controller`, or
    /// `booked by t-controller`.
    pub fn booked_by_words(&self) -> String {
        match &self.on_behalf_by {
            Some(issuer) => format!("booked by {issuer} on behalf of {}", self.booked_by),
            None => format!("booked by {}", self.booked_by),
        }
    }

    /// Saving or spending.
    pub fn kind(&self) -> EntryKind {
        self.item.kind()
    }

    /// Whether the entry counts as booked: neither reversed nor a reversal. Only such entries
    /// make a month "elapsed" (a reversed booking in a later month does not stretch the window).
    pub fn is_live(&self) -> bool {
        self.reverses_id.is_none() && self.reversed_by.is_none()
    }
}

fn ser_methods<S: serde::Serializer>(m: &Method, s: S) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeStruct;
    let mut st = s.serialize_struct("Method", 2)?;
    st.serialize_field("booking_method", m.as_str())?;
    st.serialize_field("method", m.deprecated_name())?;
    st.end()
}

fn ser_date<S: serde::Serializer>(d: &Option<time::Date>, s: S) -> Result<S::Ok, S::Error> {
    match d {
        Some(d) => s.collect_str(d),
        None => s.serialize_none(),
    }
}

/// What bookings are checked against: the zone's approved baseline, its horizon and items.
#[derive(Debug, Clone, PartialEq)]
pub struct BookingBaseline {
    /// The approved case version.
    pub case_id: i64,
    /// Its first month.
    pub start: Month,
    /// Its horizon in months.
    pub horizon: u32,
    /// Benefit drivers, by id.
    pub drivers: Vec<BaselineDriver>,
    /// Cost items, by id.
    pub costs: Vec<BaselineCost>,
}

/// A benefit driver as bookings are checked against it.
#[derive(Debug, Clone, PartialEq)]
pub struct BaselineDriver {
    /// Driver id.
    pub id: i64,
    /// Label.
    pub label: String,
    /// Unit of its quantity.
    pub unit: String,
    /// Money per unit, frozen on each entry.
    pub unit_value: Decimal,
    /// High yearly quantity of the business case (the plausibility threshold's base).
    pub qty_high: Decimal,
}

/// A cost item as bookings are checked against it.
#[derive(Debug, Clone, PartialEq)]
pub struct BaselineCost {
    /// Cost item id.
    pub id: i64,
    /// Label.
    pub label: String,
    /// One-off amount, or yearly amount of a recurring item.
    pub amount: Decimal,
    /// Recurring (amount per year) rather than one-off.
    pub recurring: bool,
}

/// How far a booking may lie outside its item's expectation before it needs an explicit
/// confirmation: [`PLAUSIBLE_FACTOR`] times the driver's monthly high quantity (`qty_high /
/// 12`), or times the cost item's amount (one-off) or monthly amount (recurring: yearly / 12).
/// A rule of thumb of our own (no published source): wide enough for a good month, narrow
/// enough to catch a mistyped order of magnitude.
pub struct Plausibility;

/// The factor of [`Plausibility`].
pub const PLAUSIBLE_FACTOR: u32 = 10;

/// The start of every plausibility refusal (so a page can offer the confirmation).
const IMPLAUSIBLE: &str = "implausible:";

impl Plausibility {
    /// The refusal message when `value` (a quantity or an amount, taken as its magnitude)
    /// exceeds `factor x base / per` (`per` = 12 for monthly, 1 otherwise), else `None`.
    fn check(value: Decimal, base: Decimal, per: u32, what: &str, unit: &str) -> Option<String> {
        let factor = Decimal::from(PLAUSIBLE_FACTOR);
        // Compared multiplied out, so no rounding of base / 12 decides.
        if value.abs() * Decimal::from(per) <= factor * base {
            return None;
        }
        // Written as the page writing the refusal writes numbers.
        let write = |d: Decimal| NumberFormat::current().write(d, 2);
        let limit = write(factor * base / Decimal::from(per));
        let base_text = if per == 1 { write(base) } else { format!("{} / {per}", write(base)) };
        let unit = if unit.is_empty() { String::new() } else { format!(" {unit}") };
        Some(format!(
            "{IMPLAUSIBLE} {}{unit} is more than {PLAUSIBLE_FACTOR} times {what} ({PLAUSIBLE_FACTOR} × {base_text} = \
             {limit}{unit}); if it is right, tick \"confirm this implausible figure\" and book again (API: \
             \"confirm_implausible\": true; CSV: a confirm_implausible column with yes)",
            write(value.abs())
        ))
    }

    /// Whether `errors` hold a plausibility refusal (the form then shows the confirmation).
    pub fn refused(errors: &FieldErrors) -> bool {
        errors.0.iter().any(|e| e.message.starts_with(IMPLAUSIBLE))
    }
}

/// A booking checked against the baseline, with its amount: ready to store.
#[derive(Debug, Clone)]
pub struct NewEntry {
    /// The baseline case version.
    pub case_id: i64,
    /// The driver (saving) or cost item (spending).
    pub item: LedgerItem,
    /// Month booked.
    pub period: Month,
    /// How it was measured.
    pub method: Method,
    /// Avoided quantity (savings).
    pub quantity: Option<Decimal>,
    /// Unit value frozen at booking (savings).
    pub unit_value: Option<Decimal>,
    /// Signed money flow.
    pub amount: Decimal,
    /// Inputs adjusted to the period's volume: baseline intensity, reporting volume, measured
    /// consumption.
    pub inputs: [Option<Decimal>; 3],
    /// Evidence note.
    pub evidence: String,
    /// Spending: the payment date.
    pub paid_on: Option<time::Date>,
    /// Beyond the plausibility threshold and confirmed by its author.
    pub implausible_confirmed: bool,
}

impl BookingBaseline {
    /// Ids of the drivers (`saving`) or cost items with this exact label, in id order.
    pub fn items_labelled(&self, saving: bool, label: &str) -> Vec<i64> {
        if saving {
            self.drivers.iter().filter(|d| d.label == label).map(|d| d.id).collect()
        } else {
            self.costs.iter().filter(|c| c.label == label).map(|c| c.id).collect()
        }
    }

    /// Check a booking: its item must belong to the baseline, its month must lie inside the
    /// horizon and not after the month of `today` (nor its payment date after `today`), and
    /// it must be plausible ([`Plausibility`]) unless confirmed. Savings are valued at the
    /// driver's unit value.
    pub fn check(&self, b: &Booking, today: time::Date) -> Result<NewEntry, FieldErrors> {
        let current_month = Month::of(today);
        let mut e = FieldErrors::default();
        if let Some(paid) = b.paid_on.filter(|d| *d > today) {
            e.push("paid_on", format!("{paid} is in the future; the latest payment date is {today}"));
        }
        let last = self.start.plus(self.horizon.saturating_sub(1));
        if b.period < self.start || b.period > last {
            e.push("period", format!("a month of the baseline's horizon: {} to {last}", self.start));
        } else if b.period > current_month {
            e.push(
                "period",
                format!("{} is in the future; the latest month that can be booked is {current_month}", b.period),
            );
        }
        let driver = b.item.driver().and_then(|id| self.drivers.iter().find(|d| d.id == id.0));
        let cost = b.item.cost().and_then(|id| self.costs.iter().find(|c| c.id == id.0));
        let unit_value = match b.item {
            LedgerItem::Driver(id) => {
                if driver.is_none() {
                    e.push("item", format!("driver {id} is not a benefit driver of the zone's baseline"));
                }
                driver.map(|d| d.unit_value)
            }
            LedgerItem::Cost(id) => {
                if cost.is_none() {
                    e.push("item", format!("cost item {id} is not a cost item of the zone's baseline"));
                }
                None
            }
        };
        if !e.is_empty() {
            return Err(e);
        }
        let value = unit_value.unwrap_or_default();
        // Checked: intensity and volume may each be 1e12, and Decimal panics on overflow.
        let priced = |field: &'static str, q: Decimal| {
            q.checked_mul(value).ok_or_else(|| {
                FieldErrors::one(field, "the amount (quantity × the driver's unit value) is too large to book")
            })
        };
        let (quantity, amount, inputs) = match &b.measurement {
            Measurement::Direct { quantity } => (Some(*quantity), priced("quantity", *quantity)?, [None, None, None]),
            Measurement::VolumeAdjusted { baseline_intensity, reporting_volume, measured_consumption } => {
                let too_large = || {
                    let f = NumberFormat::current();
                    FieldErrors::one(
                        "reporting_volume",
                        format!(
                            "the avoided quantity (baseline intensity × volume − consumption) must be at most {} in \
                             size",
                            f.write(MAX_MAGNITUDE, 0)
                        ),
                    )
                };
                let q = crate::finance::volume_adjusted_avoided(
                    *baseline_intensity,
                    *reporting_volume,
                    *measured_consumption,
                )
                .map_err(|_| too_large())?;
                if q.abs() > MAX_MAGNITUDE {
                    return Err(too_large());
                }
                let inputs = [Some(*baseline_intensity), Some(*reporting_volume), Some(*measured_consumption)];
                (Some(q), priced("reporting_volume", q)?, inputs)
            }
            Measurement::Spend { amount } => (None, -*amount, [None, None, None]),
        };
        let refusal = match (&b.measurement, driver, cost) {
            (Measurement::Direct { quantity }, Some(d), _) => {
                Plausibility::check(*quantity, d.qty_high, 12, "the driver's monthly high quantity", &d.unit)
                    .map(|m| ("quantity", m))
            }
            (Measurement::VolumeAdjusted { .. }, Some(d), _) => Plausibility::check(
                quantity.unwrap_or_default(),
                d.qty_high,
                12,
                "the driver's monthly high quantity (the avoided quantity, intensity × volume − consumption)",
                &d.unit,
            )
            .map(|m| ("measured_consumption", m)),
            (Measurement::Spend { amount }, _, Some(c)) => {
                let (per, what) = if c.recurring {
                    (12, "the cost item's monthly amount (yearly amount / 12)")
                } else {
                    (1, "the cost item's amount")
                };
                Plausibility::check(*amount, c.amount, per, what, "").map(|m| ("amount", m))
            }
            _ => None,
        };
        if let Some((field, message)) = &refusal
            && !b.confirm_implausible
        {
            return Err(FieldErrors::one(*field, message.clone()));
        }
        Ok(NewEntry {
            case_id: self.case_id,
            item: b.item,
            period: b.period,
            method: b.measurement.method(),
            quantity,
            unit_value,
            amount,
            inputs,
            evidence: b.evidence.clone(),
            paid_on: b.paid_on,
            implausible_confirmed: refusal.is_some(),
        })
    }
}

/// Longest `Idempotency-Key` accepted.
pub const IDEMPOTENCY_KEY_MAX: usize = 100;

/// Validate an `Idempotency-Key` header value: 1 to [`IDEMPOTENCY_KEY_MAX`] printable ASCII
/// characters (space to `~`), used exactly as sent.
pub fn idempotency_key(raw: &[u8]) -> Result<&str, String> {
    let rule = format!("1 to {IDEMPOTENCY_KEY_MAX} printable ASCII characters (letters, digits, punctuation, space)");
    if raw.is_empty() || raw.len() > IDEMPOTENCY_KEY_MAX || !raw.iter().all(|b| (0x20..=0x7e).contains(b)) {
        return Err(rule);
    }
    std::str::from_utf8(raw).map_err(|_| rule)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_item_is_a_driver_or_a_cost_item_never_both() {
        assert_eq!(LedgerItem::from_columns(Some(3), None), Some(LedgerItem::Driver(DriverId(3))));
        assert_eq!(LedgerItem::from_columns(None, Some(4)), Some(LedgerItem::Cost(CostItemId(4))));
        assert_eq!(LedgerItem::from_columns(Some(3), Some(4)), None);
        assert_eq!(LedgerItem::from_columns(None, None), None);
        assert_eq!(LedgerItem::new(EntryKind::Spending, 4).key(), "cost:4");
        assert_eq!(LedgerItem::new(EntryKind::Saving, 3).kind(), EntryKind::Saving);
    }

    #[test]
    fn the_api_keeps_kind_and_both_id_fields() -> Result<(), serde_json::Error> {
        let json = serde_json::to_value(LedgerItem::Cost(CostItemId(4)))?;
        assert_eq!(json, serde_json::json!({"kind": "spending", "driver_id": null, "cost_id": 4}));
        Ok(())
    }
}
