//! The audit trail in plain sentences: one sentence writer per action code.
//!
//! An audit row keeps what was written at the time (actor, action code, subject such as
//! `entry 12`, free detail); it is hash-chained and never changes. The page reads it as a
//! sentence ("controller booked 4,650 kWh on PRESS-2 for 2026-03: Idle hydraulic running"),
//! with facts about its subject read beside it ([`AuditFacts`]: the zone's code, the case's
//! version, the entry's quantity and unit). The raw code stays on the row (and in its title
//! attribute on the page). Every code written anywhere is in [`ACTIONS`]; a test covers each.

use super::{LocalTime, Money, NumberFormat, quantity};
use rust_decimal::Decimal;

/// Every action code the application writes, in the order the sentences below handle them.
pub const ACTIONS: [&str; 30] = [
    "sign_in",
    "sign_in_failed",
    "sign_out",
    "user.create",
    "user.update",
    "user.password",
    "token.create",
    "token.revoke",
    "settings.update",
    "readiness.weights",
    "zone.create",
    "zone.update",
    "zone.status",
    "zone.readiness",
    "case.create",
    "case.copy",
    "case.update",
    "case.submit",
    "case.approve",
    "case.reject",
    "cost.add",
    "cost.remove",
    "driver.add",
    "driver.remove",
    "ledger.book",
    "ledger.reverse",
    "ledger.import",
    "chain.seal",
    "pack.make",
    "roadmap.save",
];

/// What the trail knows about a row's subject, read with it (all optional: a subject that
/// names nothing, or an old row, still gets a sentence).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct AuditFacts {
    /// The code of the zone the subject belongs to (a zone, case, entry or import).
    pub zone: Option<String>,
    /// The version number of a case subject.
    pub version: Option<u32>,
    /// A ledger entry subject.
    pub entry: Option<EntryFacts>,
}

/// A ledger entry as its sentence names it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct EntryFacts {
    /// A saving (else spending).
    pub saving: bool,
    /// Booked month, `YYYY-MM`.
    pub period: String,
    /// Measured quantity of a saving.
    pub quantity: Option<Decimal>,
    /// The driver's unit of a saving.
    pub unit: Option<String>,
    /// Signed amount (spending is negative).
    pub amount: Decimal,
    /// The driver's or cost item's label.
    pub item: Option<String>,
}

