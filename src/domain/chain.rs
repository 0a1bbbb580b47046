//! Tamper evidence: the canonical content of a chained row and its SHA-256 hash chain.
//!
//! Two tables are chained, each in id order: `ledger_entries` ([`LEDGER_ENTRIES`]) and
//! `audit_log` ([`AUDIT_LOG`]). A row's `hash` column holds SHA-256 (lowercase hex) over:
//!
//! 1. the tag `pilot-ledger chain v1`, then the table name, each length-prefixed;
//! 2. the previous row's hash, length-prefixed (empty for the first row of the table);
//! 3. every stored column except `hash`, sorted by name, each as its length-prefixed name, a
//!    type byte (`i` integer, `t` text) and its value (an integer as 8 big-endian bytes, text
//!    as length-prefixed UTF-8). A NULL column is left out; lengths are 4 big-endian bytes.
//!
//! Everything is length-prefixed, so no two different rows encode alike. Values are hashed
//! as stored: money is canonical decimal text (`Decimal::normalize`, as [`Value::money`]
//! writes it), times RFC 3339 text. Writers build the row here ([`ledger_entry_row`],
//! [`audit_row`]) and the insert is made from that list, so what is hashed is what is
//! written; `verify` reads every column back (`SELECT *`) and recomputes.
//!
//! # Adding a column to a chained table
//! 1. Add it in a new migration as a *nullable column without a DEFAULT* (`ALTER TABLE
//!    ledger_entries ADD COLUMN payment_date TEXT`). Older rows then read NULL, which the
//!    encoding leaves out, so their hashes stay valid; a NOT NULL or DEFAULT column would give
//!    every older row a value it was not hashed with, and `verify` would refuse them all.
//!    Write the value (e.g. `0`/`1` for a flag) on every new row.
//! 2. Add one line for it to [`ledger_entry_row`] (or [`audit_row`]), with its value from
//!    the entry. Nothing else: the insert in `db::ledger` is built from these lines and
//!    `verify` reads the table's columns itself.
//! 3. `tests/it/chain.rs` (`every_column_is_chained`) fails until both hold: each column of
//!    the table appears in the row, and each column added after 0007 is nullable without a
//!    default.
//!
//! A chain shows that rows were changed, removed or reordered after they were written, unless
//! whoever changed them also recomputed every later hash. Keep the tip `verify` prints
//! (`ledger tip`, `audit tip`) outside the database, e.g. with the backups, to pin it.

use super::NewEntry;
use rust_decimal::Decimal;
use sha2::{Digest, Sha256};

/// The chained ledger table.
pub const LEDGER_ENTRIES: &str = "ledger_entries";
/// The chained audit table.
pub const AUDIT_LOG: &str = "audit_log";
/// The column that holds a row's hash (never part of its own content).
pub const HASH_COLUMN: &str = "hash";

/// Version tag of the encoding; a new encoding would need a new tag and a migration plan.
const TAG: &str = "pilot-ledger chain v1";

/// A stored column value: SQLite storage classes as the chained tables use them (STRICT
/// tables with INTEGER and TEXT columns; money is never REAL).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Value {
    /// SQL NULL: left out of the encoding.
    Null,
    /// An INTEGER column (ids, flags, counts).
    Integer(i64),
    /// A TEXT column.
    Text(String),
}

impl Value {
    /// Money or a quantity as canonical decimal text (what the ledger stores).
    pub fn money(d: Decimal) -> Self {
        Value::Text(d.normalize().to_string())
    }

    /// An optional decimal: NULL when absent.
    pub fn opt_money(d: Option<Decimal>) -> Self {
        d.map_or(Value::Null, Value::money)
    }

    /// An optional integer: NULL when absent.
    pub fn opt_int(v: Option<i64>) -> Self {
        v.map_or(Value::Null, Value::Integer)
    }

    /// Text.
    pub fn text(s: impl Into<String>) -> Self {
        Value::Text(s.into())
    }

