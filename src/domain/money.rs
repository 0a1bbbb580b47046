//! Money and percentages: exact decimals with a controller's-report display in the format of
//! the request being answered ([`NumberFormat::current`]).

use super::NumberFormat;
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};
use std::fmt;

/// An amount of the site's currency, exact. Displays with thousands separators, two decimals
/// and a leading minus sign (`-12,345.60`, or `-12.345,60` on a decimal-comma site); the
/// currency code is shown once per table instead.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Default, Serialize, Deserialize)]
#[serde(transparent)]
pub struct Money(pub Decimal);

impl fmt::Display for Money {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&NumberFormat::current().write(self.0, 2))
    }
}

/// A fraction shown as a percentage with two decimals (`0.0825` -> `8.25 %`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Percent(pub f64);

impl fmt::Display for Percent {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let pct = Decimal::from_f64_retain(self.0 * 100.0).unwrap_or_default();
        write!(f, "{} %", NumberFormat::current().write(pct, 2))
    }
}

/// A stored fraction as a percentage for display (`0.025` -> `2.5 %`); templates call it.
pub fn pct(fraction: &Decimal) -> String {
    format!("{} %", NumberFormat::current().write_quantity(fraction * Decimal::ONE_HUNDRED))
}

/// A stored amount as [`Money`] text; templates call it.
pub fn money(value: &Decimal) -> String {
    Money(*value).to_string()
}

/// A quantity with thousands separators and the decimals it has (`42000` -> `42,000`).
pub fn quantity(value: &Decimal) -> String {
    NumberFormat::current().write_quantity(*value)
}

/// A count (trials, entries) with thousands separators (`10000` -> `10,000`).
pub fn count(n: &usize) -> String {
    quantity(&Decimal::from(*n))
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
        assert_eq!(Percent(0.0825).to_string(), "8.25 %");
        assert_eq!(quantity(&dec!(42000)), "42,000");
        assert_eq!(quantity(&dec!(1234.50)), "1,234.5");
        assert_eq!(count(&10_000), "10,000");
        assert_eq!(count(&0), "0");
    }

    #[tokio::test]
    async fn a_decimal_comma_request_writes_its_format() {
        let text = NumberFormat::DecimalComma
            .scope(async { format!("{} {} {}", Money(dec!(-1234567.005)), Percent(0.0825), pct(&dec!(0.025))) })
            .await;
        assert_eq!(text, "-1.234.567,01 8,25 % 2,5 %");
    }
}