/// One audit row as a sentence, numbers in the request's format, times in the plant's.
pub fn audit_sentence(actor: &str, action: &str, subject: &str, detail: &str, facts: &AuditFacts) -> String {
    let detail = detail.trim();
    let on = facts.zone.as_ref().map(|z| format!(" on {z}")).unwrap_or_default();
    let zone = facts.zone.clone().unwrap_or_else(|| subject.to_string());
    let case = match (facts.version, &facts.zone) {
        (Some(v), Some(z)) => format!("v{v} of {z}"),
        _ => subject.to_string(),
    };
    let colon = |text: &str| if text.is_empty() { String::new() } else { format!(": {text}") };
    match action {
        "sign_in" => format!("{actor} signed in"),
        "sign_in_failed" => {
            let name = subject.strip_prefix("account ").unwrap_or(subject);
            let from = detail.strip_prefix("address:").map(|a| format!(" from {a}")).unwrap_or_default();
            format!("a sign-in as {name} failed{from}")
        }
        "sign_out" => format!("{actor} signed out"),
        "user.create" => format!("{actor} added user {}", detail.replacen(" as ", " with the role ", 1)),
        "user.update" => format!("{actor} changed {}", words(detail)),
        "user.password" => format!("{actor} set a new password for {}", words(detail)),
        "token.create" => token_created(actor, subject, detail),
        "token.revoke" => {
            let why = detail.strip_prefix("of ").map(|d| format!(" of {}", words(d))).unwrap_or_default();
            format!("{actor} revoked {subject}{why}")
        }
        "settings.update" => format!("{actor} changed the site settings{}", colon(&settings_words(detail))),
        "readiness.weights" => format!("{actor} set the readiness weights{}", colon(&scores_words(detail))),
        "zone.create" => format!("{actor} added zone {}", if detail.is_empty() { &zone } else { detail }),
        "zone.update" => format!("{actor} changed the name or status of {zone}{}", colon(detail)),
        "zone.status" => match detail.split_once(" -> ") {
            Some((from, to)) => format!("{actor} moved {zone} from {from} to {to}"),
            None => format!("{actor} changed the status of {zone}{}", colon(detail)),
        },
        "zone.readiness" => format!("{actor} scored the readiness of {zone}{}", colon(&scores_words(detail))),
        "case.create" => format!("{actor} created {case}"),
        "case.copy" => format!("{actor} saved {case} as a copy{}", colon(&detail.replacen("from case", "of case", 1))),
        "case.update" => format!("{actor} changed the header of {case}{}", colon(detail)),
        "case.submit" => format!("{actor} submitted {case} for approval{}", colon(detail)),
        "case.approve" => format!("{actor} approved {case}{}", colon(&approval_words(detail))),
        "case.reject" => format!("{actor} returned {case} to draft{}", colon(detail)),
        "cost.add" => format!("{actor} added a cost item to {case}{}", colon(&item_words(detail))),
        "cost.remove" => format!("{actor} removed {} from {case}", detail_or(detail, "a cost item")),
        "driver.add" => format!("{actor} added a benefit driver to {case}{}", colon(&item_words(detail))),
        "driver.remove" => format!("{actor} removed {} from {case}", detail_or(detail, "a benefit driver")),
        "ledger.book" => booked(actor, subject, detail, facts, &on),
        "ledger.reverse" => {
            let (what, note) = split_note(detail);
            let what = what.strip_prefix("reverses ").unwrap_or(what);
            format!("{actor} reversed {what}{on} with {subject}{note}")
        }
        "ledger.import" => {
            let (what, note) = split_note(detail);
            match what.split_once(": ") {
                Some((file, rest)) => format!("{actor} imported {rest}{on} from {file}{note}"),
                None => format!("{actor} imported {subject}{on}{}{note}", colon(what)),
            }
        }
        "chain.seal" => format!("the upgrade sealed the hash chains{}", colon(detail)),
        "pack.make" => format!("{actor} made decision {subject}, a {detail}"),
        "roadmap.save" => format!("{actor} saved plan version {} ({subject})", detail_or(detail, "of a named plan")),
        other => format!("{actor}: {other} {subject}{}", colon(detail)),
    }
}

fn detail_or<'a>(detail: &'a str, none: &'a str) -> &'a str {
    if detail.is_empty() { none } else { detail }
}

/// Arrows and flags in words: `role viewer -> lead, active true -> false` reads
/// `role viewer to lead, active yes to no`.
fn words(detail: &str) -> String {
    detail.replace(" -> ", " to ").replace("true", "yes").replace("false", "no")
}

/// The on-behalf note an entry's audit detail ends with, split off: `(text, "; booked by ...")`.
fn split_note(detail: &str) -> (&str, String) {
    match detail.find("; booked by ") {
        Some(i) => (&detail[..i], detail[i..].to_string()),
        None => (detail, String::new()),
    }
}

fn booked(actor: &str, subject: &str, detail: &str, facts: &AuditFacts, on: &str) -> String {
    let (_, note) = split_note(detail);
    let confirmed =
        if detail.contains("confirmed by the author") { " (beyond the plausibility threshold, confirmed)" } else { "" };
    let paid = detail
        .split_once(" paid on ")
        .map(|(_, rest)| format!(", paid on {}", rest.split([' ', ';']).next().unwrap_or_default()))
        .unwrap_or_default();
    match &facts.entry {
        Some(e) => {
            let item = e.item.as_ref().map(|i| format!(": {i}")).unwrap_or_default();
            let what = match (e.saving, e.quantity, &e.unit) {
                (true, Some(q), Some(unit)) => format!("{} {unit}", quantity(&q)),
                (true, _, _) => format!("a saving of {}", Money(e.amount)),
                (false, _, _) => format!("spending of {}", Money(-e.amount)),
            };
            format!("{actor} booked {what}{on} for {}{item}{paid}{confirmed}{note}", e.period)
        }
        None => format!("{actor} booked {subject}{on}: {}", words(detail)),
    }
}

