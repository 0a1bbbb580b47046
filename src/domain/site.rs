//! Site settings: currency, hurdle rate, tax view and defaults.

use super::de::string_or_number;
use super::{FieldErrors, NumberFormat, PlantZone, read_count, required_text};
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};

/// The plant's settings, one row per database.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteSettings {
    /// Display name of the (fictional) plant.
    pub plant_name: String,
    /// ISO 4217 currency code, shown once per table.
    pub currency: String,
    /// Annual hurdle rate as a fraction (0.1 = 10 %).
    pub hurdle_rate: Decimal,
    /// Tax rate as a fraction; `None` shows only the pre-tax view.
    pub tax_rate: Option<Decimal>,
    /// Straight-line depreciation years for capex in the after-tax view.
    pub depreciation_years: Option<u32>,
    /// Horizon proposed for a new case.
    pub default_horizon_months: u32,
    /// Multiplier from hours spent with the analytics to expert hours freed (a rule of thumb of
    /// the trade, an upper bound): the default of an expert-time driver's `hours_multiplier`.
    pub expert_multiplier: Decimal,
    /// How forms, CSV and scenario files write numbers, and how pages and exports show them.
    pub number_format: NumberFormat,
    /// Whether one person may submit and approve a version (a small plant); off by default.
    pub one_person_approval: bool,
    /// The plant's time zone (IANA name): pages show timestamps in its local time.
    #[serde(serialize_with = "zone_name")]
    pub time_zone: PlantZone,
    /// Introductions at a time: at most this many zones inside their introduction window in
    /// any month (the roadmap's capacity).
    pub introduction_capacity: u32,
}

/// Introductions at a time when the site has not set it.
pub const DEFAULT_INTRODUCTION_CAPACITY: u32 = 2;

/// The most introductions at a time a site may set (every month of a plan is one capacity
/// row for the solver; a plant absorbing more than this at once is not the case we model).
pub const MAX_INTRODUCTION_CAPACITY: u32 = 20;

fn zone_name<S: serde::Serializer>(zone: &PlantZone, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(zone.as_str())
}

/// Raw settings as a scenario file gives them (rates as fractions).
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct SiteSettingsInput {
    /// Plant name.
    pub plant_name: String,
    /// Currency code.
    pub currency: String,
    /// Annual hurdle rate, fraction.
    #[serde(deserialize_with = "string_or_number")]
    pub hurdle_rate: String,
    /// Tax rate, fraction; empty for none.
    #[serde(deserialize_with = "string_or_number")]
    pub tax_rate: String,
    /// Depreciation years; empty for none.
    #[serde(deserialize_with = "string_or_number")]
    pub depreciation_years: String,
    /// Default horizon in months; empty for 60.
    #[serde(deserialize_with = "string_or_number")]
    pub default_horizon_months: String,
    /// Expert-time multiplier; empty for 3.
    #[serde(deserialize_with = "string_or_number")]
    pub expert_multiplier: String,
    /// `decimal_point` or `decimal_comma`; empty for decimal_point.
    pub number_format: String,
    /// One-person approval allowed; absent for no.
    #[serde(deserialize_with = "super::de::flexible_bool")]
    pub one_person_approval: bool,
    /// IANA time zone name; empty for UTC.
    pub time_zone: String,
    /// Introductions at a time, 1 to 20; empty for 2.
    #[serde(deserialize_with = "string_or_number")]
    pub introduction_capacity: String,
}

impl SiteSettings {
    /// The expert-time multiplier of a site that names none (common practice: a rule of thumb
    /// of the trade, an upper bound, no published source).
    pub const DEFAULT_EXPERT_MULTIPLIER: Decimal = Decimal::from_parts(3, 0, 0, false, 0);

