//! The scenario file: a JSON document of site settings, zones and their case versions. The
//! demo plant in `seed/` is one; `pilot-ledger load FILE` reads any other. The format is
//! documented in DEVELOPERS.md ("Scenario files").

use super::{
    Booking, BookingInput, CaseSpec, CaseSpecInput, EntryKind, FieldErrors, NewZone, NumberFormat, RateStyle,
    SCORE_RANGE, SiteSettings, SiteSettingsInput, Zone, ZoneInput,
};
use rust_decimal::Decimal;
use serde::Deserialize;
use std::collections::BTreeMap;

/// The `format` value every scenario file carries.
pub const SCENARIO_FORMAT: &str = "pilot-ledger-scenario";
/// The format version this build reads.
pub const SCENARIO_VERSION: u32 = 1;

#[derive(Debug, Deserialize)]
struct ScenarioFile {
    format: String,
    version: u32,
    site: Option<SiteSettingsInput>,
    #[serde(default)]
    zones: Vec<ZoneFile>,
}

#[derive(Debug, Deserialize)]
struct ZoneFile {
    #[serde(flatten)]
    zone: ZoneInput,
    #[serde(default)]
    cases: Vec<CaseSpecInput>,
    /// Readiness scores by criterion key.
    #[serde(default)]
    readiness: BTreeMap<String, u8>,
    /// Bookings against the zone's approved case, by item label.
    #[serde(default)]
    ledger: Vec<LedgerFileEntry>,
}

#[derive(Debug, Deserialize)]
struct LedgerFileEntry {
    /// Label of the baseline driver (savings).
    #[serde(default)]
    driver: String,
    /// Label of the baseline cost item (spending).
    #[serde(default)]
    cost: String,
    #[serde(flatten)]
    booking: BookingInput,
}

/// A booking of a scenario file: the baseline item is named by its label, resolved on load.
#[derive(Debug, Clone)]
pub struct ScenarioEntry {
    /// The driver's or cost item's label in the zone's approved case.
    pub item_label: String,
    /// The booking; its `item_id` is set when the label is resolved.
    pub booking: Booking,
}

/// A whole validated scenario: nothing in it is stored unless all of it is valid.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// Site settings; `None` keeps the database's.
    pub site: Option<SiteSettings>,
    /// Zones with their case versions, in file order (version numbers follow that order).
    pub zones: Vec<ZoneScenario>,
}

/// One zone of a scenario.
#[derive(Debug, Clone)]
pub struct ZoneScenario {
    /// The zone.
    pub zone: NewZone,
    /// Its case versions, oldest first.
    pub cases: Vec<CaseSpec>,
    /// Readiness scores (criterion key, 1 to 5), checked against the criteria on load.
    pub readiness: Vec<(String, u8)>,
    /// Ledger bookings, in file order.
    pub ledger: Vec<ScenarioEntry>,
}

impl Scenario {
    /// Parse and validate a scenario document. Errors name the JSON path of each bad field
    /// (`zones[2].cases[0].costs[1].amount`), or the line and column of a syntax error.
    /// Numbers given as strings are read in the format the file's `site.number_format` declares
    /// (`stored`, the database's, when the file has no `site`); JSON numbers are plain.
    pub fn parse(text: &str, stored: NumberFormat) -> Result<Self, FieldErrors> {
        Self::parse_with(text, stored, SiteSettings::DEFAULT_EXPERT_MULTIPLIER)
    }

