//! The ledger's CSV files: the columns export writes and import reads, and the reading of an
//! import, row by row against the baseline.

use super::{Booking, BookingBaseline, BookingInput, FieldErrors, Method, NewEntry, NumberFormat};

/// Largest CSV accepted by the import form: about 200,000 rows.
pub const IMPORT_MAX_BYTES: usize = 16 * 1024 * 1024;
/// The CSV columns, in order; export writes them and import reads them by name.
pub const CSV_COLUMNS: [&str; 10] = [
    "period",
    "kind",
    "item",
    "method",
    "quantity",
    "baseline_intensity",
    "reporting_volume",
    "measured_consumption",
    "amount",
    "evidence",
];

/// Optional import columns, read when present and written by the export.
pub const CSV_OPTIONAL_COLUMNS: [&str; 2] = ["paid_on", "confirm_implausible"];

/// Rows per CSV import: 100,000 is eight years of monthly bookings for a thousand items, and
/// keeps the work of one request bounded (the 16 MiB body alone would allow about 500,000).
pub const IMPORT_MAX_ROWS: usize = 100_000;

/// Every row of a CSV file checked against the baseline, with the hash of its normalised rows
/// (the file's identity), or every error by line and column.
///
/// The hash covers the header names sorted and, per record, the cells (trimmed, as booked) in
/// that column order: line ends (CRLF or LF), spaces around cells, the final newline and the
/// column order do not change it, nor the spelling of a method (`volume_adjusted` or the older
/// `normalized`: the stored code is hashed).
pub fn checked_rows(
    bytes: &[u8],
    baseline: &BookingBaseline,
    day: time::Date,
    numbers: NumberFormat,
) -> Result<(Vec<NewEntry>, String), FieldErrors> {
    use sha2::Digest;
    let invalid = |field: &str, message: String| FieldErrors::one(field, message);
    let delimiter = numbers.csv_delimiter();
    let mut reader =
        csv::ReaderBuilder::new().delimiter(delimiter).trim(csv::Trim::All).flexible(false).from_reader(bytes);
    let headers = reader.headers().map_err(|e| invalid("line 1", format!("cannot read the header row: {e}")))?.clone();
    let missing: Vec<&str> = CSV_COLUMNS.iter().copied().filter(|c| !headers.iter().any(|h| h == *c)).collect();
    if !missing.is_empty() {
        return Err(invalid(
            "line 1",
            format!(
                "missing column(s): {}; expected {} (this site separates columns by {:?})",
                missing.join(", "),
                CSV_COLUMNS.join(&char::from(delimiter).to_string()),
                char::from(delimiter)
            ),
        ));
    }
    let mut order: Vec<usize> = (0..headers.len()).collect();
    order.sort_by(|&a, &b| headers[a].cmp(&headers[b]));
    let mut hasher = sha2::Sha256::new();
    let method_col = headers.iter().position(|h| h == "method");
    // Unit and record separators cannot occur in a trimmed cell's meaning here: they delimit.
    let mut hash_record = |cells: &csv::StringRecord| {
        for &i in &order {
            let cell = cells.get(i).unwrap_or_default();
            // A method hashes as its stored code, so a file written with `volume_adjusted`
            // repeats the same rows written with the older `normalized`.
            let cell = match (Some(i) == method_col).then(|| Method::from_input(cell)).flatten() {
                Some(m) => m.stored(),
                None => cell,
            };
            hasher.update(cell.as_bytes());
            hasher.update([0x1f]);
        }
        hasher.update([0x1e]);
    };
    hash_record(&headers);
    let col = |name: &str| headers.iter().position(|h| h == name);
    let mut errors = FieldErrors::default();
    let mut rows = Vec::new();
    for (n, record) in reader.records().enumerate() {
        if n == IMPORT_MAX_ROWS {
            let limit = format!("at most {IMPORT_MAX_ROWS} rows per import; split the file by month");
            return Err(invalid("file", limit));
        }
        let record = match record {
            Ok(r) => r,
            Err(e) => {
                let line = e.position().map_or(0, |p| p.line());
                errors.push(format!("line {line}"), e.to_string());
                continue;
            }
        };
        hash_record(&record);
        let line = record.position().map_or(0, |p| p.line());
        let get = |name: &str| col(name).and_then(|i| record.get(i)).unwrap_or_default().to_string();
        let kind = get("kind");
        let item_text = get("item");
        // The item column takes the id or the exact label of a driver (saving) or cost item (spending).
        let item = if item_text.parse::<i64>().is_ok() {
            item_text.clone()
        } else {
            match baseline.items_labelled(kind == "saving", &item_text).as_slice() {
                [id] => id.to_string(),
                [] => {
                    errors.push(
                        format!("line {line}, column item"),
                        format!("no driver or cost item of the baseline is named {item_text:?}"),
                    );
                    continue;
                }
                _ => {
                    errors.push(
                        format!("line {line}, column item"),
                        format!("{item_text:?} names several items; use the id"),
                    );
                    continue;
                }
            }
        };
        let input = BookingInput {
            kind,
            method: get("method"),
            item,
            period: get("period"),
            quantity: get("quantity"),
            baseline_intensity: get("baseline_intensity"),
            reporting_volume: get("reporting_volume"),
            measured_consumption: get("measured_consumption"),
            amount: get("amount"),
            // An exported ledger reads back: the export's quote before a formula start goes.
            evidence: super::csv_unquote(&get("evidence")).to_string(),
            paid_on: get("paid_on"),
            confirm_implausible: crate::domain::de::flag_text(&get("confirm_implausible")),
        };
        match Booking::parse(&input, numbers).and_then(|b| baseline.check(&b, day)) {
            Ok(entry) => rows.push(entry),
            Err(e) => errors.extend_prefixed(&format!("line {line}, column "), e),
        }
    }
    if rows.is_empty() && errors.is_empty() {
        return Err(invalid("file", "no rows below the header".into()));
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    let hash = hasher.finalize().iter().map(|b| format!("{b:02x}")).collect();
    Ok((rows, hash))
}