    /// Validate every field, reading numbers in `numbers` (a scenario file's are in the format
    /// it declares, the settings form's in the format the page showed).
    pub fn parse(input: &SiteSettingsInput, numbers: NumberFormat) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let number_format = if input.number_format.trim().is_empty() {
            Some(NumberFormat::default())
        } else {
            e.take("number_format", NumberFormat::parse(&input.number_format))
        };
        let time_zone = if input.time_zone.trim().is_empty() {
            Some(PlantZone::default())
        } else {
            e.take("time_zone", PlantZone::parse(&input.time_zone))
        };
        let f = numbers;
        let plant_name = e.take("plant_name", required_text(&input.plant_name, 120));
        let currency = e.take("currency", parse_currency(&input.currency));
        let hurdle_rate = e.take("hurdle_rate", parse_rate(&input.hurdle_rate, f));
        let tax_rate = if input.tax_rate.trim().is_empty() {
            Some(None)
        } else {
            e.take("tax_rate", f.read(&input.tax_rate).and_then(fraction_0_1).map(Some))
        };
        let depreciation_years = if input.depreciation_years.trim().is_empty() {
            Some(None)
        } else {
            e.take("depreciation_years", read_count(&input.depreciation_years, 1, 50).map(Some))
        };
        let default_horizon_months = if input.default_horizon_months.trim().is_empty() {
            Some(60)
        } else {
            e.take("default_horizon_months", read_count(&input.default_horizon_months, 1, 240))
        };
        let expert_multiplier = if input.expert_multiplier.trim().is_empty() {
            Some(Self::DEFAULT_EXPERT_MULTIPLIER)
        } else {
            e.take("expert_multiplier", super::parse_expert_multiplier(&input.expert_multiplier, f))
        };
        let introduction_capacity = if input.introduction_capacity.trim().is_empty() {
            Some(DEFAULT_INTRODUCTION_CAPACITY)
        } else {
            e.take("introduction_capacity", read_count(&input.introduction_capacity, 1, MAX_INTRODUCTION_CAPACITY))
        };
        match (
            plant_name,
            currency,
            hurdle_rate,
            tax_rate,
            depreciation_years,
            default_horizon_months,
            expert_multiplier,
            number_format,
            time_zone,
            introduction_capacity,
        ) {
            (
                Some(plant_name),
                Some(currency),
                Some(hurdle_rate),
                Some(tax_rate),
                Some(depreciation_years),
                Some(default_horizon_months),
                Some(expert_multiplier),
                Some(number_format),
                Some(time_zone),
                Some(introduction_capacity),
            ) if e.is_empty() => Ok(Self {
                plant_name,
                currency,
                hurdle_rate,
                tax_rate,
                depreciation_years,
                default_horizon_months,
                expert_multiplier,
                number_format,
                one_person_approval: input.one_person_approval,
                time_zone,
                introduction_capacity,
            }),
            _ => Err(e),
        }
    }

    /// The raw input these settings parse back from (rates as fractions): the base a partial
    /// change is laid over.
    pub fn input(&self) -> SiteSettingsInput {
        SiteSettingsInput {
            plant_name: self.plant_name.clone(),
            currency: self.currency.clone(),
            hurdle_rate: self.hurdle_rate.to_string(),
            tax_rate: self.tax_rate.map(|t| t.to_string()).unwrap_or_default(),
            depreciation_years: self.depreciation_text(),
            default_horizon_months: self.default_horizon_months.to_string(),
            expert_multiplier: self.expert_multiplier.to_string(),
            number_format: self.number_format.as_str().to_string(),
            one_person_approval: self.one_person_approval,
            time_zone: self.time_zone.as_str().to_string(),
            introduction_capacity: self.introduction_capacity.to_string(),
        }
    }

    /// The hurdle rate as a percentage for the settings form.
    pub fn hurdle_pct(&self) -> String {
        self.number_format.write_quantity(self.hurdle_rate * Decimal::ONE_HUNDRED)
    }

    /// The tax rate as a percentage for the settings form; empty when unset.
    pub fn tax_pct(&self) -> String {
        self.tax_rate.map(|t| self.number_format.write_quantity(t * Decimal::ONE_HUNDRED)).unwrap_or_default()
    }

    /// The expert-time multiplier for the settings form.
    pub fn expert_text(&self) -> String {
        self.number_format.write_quantity(self.expert_multiplier)
    }

    /// Depreciation years for the settings form; empty when unset.
    pub fn depreciation_text(&self) -> String {
        self.depreciation_years.map(|y| y.to_string()).unwrap_or_default()
    }

    /// The annual hurdle rate as the finance engine takes it.
    pub fn hurdle_f64(&self) -> f64 {
        use rust_decimal::prelude::ToPrimitive;
        self.hurdle_rate.to_f64().unwrap_or(0.0)
    }
}

fn parse_currency(value: &str) -> Result<String, String> {
    let c = value.trim().to_uppercase();
    if c.len() == 3 && c.chars().all(|ch| ch.is_ascii_uppercase()) {
        Ok(c)
    } else {
        Err("a three-letter ISO 4217 code such as EUR".into())
    }
}

/// A rate fraction greater than -1 (so that 1 + r stays positive).
fn parse_rate(value: &str, format: NumberFormat) -> Result<Decimal, String> {
    let r = format.read(value)?;
    if r > Decimal::NEGATIVE_ONE { Ok(r) } else { Err("a fraction greater than -1, e.g. 0.08 for 8 %".into()) }
}

fn fraction_0_1(d: Decimal) -> Result<Decimal, String> {
    if (Decimal::ZERO..=Decimal::ONE).contains(&d) { Ok(d) } else { Err("a fraction from 0 to 1, e.g. 0.25".into()) }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn with_capacity(k: &str) -> SiteSettingsInput {
        SiteSettingsInput {
            plant_name: "Test works".into(),
            currency: "EUR".into(),
            hurdle_rate: "0.09".into(),
            introduction_capacity: k.into(),
            ..Default::default()
        }
    }

    #[test]
    fn introductions_at_a_time_are_1_to_20_and_2_when_empty() {
        let read =
            |k: &str| SiteSettings::parse(&with_capacity(k), NumberFormat::Plain).map(|s| s.introduction_capacity);
        assert_eq!(read(""), Ok(2));
        assert_eq!(read("1"), Ok(1));
        assert_eq!(read("20"), Ok(20));
        let refused = |k: &str| read(k).err().unwrap_or_default().get("introduction_capacity").map(str::to_string);
        assert_eq!(refused("0"), Some("\"0\" is outside 1 to 20: enter a whole number from 1 to 20".into()));
        assert_eq!(refused("21"), Some("\"21\" is outside 1 to 20: enter a whole number from 1 to 20".into()));
        // The input written back parses to the same settings.
        let site = SiteSettings::parse(&with_capacity("7"), NumberFormat::Plain);
        let again = site.as_ref().map(|s| SiteSettings::parse(&s.input(), NumberFormat::Plain));
        assert_eq!(again.ok().and_then(Result::ok), site.ok());
    }
}