    /// [`parse`](Self::parse) on a database whose expert-time multiplier is
    /// `stored_multiplier`: an expert-time driver without a multiplier takes the file's
    /// `site.expert_multiplier`, else this one.
    pub fn parse_with(text: &str, stored: NumberFormat, stored_multiplier: Decimal) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let at = |err: serde_json::Error| {
            let mut e = FieldErrors::default();
            e.push(format!("line {} column {}", err.line(), err.column()), err.to_string());
            e
        };
        let mut value: serde_json::Value = serde_json::from_str(text).map_err(at)?;
        // A `site` without `number_format` keeps the stored format, for reading the file's
        // strings and for saving (on an empty database `stored` is the decimal point).
        let numbers = match value.pointer_mut("/site") {
            None | Some(serde_json::Value::Null) => stored,
            Some(site) => match site.get("number_format") {
                Some(serde_json::Value::String(f)) if !f.trim().is_empty() => {
                    NumberFormat::parse(f).unwrap_or_default()
                }
                Some(serde_json::Value::String(_) | serde_json::Value::Null) | None => {
                    if let Some(site) = site.as_object_mut() {
                        site.insert("number_format".into(), stored.as_str().into());
                    }
                    stored
                }
                // Not a string: refused by name when the settings are read.
                Some(_) => NumberFormat::default(),
            },
        };
        written_in(&mut value, numbers);
        let file: ScenarioFile = serde_json::from_value(value).map_err(at)?;
        if file.format != SCENARIO_FORMAT {
            e.push("format", format!("must be {SCENARIO_FORMAT:?}"));
        }
        if file.version != SCENARIO_VERSION {
            e.push("version", format!("this build reads version {SCENARIO_VERSION}"));
        }
        let site = match &file.site {
            None => None,
            Some(s) => SiteSettings::parse(s, numbers).map_err(|err| e.extend_prefixed("site.", err)).ok(),
        };
        let mut zones = Vec::with_capacity(file.zones.len());
        let mut codes = std::collections::HashSet::new();
        for (i, z) in file.zones.iter().enumerate() {
            let zone = NewZone::parse(&z.zone).map_err(|err| e.extend_prefixed(&format!("zones[{i}]."), err)).ok();
            if let Some(zone) = &zone
                && !codes.insert(zone.code.clone())
            {
                e.push(format!("zones[{i}].code"), format!("{} appears twice in the file", zone.code));
            }
            let mut cases = Vec::with_capacity(z.cases.len());
            for (j, c) in z.cases.iter().enumerate() {
                let multiplier = site.as_ref().map_or(stored_multiplier, |s| s.expert_multiplier);
                match CaseSpec::parse(c, RateStyle::Fraction(numbers), multiplier) {
                    Ok(c) => cases.push(c),
                    Err(err) => e.extend_prefixed(&format!("zones[{i}].cases[{j}]."), err),
                }
            }
            for (key, score) in &z.readiness {
                if !SCORE_RANGE.contains(score) {
                    e.push(format!("zones[{i}].readiness.{key}"), "a score from 1 to 5");
                }
            }
            let mut ledger = Vec::with_capacity(z.ledger.len());
            for (j, entry) in z.ledger.iter().enumerate() {
                let prefix = format!("zones[{i}].ledger[{j}].");
                // The id is not known until the case is stored; the label stands in for it.
                let mut input = entry.booking.clone();
                input.item = "0".into();
                match Booking::parse(&input, numbers) {
                    Ok(booking) => {
                        let (label, field) = match booking.item.kind() {
                            EntryKind::Saving => (&entry.driver, "driver"),
                            EntryKind::Spending => (&entry.cost, "cost"),
                        };
                        if label.trim().is_empty() {
                            e.push(format!("{prefix}{field}"), "the label of the baseline's item");
                        }
                        ledger.push(ScenarioEntry { item_label: label.trim().to_string(), booking });
                    }
                    Err(err) => e.extend_prefixed(&prefix, err),
                }
            }
            if let Some(zone) = zone {
                let readiness = z.readiness.iter().map(|(k, s)| (k.clone(), *s)).collect();
                zones.push(ZoneScenario { zone, cases, readiness, ledger });
            }
        }
        e.into_result(|| Self { site, zones })
    }
}

/// The site settings and every zone (its fields, area and needs) as a scenario document that
/// [`Scenario::parse`] reads back to the same settings and zones. Cases, readiness scores and
/// ledgers are not written: this is the plant's layout, not its history. Decimal strings are
/// written in the site's number format, the format the document declares.
pub fn layout_document(site: &SiteSettings, zones: &[Zone]) -> serde_json::Value {
    let mut input = site.input();
    let f = site.number_format;
    for text in [&mut input.hurdle_rate, &mut input.tax_rate, &mut input.expert_multiplier] {
        *text = f.export(text);
    }
    let zones: Vec<ZoneInput> = zones.iter().map(Zone::input).collect();
    serde_json::json!({ "format": SCENARIO_FORMAT, "version": SCENARIO_VERSION, "site": input, "zones": zones })
}

