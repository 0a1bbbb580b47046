//! Decision packs: dated, stored snapshots of a case version or of the portfolio (migration
//! 0015). A pack is made once and served byte for byte ever after; this module holds the
//! pure parts: its kind, its subject (a quarter for the portfolio), the database state it was
//! made from, its content hash, its size limit, and the changes between two portfolio packs.

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use std::fmt;

/// Largest stored snapshot (HTML body plus figures JSON) in bytes. A pack above it is refused
/// with a message naming this limit; the demo plant's packs are about 60 kB.
pub const PACK_MAX_BYTES: usize = 4 * 1024 * 1024;

/// Packs a list shows at most (newest first).
pub const PACK_LIST_MAX: i64 = 500;

/// What a pack is of.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PackKind {
    /// One case version, for the capital committee (A4 portrait).
    Case,
    /// The whole portfolio, for management's quarterly review (A4 landscape).
    Portfolio,
}

impl PackKind {
    /// Stored spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Case => "case",
            Self::Portfolio => "portfolio",
        }
    }

    /// Parse the stored spelling (or a list filter).
    pub fn parse(value: &str) -> Result<Self, String> {
        match value.trim() {
            "case" => Ok(Self::Case),
            "portfolio" => Ok(Self::Portfolio),
            _ => Err("case or portfolio".into()),
        }
    }

    /// Words for the list.
    pub fn label(self) -> &'static str {
        match self {
            Self::Case => "case pack",
            Self::Portfolio => "quarterly portfolio pack",
        }
    }
}

impl fmt::Display for PackKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The calendar quarter of `at`, as a portfolio pack's subject: `2026-Q4`.
pub fn quarter_of(at: time::OffsetDateTime) -> String {
    format!("{}-Q{}", at.year(), (u8::from(at.month()) - 1) / 3 + 1)
}

/// The database state a pack was made from: the ledger chain's tip and length, and the
/// change generation (`db::generation`, the sum of the change counters).
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct DbState {
    /// Id of the newest ledger entry (0: none).
    pub ledger_tip_id: i64,
    /// Its chain hash (`None`: empty ledger).
    pub ledger_tip_hash: Option<String>,
    /// Ledger entries in the database.
    pub ledger_entries: i64,
    /// `db::generation` when the pack was made.
    pub generation: i64,
}

impl DbState {
    /// In words, for the pack's footer.
    pub fn describe(&self) -> String {
        let tip = match &self.ledger_tip_hash {
            Some(h) => format!("ledger chain head entry {} (hash {})", self.ledger_tip_id, &h[..h.len().min(16)]),
            None => "an empty ledger".into(),
        };
        format!("{} ledger entries, {tip}, change generation {}", self.ledger_entries, self.generation)
    }
}

/// A stored pack.
#[derive(Debug, Clone, Serialize)]
pub struct Pack {
    /// Row id.
    pub id: i64,
    /// Case or portfolio.
    pub kind: PackKind,
    /// The case version id, or the quarter.
    pub subject: String,
    /// A one-line title, e.g. "PRESS-2 v1 Base".
    pub title: String,
    /// RFC 3339 UTC.
    pub made_at: String,
    /// User name.
    pub made_by: String,
    /// The database state it was made from.
    pub state: DbState,
    /// SHA-256 of its content ([`pack_hash`]).
    pub sha256: String,
}

/// A pack's snapshot: the HTML document and the JSON of its figures.
#[derive(Debug, Clone)]
pub struct Snapshot {
    /// The whole HTML document.
    pub body: String,
    /// The figures as JSON text.
    pub figures: String,
}

/// Refuse a snapshot above [`PACK_MAX_BYTES`].
pub fn check_size(snapshot: &Snapshot) -> Result<(), String> {
    let n = snapshot.body.len() + snapshot.figures.len();
    if n > PACK_MAX_BYTES {
        return Err(format!(
            "the decision pack would be {n} bytes, above the limit of {PACK_MAX_BYTES} bytes (PACK_MAX_BYTES)"
        ));
    }
    Ok(())
}

/// SHA-256 (lowercase hex) of a pack's content: each field as its byte length (8 bytes, big
/// endian) and its UTF-8 bytes, in the order kind, subject, title, made_at, made_by,
/// ledger_tip_id, ledger_tip_hash (empty when none), ledger_entries, generation, body, figures.
/// Length prefixes keep two different packs from encoding alike.
pub fn pack_hash(
    kind: PackKind,
    subject: &str,
    title: &str,
    made_at: &str,
    made_by: &str,
    state: &DbState,
    snapshot: &Snapshot,
) -> String {
    let mut h = Sha256::new();
    let numbers = [state.ledger_tip_id.to_string(), state.ledger_entries.to_string(), state.generation.to_string()];
    let fields: [&str; 11] = [
        kind.as_str(),
        subject,
        title,
        made_at,
        made_by,
        &numbers[0],
        state.ledger_tip_hash.as_deref().unwrap_or(""),
        &numbers[1],
        &numbers[2],
        &snapshot.body,
        &snapshot.figures,
    ];
    for f in fields {
        h.update((f.len() as u64).to_be_bytes());
        h.update(f.as_bytes());
    }
    h.finalize().iter().map(|b| format!("{b:02x}")).collect()
}