    /// Optional text: NULL when absent.
    pub fn opt_text(s: Option<&str>) -> Self {
        s.map_or(Value::Null, Value::text)
    }
}

/// One row as written: each stored column (except `hash`) by name with its value.
pub type Row = Vec<(&'static str, Value)>;

/// Everything a ledger row stores besides the checked entry itself.
#[derive(Debug, Clone, Copy)]
pub struct EntryStamp<'a> {
    /// The row id (the chain's order).
    pub id: i64,
    /// Zone.
    pub zone_id: i64,
    /// The entry a reversal reverses.
    pub reverses_id: Option<i64>,
    /// The request's idempotency key.
    pub idempotency_key: Option<&'a str>,
    /// The CSV import it came from.
    pub import_id: Option<i64>,
    /// RFC 3339 booking time.
    pub booked_at: &'a str,
    /// Who booked it.
    pub booked_by: &'a str,
    /// Who made the token it was booked with, when not `booked_by` (see `LedgerEntry`).
    pub on_behalf_by: Option<&'a str>,
}

/// Every stored column of one `ledger_entries` row, by name. **A new ledger column is added
/// here**, one line (see the module docs for the migration rule).
pub fn ledger_entry_row(e: &NewEntry, s: &EntryStamp<'_>) -> Row {
    vec![
        ("id", Value::Integer(s.id)),
        ("zone_id", Value::Integer(s.zone_id)),
        ("case_id", Value::Integer(e.case_id)),
        ("kind", Value::text(e.item.kind().as_str())),
        ("driver_id", Value::opt_int(e.item.driver().map(|d| d.0))),
        ("cost_id", Value::opt_int(e.item.cost().map(|c| c.0))),
        ("period", Value::text(e.period.to_string())),
        // The stored code ('normalized' for volume_adjusted): hashed as written before the rename.
        ("method", Value::text(e.method.stored())),
        ("quantity", Value::opt_money(e.quantity)),
        ("unit_value", Value::opt_money(e.unit_value)),
        ("amount", Value::money(e.amount)),
        ("baseline_intensity", Value::opt_money(e.inputs[0])),
        ("reporting_volume", Value::opt_money(e.inputs[1])),
        ("measured_consumption", Value::opt_money(e.inputs[2])),
        ("evidence", Value::text(e.evidence.as_str())),
        ("reverses_id", Value::opt_int(s.reverses_id)),
        ("idempotency_key", Value::opt_text(s.idempotency_key)),
        ("import_id", Value::opt_int(s.import_id)),
        ("booked_at", Value::text(s.booked_at)),
        ("booked_by", Value::text(s.booked_by)),
        ("paid_on", Value::opt_text(e.paid_on.map(|d| d.to_string()).as_deref())),
        // NULL unless confirmed, so rows from before the column keep their hashes.
        ("implausible_confirmed", Value::opt_int(e.implausible_confirmed.then_some(1))),
        // Migration 0013; NULL (left out of the hash) unless booked on someone's behalf.
        ("on_behalf_by", Value::opt_text(s.on_behalf_by)),
    ]
}

/// Every stored column of one `audit_log` row, by name. A new audit column is added here.
pub fn audit_row(id: i64, at: &str, actor: &str, action: &str, subject: &str, detail: &str) -> Row {
    vec![
        ("id", Value::Integer(id)),
        ("at", Value::text(at)),
        ("actor", Value::text(actor)),
        ("action", Value::text(action)),
        ("subject", Value::text(subject)),
        ("detail", Value::text(detail)),
    ]
}