/// Turn the file's JSON numbers with decimals into text in `numbers`, so that one reader reads
/// both (whole numbers read the same in every format and stay numbers for the count fields).
fn written_in(value: &mut serde_json::Value, numbers: NumberFormat) {
    use serde_json::Value;
    match value {
        Value::Number(n) if !n.is_i64() && !n.is_u64() => {
            if let Some(f) = n.as_f64() {
                // Rust writes the shortest round-trip text, never an exponent.
                *value = Value::String(numbers.export(&f.to_string()));
            }
        }
        Value::Array(items) => items.iter_mut().for_each(|v| written_in(v, numbers)),
        Value::Object(map) => map.values_mut().for_each(|v| written_in(v, numbers)),
        _ => {}
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_demo_plant_parses() {
        let scenario = Scenario::parse(include_str!("../../seed/demo-plant.json"), NumberFormat::default());
        let zones = scenario.map(|s| s.zones.len()).unwrap_or(0);
        assert!(zones >= 6, "demo plant has {zones} zones");
    }

    fn comma_site(hurdle: &str) -> String {
        format!(
            r#"{{"format": "pilot-ledger-scenario", "version": 1,
                "site": {{"plant_name": "Test works", "currency": "EUR", "hurdle_rate": "{hurdle}",
                          "number_format": "decimal_comma"}},
                "zones": [{{"code": "Z-1", "name": "Zone", "cases": [{{"label": "Base", "horizon_months": 36,
                    "start_month": "2025-01", "go_live_offset": 1, "ramp_up_months": 0, "success_probability": 0.85,
                    "costs": [{{"label": "Sensors", "category": "hardware", "kind": "one_off", "amount": "38.000,50"}}]}}]}}]}}"#
        )
    }

    #[test]
    fn a_decimal_comma_scenario_reads_its_strings_in_that_format() {
        use rust_decimal::dec;
        // The file's own format wins over the database's; JSON numbers stay plain.
        let s = Scenario::parse(&comma_site("0,09"), NumberFormat::DecimalPoint).map_err(|e| e.to_string());
        let s = s.as_ref().map(|s| {
            let site = s.site.as_ref().map(|x| (x.hurdle_rate, x.number_format));
            let case = &s.zones[0].cases[0];
            (site, case.header.success_probability, case.costs[0].amount)
        });
        assert_eq!(s, Ok((Some((dec!(0.09), NumberFormat::DecimalComma)), dec!(0.85), dec!(38000.5))));
        // The same file with a decimal point in a string is refused, naming the field.
        let err = Scenario::parse(&comma_site("0.09"), NumberFormat::DecimalPoint).err().unwrap_or_default();
        assert_eq!(
            err.0,
            vec![crate::domain::FieldError {
                field: "site.hurdle_rate".into(),
                message: "\"0.09\" is ambiguous here (groups of thousands have three digits): use 0,09".into()
            }]
        );
    }

    #[test]
    fn a_site_without_number_format_keeps_the_stored_one() {
        use rust_decimal::dec;
        let file = comma_site("0,09").replace(r#""number_format": "decimal_comma""#, r#""tax_rate": "0,25""#);
        let read = |stored| {
            Scenario::parse(&file, stored)
                .map(|s| s.site.map(|x| (x.hurdle_rate, x.tax_rate, x.number_format)))
                .map_err(|e| e.to_string())
        };
        // A decimal-comma database: the strings are read, and saved, in its format.
        assert_eq!(
            read(NumberFormat::DecimalComma),
            Ok(Some((dec!(0.09), Some(dec!(0.25)), NumberFormat::DecimalComma)))
        );
        // An empty (or decimal-point) database: the decimal point, and `0,09` is refused by name.
        let file = file.replace("0,09", "0.09").replace("0,25", "0.25").replace("38.000,50", "38000.50");
        let point = Scenario::parse(&file, NumberFormat::DecimalPoint).map(|s| s.site.map(|x| x.number_format));
        assert_eq!(point.map_err(|e| e.to_string()), Ok(Some(NumberFormat::DecimalPoint)));
        let err = Scenario::parse(&file, NumberFormat::DecimalComma).err().unwrap_or_default();
        assert_eq!(
            err.get("site.hurdle_rate"),
            Some("\"0.09\" is ambiguous here (groups of thousands have three digits): use 0,09")
        );
    }

    #[test]
    fn syntax_errors_give_line_and_column() {
        let err = Scenario::parse("{\n  \"format\": ,\n}", NumberFormat::default()).err().unwrap_or_default();
        assert!(err.0[0].field.starts_with("line 2 column"), "{err}");
    }
}
