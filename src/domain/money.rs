//! Money and percentages: exact decimals with a controller's-report display.

use rust_decimal::{Decimal, RoundingStrategy};
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// An amount of the site's currency, exact. Displays with thousands separators, two decimals
/// and a leading minus sign (`-12,345.60`); the currency code is shown once per table instead.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Default, Serialize, Deserialize)]
#[serde(transparent)]
pub struct Money(pub Decimal);

impl fmt::Display for Money {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&group_thousands(self.0, 2))
    }
}

/// A fraction shown as a percentage with two decimals (`0.0825` -> `8.25 %`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Percent(pub f64);

impl fmt::Display for Percent {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let pct = Decimal::from_f64_retain(self.0 * 100.0).unwrap_or_default();
        write!(f, "{} %", group_thousands(pct, 2))
    }
}

/// A stored fraction as a percentage for display (`0.025` -> `2.5 %`); templates call it.
pub fn pct(fraction: &Decimal) -> String {
    format!("{} %", (fraction * Decimal::ONE_HUNDRED).normalize())
}

/// A stored amount as [`Money`] text; templates call it.
pub fn money(value: &Decimal) -> String {
    Money(*value).to_string()
}

/// A quantity with thousands separators and the decimals it has (`42000` -> `42,000`).
pub fn quantity(value: &Decimal) -> String {
    let v = value.normalize();
    group_thousands(v, v.scale())
}

/// Format `value` rounded half away from zero to `dp` decimals, with `,` between thousands.
pub fn group_thousands(value: Decimal, dp: u32) -> String {
    let rounded = value.round_dp_with_strategy(dp, RoundingStrategy::MidpointAwayFromZero);
    let text = format!("{:.*}", dp as usize, rounded.abs());
    let (int, frac) = text.split_once('.').map_or((text.as_str(), ""), |(i, f)| (i, f));
    let mut out = String::with_capacity(text.len() + int.len() / 3 + 1);
    if rounded.is_sign_negative() && !rounded.is_zero() {
        out.push('-');
    }
    for (i, ch) in int.chars().enumerate() {
        if i > 0 && (int.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(ch);
    }
    if !frac.is_empty() {
        out.push('.');
        out.push_str(frac);
    }
    out
}

/// Parse a plain decimal number (`1234.5`, `-0.25`); thousands separators and spaces are
/// tolerated because people paste figures from reports.
pub fn parse_decimal(value: &str) -> Result<Decimal, String> {
    let cleaned: String = value.trim().chars().filter(|c| *c != ',' && *c != ' ' && *c != '_').collect();
    if cleaned.is_empty() {
        return Err("required: enter a number such as 1250.50".into());
    }
    Decimal::from_str(&cleaned).or_else(|_| Decimal::from_scientific(&cleaned)).map(|d| d.normalize()).map_err(|_| {
        format!("not a number: {:?}; enter digits with an optional decimal point, e.g. 1250.50", value.trim())
    })
}

/// Parse a percentage typed by a person (`8.5` means 8.5 %) into a fraction (`0.085`).
pub fn parse_percent(value: &str) -> Result<Decimal, String> {
    let v = value.trim().trim_end_matches('%');
    parse_decimal(v).map(|d| (d / Decimal::ONE_HUNDRED).normalize())
}

#[cfg(test)]
mod tests {
    use super::*;
    use rust_decimal::dec;

    #[test]
    fn money_reads_like_a_report() {
        assert_eq!(Money(dec!(-1234567.005)).to_string(), "-1,234,567.01");
        assert_eq!(Money(dec!(999.994)).to_string(), "999.99");
        assert_eq!(Money(dec!(-0.001)).to_string(), "0.00");
        assert_eq!(Money(dec!(100)).to_string(), "100.00");
    }

    #[test]
    fn percent_and_decimal_parsing() {
        assert_eq!(parse_percent("8.5 %"), Ok(dec!(0.085)));
        assert_eq!(parse_decimal("12,500.00"), Ok(dec!(12500)));
        assert!(parse_decimal("twelve").is_err());
        assert_eq!(Percent(0.0825).to_string(), "8.25 %");
        assert_eq!(quantity(&dec!(42000)), "42,000");
        assert_eq!(quantity(&dec!(1234.50)), "1,234.5");
    }
}