/// The canonical bytes of a row of `table` following `prev` (see the module docs). Column
/// names may come in any order; `hash` must not be among them.
pub fn encode<N: AsRef<str>>(table: &str, prev: Option<&str>, columns: &[(N, Value)]) -> Vec<u8> {
    let mut sorted: Vec<&(N, Value)> = columns.iter().filter(|(_, v)| *v != Value::Null).collect();
    sorted.sort_by(|a, b| a.0.as_ref().cmp(b.0.as_ref()));
    let mut out = Vec::with_capacity(64 + 48 * sorted.len());
    put(&mut out, TAG.as_bytes());
    put(&mut out, table.as_bytes());
    put(&mut out, prev.unwrap_or_default().as_bytes());
    for (name, value) in sorted {
        put(&mut out, name.as_ref().as_bytes());
        match value {
            Value::Integer(i) => {
                out.push(b'i');
                out.extend_from_slice(&i.to_be_bytes());
            }
            Value::Text(t) => {
                out.push(b't');
                put(&mut out, t.as_bytes());
            }
            Value::Null => {}
        }
    }
    out
}

/// Length-prefixed bytes (4 bytes big-endian). Lengths beyond `u32` do not occur: SQLite's
/// default limit for a value is 1 GB.
fn put(out: &mut Vec<u8>, bytes: &[u8]) {
    out.extend_from_slice(&u32::try_from(bytes.len()).unwrap_or(u32::MAX).to_be_bytes());
    out.extend_from_slice(bytes);
}

/// The hash of a row of `table` following `prev`: SHA-256 of [`encode`], lowercase hex.
pub fn row_hash<N: AsRef<str>>(table: &str, prev: Option<&str>, columns: &[(N, Value)]) -> String {
    Sha256::digest(encode(table, prev, columns)).iter().map(|b| format!("{b:02x}")).collect()
}

/// The end of a chain: the last row's id and hash (`None` for an empty table). Writers read
/// it inside their write transaction and [`link`](Tip::link) each new row to it in id order.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Tip {
    /// The last row's id (0 for an empty table).
    pub id: i64,
    /// The last row's hash.
    pub hash: Option<String>,
}

impl Tip {
    /// The id the next row gets.
    pub fn next_id(&self) -> i64 {
        self.id + 1
    }

