//! The scenario file: a JSON document of site settings, zones and their case versions. The
//! demo plant in `seed/` is one; `pilot-ledger load FILE` reads any other. The format is
//! documented in DEVELOPERS.md ("Scenario files").

use super::{CaseSpec, CaseSpecInput, FieldErrors, NewZone, RateStyle, SiteSettings, SiteSettingsInput, ZoneInput};
use serde::Deserialize;

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
}

impl Scenario {
    /// Parse and validate a scenario document. Errors name the JSON path of each bad field
    /// (`zones[2].cases[0].costs[1].amount`), or the line and column of a syntax error.
    pub fn parse(text: &str) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let file: ScenarioFile = serde_json::from_str(text).map_err(|err| {
            let mut e = FieldErrors::default();
            e.push(format!("line {} column {}", err.line(), err.column()), err.to_string());
            e
        })?;
        if file.format != SCENARIO_FORMAT {
            e.push("format", format!("must be {SCENARIO_FORMAT:?}"));
        }
        if file.version != SCENARIO_VERSION {
            e.push("version", format!("this build reads version {SCENARIO_VERSION}"));
        }
        let site = match &file.site {
            None => None,
            Some(s) => SiteSettings::parse(s).map_err(|err| e.extend_prefixed("site.", err)).ok(),
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
                match CaseSpec::parse(c, RateStyle::Fraction) {
                    Ok(c) => cases.push(c),
                    Err(err) => e.extend_prefixed(&format!("zones[{i}].cases[{j}]."), err),
                }
            }
            if let Some(zone) = zone {
                zones.push(ZoneScenario { zone, cases });
            }
        }
        e.into_result(|| Self { site, zones })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_demo_plant_parses() {
        let scenario = Scenario::parse(include_str!("../../seed/demo-plant.json"));
        let zones = scenario.map(|s| s.zones.len()).unwrap_or(0);
        assert!(zones >= 6, "demo plant has {zones} zones");
    }

    #[test]
    fn syntax_errors_give_line_and_column() {
        let err = Scenario::parse("{\n  \"format\": ,\n}").err().unwrap_or_default();
        assert!(err.0[0].field.starts_with("line 2 column"), "{err}");
    }
}
