//! The plant's time zone and the one way pages show a stored timestamp.
//!
//! Timestamps are stored as RFC 3339 UTC text with nanoseconds
//! (`2026-12-02T13:56:45.932483589Z`); pages show them as the plant's local date and time to
//! the minute (`2026-12-02 14:56` in `Europe/Berlin`) with the exact stored value in a title
//! attribute (`macros.html`'s `stamp`), and exports (CSV, API) keep the stored value. The time
//! zone rules come from the IANA time zone database bundled in `jiff` (no system tzdata is
//! read), so daylight saving time changes are the database's, not ours.
//!
//! Like the number format, the zone is a task-local set once per page request
//! (`web::site_numbers`): templates call [`LocalTime::of`], which reads
//! [`PlantZone::current`].

use jiff::Timestamp;
use jiff::tz::TimeZone;
use std::fmt;

tokio::task_local! {
    static CURRENT: PlantZone;
}

/// The plant's time zone: a validated IANA name (`Europe/Berlin`) and its rules.
#[derive(Clone, Debug)]
pub struct PlantZone {
    name: String,
    zone: TimeZone,
}

impl PartialEq for PlantZone {
    fn eq(&self, other: &Self) -> bool {
        self.name == other.name
    }
}

impl Default for PlantZone {
    /// `UTC`, the setting of a database from before time zones.
    fn default() -> Self {
        Self { name: "UTC".into(), zone: TimeZone::UTC }
    }
}

impl fmt::Display for PlantZone {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.name)
    }
}

impl PlantZone {
    /// Read an IANA time zone name (`Europe/Berlin`, `UTC`); surrounding spaces are ignored,
    /// and the name is kept as the database spells it. Fixed offsets (`+01:00`) and POSIX rules
    /// are refused: a plant's clock follows its region's rules, daylight saving included.
    pub fn parse(text: &str) -> Result<Self, String> {
        let refusal =
            || format!("\"{}\" is not a time zone name of the IANA database, e.g. Europe/Berlin or UTC", text.trim());
        let name = text.trim();
        if name.is_empty() || name.len() > 64 || !name.chars().all(|c| c.is_ascii_alphanumeric() || "/_-+".contains(c))
        {
            return Err(refusal());
        }
        let zone = TimeZone::get(name).map_err(|_| refusal())?;
        let spelled = zone.iana_name().map(str::to_string).ok_or_else(refusal)?;
        Ok(Self { name: spelled, zone })
    }

    /// The IANA name, as stored and as the API and scenario files write it.
    pub fn as_str(&self) -> &str {
        &self.name
    }

    /// The zone of the page request being answered; `UTC` outside one.
    pub fn current() -> Self {
        CURRENT.try_with(Clone::clone).unwrap_or_default()
    }

    /// Run `work` with this as the [`current`](Self::current) zone.
    pub async fn scope<F: Future>(self, work: F) -> F::Output {
        CURRENT.scope(self, work).await
    }

    /// Run the blocking `work` with this as the [`current`](Self::current) zone.
    pub fn sync_scope<T>(self, work: impl FnOnce() -> T) -> T {
        CURRENT.sync_scope(self, work)
    }

    /// A stored RFC 3339 timestamp as the plant's local date and time to the minute
    /// (`2026-12-02 14:56`); `None` when the text is not a timestamp.
    pub fn local_minute(&self, stamp: &str) -> Option<String> {
        let at: Timestamp = stamp.trim().parse().ok()?;
        Some(self.zone.to_datetime(at).strftime("%Y-%m-%d %H:%M").to_string())
    }
}

/// A stored timestamp as a page shows it; every template goes through this (the `stamp` macro
/// of `templates/macros.html`), and the decision packs may call it directly.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LocalTime {
    /// The stored value, exactly (the title attribute; exports write this).
    pub exact: String,
    /// The plant's local date and time to the minute; the stored text when it is not a
    /// timestamp (never hidden).
    pub local: String,
    /// A valid HTML `datetime` value: UTC to the second (`2026-12-02T13:56:45Z`); empty when
    /// the stored text is not a timestamp.
    pub machine: String,
}