    /// Chain `row` (whose `id` column is [`next_id`](Tip::next_id)) to this tip; returns its
    /// hash and moves the tip to it.
    pub fn link(&mut self, table: &str, row: &[(&'static str, Value)]) -> String {
        let hash = row_hash(table, self.hash.as_deref(), row);
        self.id = self.next_id();
        self.hash = Some(hash.clone());
        hash
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row() -> Row {
        audit_row(1, "2026-12-02T10:00:00Z", "t-admin", "user.create", "user 1", "")
    }

    /// Known answer, computed outside this code: `python3 -c` over the same bytes with
    /// hashlib.sha256 (the bytes are spelled out below, so the layout itself is checked).
    #[test]
    fn encoding_is_length_prefixed_and_sorted_by_name() {
        let cols: Row = vec![("b", Value::Integer(1)), ("a", Value::text("x")), ("c", Value::Null)];
        let bytes = encode("t", None, &cols);
        let mut want = Vec::new();
        want.extend_from_slice(b"\0\0\0\x15pilot-ledger chain v1");
        want.extend_from_slice(b"\0\0\0\x01t");
        want.extend_from_slice(b"\0\0\0\0");
        want.extend_from_slice(b"\0\0\0\x01at\0\0\0\x01x");
        want.extend_from_slice(b"\0\0\0\x01bi\0\0\0\0\0\0\0\x01");
        assert_eq!(bytes, want);
        // hashlib.sha256(bytes(want)).hexdigest()
        assert_eq!(row_hash("t", None, &cols), "cfb692c34374e854cf3cf233baef5be26cf309a54443b3c5cb1df7baa084e2a7");
    }

    #[test]
    fn every_value_and_the_link_change_the_hash() {
        let base = row_hash(AUDIT_LOG, None, &row());
        assert_eq!(base.len(), 64);
        assert_ne!(base, row_hash(AUDIT_LOG, Some(&base), &row()), "the previous hash is part of the content");
        assert_ne!(base, row_hash(LEDGER_ENTRIES, None, &row()), "the table is part of the content");
        for i in 0..row().len() {
            let mut changed = row();
            changed[i].1 = match &changed[i].1 {
                Value::Integer(n) => Value::Integer(n + 1),
                Value::Text(t) => Value::text(format!("{t}!")),
                Value::Null => Value::Integer(0),
            };
            assert_ne!(base, row_hash(AUDIT_LOG, None, &changed), "column {} is not covered", changed[i].0);
        }
        // Text "1" and integer 1 differ; so do "ab" + "c" and "a" + "bc" across columns.
        let a: Row = vec![("x", Value::text("1"))];
        let b: Row = vec![("x", Value::Integer(1))];
        assert_ne!(row_hash("t", None, &a), row_hash("t", None, &b));
        let a: Row = vec![("x", Value::text("ab")), ("y", Value::text("c"))];
        let b: Row = vec![("x", Value::text("a")), ("y", Value::text("bc"))];
        assert_ne!(row_hash("t", None, &a), row_hash("t", None, &b));
    }

    #[test]
    fn a_null_column_is_left_out_so_added_columns_keep_old_hashes() {
        let mut with_null = row();
        with_null.push(("payment_date", Value::Null));
        assert_eq!(row_hash(AUDIT_LOG, None, &row()), row_hash(AUDIT_LOG, None, &with_null));
        // Column order does not matter (the table's order and the writer's may differ).
        let mut reversed = row();
        reversed.reverse();
        assert_eq!(row_hash(AUDIT_LOG, None, &row()), row_hash(AUDIT_LOG, None, &reversed));
    }

    /// The method is hashed as stored: a saving adjusted to the period's volume is written
    /// and hashed as `normalized`, as before the rename, so older chains still verify.
    #[test]
    fn a_volume_adjusted_entry_is_hashed_with_its_stored_code() -> Result<(), String> {
        let entry = NewEntry {
            case_id: 1,
            item: super::super::LedgerItem::Driver(super::super::DriverId(1)),
            period: super::super::Month::parse("2025-01")?,
            method: super::super::Method::VolumeAdjusted,
            quantity: Some(Decimal::from(5)),
            unit_value: Some(Decimal::ONE),
            amount: Decimal::from(5),
            inputs: [Some(Decimal::from(2)), Some(Decimal::from(3)), Some(Decimal::ONE)],
            evidence: "meter".into(),
            paid_on: None,
            implausible_confirmed: false,
        };
        let stamp = EntryStamp {
            id: 1,
            zone_id: 1,
            reverses_id: None,
            idempotency_key: None,
            import_id: None,
            booked_at: "2025-02-01T00:00:00Z",
            booked_by: "t-controller",
            on_behalf_by: None,
        };
        let row = ledger_entry_row(&entry, &stamp);
        let method = row.iter().find(|(n, _)| *n == "method").map(|(_, v)| v.clone());
        assert_eq!(method, Some(Value::text("normalized")));
        // Known answer computed outside this code: hashlib.sha256 over the layout of the module
        // docs with method "normalized" (a Python script of a dozen lines, the columns above
        // without their NULLs), i.e. the hash such a row had before the rename.
        assert_eq!(
            row_hash(LEDGER_ENTRIES, None, &row),
            "875eb908c588c3718de3cff8d3d0a1499f9c2749923ebb1dea2f221385f22623"
        );
        Ok(())
    }

    #[test]
    fn money_is_canonical_text() {
        assert_eq!(Value::money(Decimal::new(120_050, 2)), Value::text("1200.5"));
        assert_eq!(Value::money(Decimal::new(-500, 0)), Value::text("-500"));
        assert_eq!(Value::opt_money(None), Value::Null);
    }

    #[test]
    fn a_tip_links_rows_in_order() {
        let mut tip = Tip::default();
        assert_eq!(tip.next_id(), 1);
        let first = tip.link(AUDIT_LOG, &row());
        assert_eq!(tip, Tip { id: 1, hash: Some(first.clone()) });
        let second_row = audit_row(2, "2026-12-02T10:00:01Z", "t-admin", "sign_in", "user 1", "");
        let second = tip.link(AUDIT_LOG, &second_row);
        assert_eq!(second, row_hash(AUDIT_LOG, Some(&first), &second_row));
    }
}
