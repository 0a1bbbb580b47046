//! Text cells of CSV exports, made safe for spreadsheets.
//!
//! A spreadsheet opening a CSV file runs a cell that begins with `=`, `+`, `-` or `@` as a
//! formula, and a leading tab or carriage return can hide such a start. OWASP "CSV Injection"
//! (<https://owasp.org/www-community/attacks/CSV_Injection>) recommends prefixing such cells with
//! a single quote, which spreadsheets read as "this is text". The rule applies to text cells only
//! (notes, codes, names, labels): numbers are written as they are, so a negative amount stays the
//! number `-12.50`.

/// The characters that make a spreadsheet read a cell as a formula (OWASP "CSV Injection").
pub const FORMULA_STARTS: [char; 6] = ['=', '+', '-', '@', '\t', '\r'];

/// A text cell for a CSV export: prefixed with a single quote when it begins with one of
/// [`FORMULA_STARTS`], unchanged otherwise.
///
/// ```
/// use pilot_ledger::domain::csv_safe;
/// assert_eq!(csv_safe("=1+2"), "'=1+2");
/// assert_eq!(csv_safe("-sub-meter"), "'-sub-meter");
/// assert_eq!(csv_safe("sub-meter"), "sub-meter");
/// ```
pub fn csv_safe(cell: &str) -> String {
    if cell.starts_with(FORMULA_STARTS) { format!("'{cell}") } else { cell.to_string() }
}

/// The text an importer reads from a cell [`csv_safe`] wrote: one leading single quote before a
/// formula start is dropped, so an exported ledger imports back with the notes as typed (a note
/// typed as `'=1` itself reads back as `=1`: the one text the pair cannot tell apart).
///
/// ```
/// use pilot_ledger::domain::{csv_safe, csv_unquote};
/// assert_eq!(csv_unquote(&csv_safe("=1+2")), "=1+2");
/// assert_eq!(csv_unquote("'quoted"), "'quoted");
/// ```
pub fn csv_unquote(cell: &str) -> &str {
    match cell.strip_prefix('\'') {
        Some(rest) if rest.starts_with(FORMULA_STARTS) => rest,
        _ => cell,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_formula_start_is_quoted_and_plain_text_is_not() {
        // OWASP "CSV Injection": =, +, -, @, tab and carriage return.
        for start in ["=", "+", "-", "@", "\t", "\r"] {
            let cell = format!("{start}HYPERLINK(\"x\")");
            assert_eq!(csv_safe(&cell), format!("'{cell}"));
        }
        assert_eq!(csv_safe("Press line 2"), "Press line 2");
        assert_eq!(csv_safe(""), "");
        assert_eq!(csv_safe("a=b"), "a=b");
        // Reading back undoes exactly the quote written, nothing else.
        for cell in ["=1", "-2", "'x", "x"] {
            assert_eq!(csv_unquote(&csv_safe(cell)), cell);
        }
    }
}