/// One zone of a portfolio pack's figures, as its JSON stores it (and as the next pack reads
/// it back to find the changes).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct PackZone {
    /// Zone code.
    pub code: String,
    /// Zone name.
    pub name: String,
    /// Lifecycle status.
    pub status: String,
    /// Standing in the budget choice.
    pub standing: String,
    /// NPV as a decimal string rounded to cents (`None`: no figures).
    pub npv: Option<String>,
}

/// What changed from the previous portfolio pack's zones to these, in words, zones in the
/// order of `now` (removed zones last): added, removed, status changed, standing changed,
/// NPV moved. Empty when nothing changed.
pub fn changes_since(previous: &[PackZone], now: &[PackZone]) -> Vec<String> {
    let mut out = Vec::new();
    for z in now {
        let Some(p) = previous.iter().find(|p| p.code == z.code) else {
            out.push(format!("{} ({}) added, status {}", z.code, z.name, z.status));
            continue;
        };
        if p.status != z.status {
            out.push(format!("{}: status {} → {}", z.code, p.status, z.status));
        }
        if p.standing != z.standing {
            out.push(format!("{}: standing {} → {}", z.code, p.standing, z.standing));
        }
        if p.npv != z.npv {
            let shown = |v: &Option<String>| v.clone().unwrap_or_else(|| "none".into());
            out.push(format!("{}: NPV {} → {}", z.code, shown(&p.npv), shown(&z.npv)));
        }
    }
    for p in previous.iter().filter(|p| now.iter().all(|z| z.code != p.code)) {
        out.push(format!("{} ({}) no longer in the portfolio", p.code, p.name));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::macros::datetime;

    fn zone(code: &str, status: &str, standing: &str, npv: &str) -> PackZone {
        PackZone {
            code: code.into(),
            name: format!("Zone {code}"),
            status: status.into(),
            standing: standing.into(),
            npv: Some(npv.into()),
        }
    }

    #[test]
    fn quarters_follow_the_calendar() {
        assert_eq!(quarter_of(datetime!(2026-01-01 00:00 UTC)), "2026-Q1");
        assert_eq!(quarter_of(datetime!(2026-03-31 23:59 UTC)), "2026-Q1");
        assert_eq!(quarter_of(datetime!(2026-04-01 00:00 UTC)), "2026-Q2");
        assert_eq!(quarter_of(datetime!(2026-12-03 11:40 UTC)), "2026-Q4");
    }

    #[test]
    fn size_limit_names_itself() {
        let ok = Snapshot { body: "x".repeat(PACK_MAX_BYTES - 2), figures: "{}".into() };
        assert_eq!(check_size(&ok), Ok(()));
        let big = Snapshot { body: "x".repeat(PACK_MAX_BYTES - 1), figures: "{}".into() };
        assert_eq!(
            check_size(&big),
            Err("the decision pack would be 4194305 bytes, above the limit of 4194304 bytes (PACK_MAX_BYTES)".into())
        );
    }

    #[test]
    fn hash_covers_every_field_and_keeps_fields_apart() {
        let s = Snapshot { body: "<p>a</p>".into(), figures: "{}".into() };
        let state = DbState::default();
        let h = pack_hash(PackKind::Case, "3", "t", "2026-12-03T00:00:00Z", "lead", &state, &s);
        assert_eq!(h.len(), 64);
        // Moving a byte from one field to the next changes the hash (length prefixes).
        let h2 = pack_hash(PackKind::Case, "3t", "", "2026-12-03T00:00:00Z", "lead", &state, &s);
        assert_ne!(h, h2);
        let later = DbState { generation: 1, ..DbState::default() };
        assert_ne!(h, pack_hash(PackKind::Case, "3", "t", "2026-12-03T00:00:00Z", "lead", &later, &s));
    }

    #[test]
    fn changes_list_each_kind_of_change() {
        let before = [zone("A", "candidate", "left out", "100.00"), zone("B", "measuring", "committed", "5.00")];
        let now = [
            zone("A", "approved", "committed", "100.00"),
            zone("B", "measuring", "committed", "7.50"),
            zone("C", "candidate", "recommended", "1.00"),
        ];
        assert_eq!(
            changes_since(&before, &now),
            [
                "A: status candidate → approved",
                "A: standing left out → committed",
                "B: NPV 5.00 → 7.50",
                "C (Zone C) added, status candidate",
            ]
        );
        assert_eq!(
            changes_since(&now, &before).last().map(String::as_str),
            Some("C (Zone C) no longer in the portfolio")
        );
        assert!(changes_since(&now, &now).is_empty());
    }
}