impl LocalTime {
    /// `stamp` in the zone of the request being answered ([`PlantZone::current`]).
    pub fn of(stamp: impl AsRef<str>) -> Self {
        Self::in_zone(stamp.as_ref(), &PlantZone::current())
    }

    /// `stamp` in `zone`.
    pub fn in_zone(stamp: &str, zone: &PlantZone) -> Self {
        let machine =
            stamp.trim().parse::<Timestamp>().map(|t| t.strftime("%Y-%m-%dT%H:%M:%SZ").to_string()).unwrap_or_default();
        Self { exact: stamp.to_string(), local: zone.local_minute(stamp).unwrap_or_else(|| stamp.to_string()), machine }
    }
}

impl fmt::Display for LocalTime {
    /// The local date and time alone (plain text: sentences, CSV-free places).
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.local)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    type R = Result<(), String>;

    fn berlin() -> Result<PlantZone, String> {
        PlantZone::parse("Europe/Berlin")
    }

    #[test]
    fn the_issue_example_in_winter() -> R {
        // Berlin is UTC+1 in December (tz database, Europe/Berlin: CET).
        let t = LocalTime::in_zone("2026-12-02T13:56:45.932483589Z", &berlin()?);
        assert_eq!(t.local, "2026-12-02 14:56");
        assert_eq!(t.exact, "2026-12-02T13:56:45.932483589Z");
        assert_eq!(t.machine, "2026-12-02T13:56:45Z");
        Ok(())
    }

    #[test]
    fn both_sides_of_the_march_change() -> R {
        // tz database, EU rule: clocks go from 02:00 CET to 03:00 CEST at 01:00 UTC on the last
        // Sunday of March (2026-03-29).
        let z = berlin()?;
        assert_eq!(z.local_minute("2026-03-29T00:59:00Z").as_deref(), Some("2026-03-29 01:59"));
        assert_eq!(z.local_minute("2026-03-29T01:00:00Z").as_deref(), Some("2026-03-29 03:00"));
        Ok(())
    }

    #[test]
    fn both_sides_of_the_october_change() -> R {
        // tz database, EU rule: clocks go back from 03:00 CEST to 02:00 CET at 01:00 UTC on the
        // last Sunday of October (2026-10-25): 02:30 local happens twice.
        let z = berlin()?;
        assert_eq!(z.local_minute("2026-10-25T00:30:00Z").as_deref(), Some("2026-10-25 02:30"));
        assert_eq!(z.local_minute("2026-10-25T01:30:00Z").as_deref(), Some("2026-10-25 02:30"));
        assert_eq!(z.local_minute("2026-10-25T02:30:00Z").as_deref(), Some("2026-10-25 03:30"));
        Ok(())
    }

    #[test]
    fn utc_is_the_default_and_shows_the_stored_minute() -> R {
        let t = LocalTime::of("2026-12-02T13:56:45.932483589Z");
        assert_eq!(t.local, "2026-12-02 13:56");
        assert_eq!(PlantZone::default().as_str(), "UTC");
        Ok(())
    }

    #[test]
    fn an_unreadable_stamp_is_shown_as_stored() {
        let t = LocalTime::in_zone("2026-12-02", &PlantZone::default());
        assert_eq!((t.local.as_str(), t.machine.as_str()), ("2026-12-02", ""));
    }

    #[test]
    fn names_are_checked_against_the_database() -> R {
        assert_eq!(PlantZone::parse(" America/New_York ")?.as_str(), "America/New_York");
        assert_eq!(PlantZone::parse("UTC")?.as_str(), "UTC");
        for bad in ["Europe/Atlantis", "", "+01:00", "CET-1CEST,M3.5.0,M10.5.0/3", "../etc/passwd"] {
            assert_eq!(
                PlantZone::parse(bad),
                Err(format!(
                    "\"{}\" is not a time zone name of the IANA database, e.g. Europe/Berlin or UTC",
                    bad.trim()
                ))
            );
        }
        Ok(())
    }

    #[tokio::test]
    async fn pages_see_the_request_zone() -> R {
        let z = berlin()?;
        let seen = z.scope(async { LocalTime::of("2026-07-01T10:00:00Z").local }).await;
        // Berlin is UTC+2 in July (CEST).
        assert_eq!(seen, "2026-07-01 12:00");
        Ok(())
    }
}