fn token_created(actor: &str, subject: &str, detail: &str) -> String {
    // "for NAME: LABEL; expires RFC3339[; issued by ...]"
    let Some(rest) = detail.strip_prefix("for ") else { return format!("{actor} issued {subject}: {detail}") };
    let (who, rest) = rest.split_once(": ").unwrap_or((rest, ""));
    let (label, rest) = rest.split_once("; expires ").unwrap_or((rest, ""));
    let (expires, behalf) = rest.split_once("; ").unwrap_or((rest, ""));
    let until = if expires.is_empty() { String::new() } else { format!(", working until {}", LocalTime::of(expires)) };
    let behalf = if behalf.is_empty() { String::new() } else { format!("; {behalf}") };
    format!("{actor} issued {subject} for {who} ({label}){until}{behalf}")
}

/// `data_reach=4 fit_with_systems=-` reads `data reach 4, fit with systems not scored`.
fn scores_words(detail: &str) -> String {
    detail
        .split_whitespace()
        .map(|pair| match pair.split_once('=') {
            Some((key, "-")) => format!("{} not scored", key.replace('_', " ")),
            Some((key, value)) => format!("{} {value}", key.replace('_', " ")),
            None => pair.to_string(),
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// `four_eyes: comment` reads `by a second person: comment`.
fn approval_words(detail: &str) -> String {
    let (kind, comment) = detail.split_once(": ").unwrap_or((detail, ""));
    let kind = match kind {
        "four_eyes" => "by a second person",
        "one_person" => "alone, as the site allows",
        "scenario" => "from a scenario file",
        other => other,
    };
    if comment.is_empty() { kind.to_string() } else { format!("{kind}: {comment}") }
}

/// `cost 5: Sensors 30000` reads `Sensors` with the amount as the page writes money.
fn item_words(detail: &str) -> String {
    let rest = detail.split_once(": ").map_or(detail, |(_, r)| r);
    match rest.rsplit_once(' ') {
        Some((label, amount)) => match NumberFormat::Plain.read(amount) {
            Ok(a) => format!("{label}, {}", Money(a)),
            Err(_) => rest.to_string(),
        },
        None => rest.to_string(),
    }
}

/// The settings detail (`currency EUR, hurdle 0.09, tax Some(0.25), depreciation None, ...`,
/// as written since the first release) in words: `currency EUR, hurdle rate 9 %, tax rate 25 %,
/// no depreciation, ...`.
fn settings_words(detail: &str) -> String {
    let optional = |v: &str| -> Option<String> {
        let v = v.trim();
        let inner = v.strip_prefix("Some(").and_then(|x| x.strip_suffix(')')).unwrap_or(v);
        if inner.is_empty() || inner.eq_ignore_ascii_case("none") { None } else { Some(inner.to_string()) }
    };
    let percent = |v: &str| match NumberFormat::Plain.read(v) {
        Ok(f) => format!("{} %", quantity(&(f * Decimal::ONE_HUNDRED).normalize())),
        Err(_) => v.to_string(),
    };
    detail
        .split(", ")
        .map(|part| {
            let (key, value) = part.split_once(' ').unwrap_or((part, ""));
            match key {
                "hurdle" => format!("hurdle rate {}", percent(value)),
                "tax" => optional(value).map_or_else(|| "no tax rate".into(), |t| format!("tax rate {}", percent(&t))),
                "depreciation" => {
                    optional(value).map_or_else(|| "no depreciation".into(), |y| format!("depreciation over {y} years"))
                }
                "one-person" => {
                    format!("one-person approval {}", if value.ends_with("true") { "allowed" } else { "not allowed" })
                }
                "numbers" => format!("numbers written {}", value.replace('_', " ")),
                _ => part.to_string(),
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn facts(zone: &str, version: Option<u32>) -> AuditFacts {
        AuditFacts { zone: Some(zone.into()), version, entry: None }
    }

    /// The sentence of every action code, on rows written the way the code writes them
    /// (expected sentences written by hand).
    #[test]
    fn every_action_code_reads_as_a_sentence() {
        let none = AuditFacts::default();
        let zone = facts("PRESS-2", None);
        let case = facts("PRESS-2", Some(2));
        let saving = AuditFacts {
            zone: Some("PRESS-2".into()),
            version: None,
            entry: Some(EntryFacts {
                saving: true,
                period: "2026-03".into(),
                quantity: Some(Decimal::from(4650)),
                unit: Some("kWh".into()),
                amount: Decimal::new(93000, 2),
                item: Some("Idle hydraulic running".into()),
            }),
        };
        let spending = AuditFacts {
            entry: Some(EntryFacts {
                saving: false,
                period: "2025-03".into(),
                quantity: None,
                unit: None,
                amount: Decimal::new(-1325000, 2),
                item: Some("Edge gateway".into()),
            }),
            ..zone.clone()
        };
        let rows: Vec<(&str, &str, &str, &str, &AuditFacts, &str)> = vec![
            ("t-admin", "sign_in", "user 1", "", &none, "t-admin signed in"),
            (
                "anonymous",
                "sign_in_failed",
                "account lead",
                "address:127.0.0.1",
                &none,
                "a sign-in as lead failed from 127.0.0.1",
            ),
            ("t-admin", "sign_out", "user 1", "", &none, "t-admin signed out"),
            (
                "admin",
                "user.create",
                "user 7",
                "ana as controller",
                &none,
                "admin added user ana with the role controller",
            ),
            (
                "admin",
                "user.update",
                "user 7",
                "ana: role viewer -> lead, active true -> false; sessions ended",
                &none,
                "admin changed ana: role viewer to lead, active yes to no; sessions ended",
            ),
            (
                "admin",
                "user.password",
                "user 7",
                "ana; sessions ended",
                &none,
                "admin set a new password for ana; sessions ended",
            ),
            (
                "admin",
                "token.create",
                "token 3",
                "for ana: nightly export; expires 2027-03-02T10:00:00Z",
                &none,
                "admin issued token 3 for ana (nightly export), working until 2027-03-02 10:00",
            ),
            (
                "admin",
                "token.revoke",
                "token 3",
                "of ana: password changed",
                &none,
                "admin revoked token 3 of ana: password changed",
            ),
            (
                "admin",
                "settings.update",
                "site",
                "currency EUR, hurdle 0.09, tax Some(0.25), depreciation None, one-person approval false, numbers decimal_point, time zone Europe/Berlin",
                &none,
                "admin changed the site settings: currency EUR, hurdle rate 9 %, tax rate 25 %, no depreciation, one-person approval not allowed, numbers written decimal point, time zone Europe/Berlin",
            ),
            (
                "admin",
                "readiness.weights",
                "readiness",
                "data_reach=2 fit_with_systems=1",
                &none,
                "admin set the readiness weights: data reach 2, fit with systems 1",
            ),
            ("lead", "zone.create", "zone 4", "PRESS-2", &zone, "lead added zone PRESS-2"),
            (
                "lead",
                "zone.update",
                "zone 4",
                "PRESS-2 Press line 2 measuring",
                &zone,
                "lead changed the name or status of PRESS-2: PRESS-2 Press line 2 measuring",
            ),
            (
                "lead",
                "zone.status",
                "zone 4",
                "approved -> piloting",
                &zone,
                "lead moved PRESS-2 from approved to piloting",
            ),
            (
                "lead",
                "zone.readiness",
                "zone 4",
                "data_reach=4 safe_while_running=-",
                &zone,
                "lead scored the readiness of PRESS-2: data reach 4, safe while running not scored",
            ),
            ("lead", "case.create", "case 9", "zone 4", &case, "lead created v2 of PRESS-2"),
            ("lead", "case.copy", "case 9", "from case 8", &case, "lead saved v2 of PRESS-2 as a copy: of case 8"),
            (
                "lead",
                "case.update",
                "case 9",
                "36 months from 2025-01",
                &case,
                "lead changed the header of v2 of PRESS-2: 36 months from 2025-01",
            ),
            ("lead", "case.submit", "case 9", "", &case, "lead submitted v2 of PRESS-2 for approval"),
            (
                "admin",
                "case.approve",
                "case 9",
                "four_eyes: checked the meter plan",
                &case,
                "admin approved v2 of PRESS-2: by a second person: checked the meter plan",
            ),
            (
                "admin",
                "case.reject",
                "case 9",
                "volumes too high",
                &case,
                "admin returned v2 of PRESS-2 to draft: volumes too high",
            ),
            (
                "lead",
                "cost.add",
                "case 9",
                "cost 5: Sensors 30000",
                &case,
                "lead added a cost item to v2 of PRESS-2: Sensors, 30,000.00",
            ),
            ("lead", "cost.remove", "case 9", "cost 5", &case, "lead removed cost 5 from v2 of PRESS-2"),
            (
                "lead",
                "driver.add",
                "case 9",
                "driver 6: Energy",
                &case,
                "lead added a benefit driver to v2 of PRESS-2: Energy",
            ),
            ("lead", "driver.remove", "case 9", "driver 6", &case, "lead removed driver 6 from v2 of PRESS-2"),
            (
                "controller",
                "ledger.book",
                "entry 12",
                "saving 2026-03 direct 930.00",
                &saving,
                "controller booked 4,650 kWh on PRESS-2 for 2026-03: Idle hydraulic running",
            ),
            (
                "controller",
                "ledger.book",
                "entry 13",
                "spending 2025-03 spend -13250.00 paid on 2025-03-14; booked by admin on behalf of controller (with a token admin issued)",
                &spending,
                "controller booked spending of 13,250.00 on PRESS-2 for 2025-03: Edge gateway, paid on 2025-03-14; booked by admin on behalf of controller (with a token admin issued)",
            ),
            (
                "controller",
                "ledger.reverse",
                "entry 14",
                "reverses entry 12",
                &zone,
                "controller reversed entry 12 on PRESS-2 with entry 14",
            ),
            (
                "controller",
                "ledger.import",
                "import 2",
                "march.csv: 3 rows",
                &zone,
                "controller imported 3 rows on PRESS-2 from march.csv",
            ),
            (
                "migration",
                "chain.seal",
                "hash chains",
                "42 ledger rows, 7 audit rows",
                &none,
                "the upgrade sealed the hash chains: 42 ledger rows, 7 audit rows",
            ),
            (
                "lead",
                "pack.make",
                "pack 1",
                "case pack of 1: PRESS-2 v1 Base (176 ledger entries)",
                &none,
                "lead made decision pack 1, a case pack of 1: PRESS-2 v1 Base (176 ledger entries)",
            ),
            (
                "lead",
                "roadmap.save",
                "plan 3",
                "v2 of Three-year roll-out",
                &none,
                "lead saved plan version v2 of Three-year roll-out (plan 3)",
            ),
        ];
        for (actor, action, subject, detail, f, expected) in &rows {
            assert_eq!(audit_sentence(actor, action, subject, detail, f), *expected, "{action}");
        }
        // Every code has a row above.
        for code in ACTIONS {
            assert!(rows.iter().any(|r| r.1 == code), "{code} has no sentence test");
        }
    }

    #[test]
    fn an_unknown_code_keeps_its_raw_words() {
        let s = audit_sentence("x", "thing.do", "zone 1", "d", &AuditFacts::default());
        assert_eq!(s, "x: thing.do zone 1: d");
    }
}
