//! The one number reader and writer. Every number typed into a form, a CSV cell, a scenario
//! file or a JSON body is read by [`read`] in the format of its way in; nothing parses a
//! number any other way.
//!
//! A site declares one of two formats: a decimal point with comma grouping (`1,250.75`) or a
//! decimal comma with point grouping (`1.250,75`). Both also accept a space, a no-break space
//! (U+00A0) or a narrow no-break space (U+202F) between groups. The JSON API reads
//! [`NumberFormat::Plain`]: a decimal point and no grouping. Anything that could mean two
//! numbers (`1,5` on a decimal-point site) or that is not well formed is refused with what
//! would be accepted.
//!
//! Pages write numbers through `Display` of `Money` and `Percent` and through `quantity` and
//! `pct`, which use the format of the request being answered ([`NumberFormat::current`], set
//! by the web layer for each request with [`NumberFormat::scope`]); outside a request they write
//! the decimal-point format.

use rust_decimal::{Decimal, RoundingStrategy};
use serde::Serialize;
use std::future::Future;

/// How numbers are written and read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum NumberFormat {
    /// Decimal point, comma grouping: `1,250.75`.
    #[default]
    DecimalPoint,
    /// Decimal comma, point grouping: `1.250,75`.
    DecimalComma,
    /// The JSON API's: decimal point, no grouping: `1250.75`.
    Plain,
}

const SPACES: [char; 3] = [' ', '\u{a0}', '\u{202f}'];

tokio::task_local! {
    static CURRENT: NumberFormat;
}

impl NumberFormat {
    /// The formats a site can declare.
    pub const SITE: [Self; 2] = [Self::DecimalPoint, Self::DecimalComma];

    /// Stored and scenario-file spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::DecimalPoint => "decimal_point",
            Self::DecimalComma => "decimal_comma",
            Self::Plain => "plain",
        }
    }

    /// Parse a site's format by its spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        match value.trim() {
            "decimal_point" => Ok(Self::DecimalPoint),
            "decimal_comma" => Ok(Self::DecimalComma),
            _ => Err("decimal_point (1,250.75) or decimal_comma (1.250,75)".into()),
        }
    }

    /// How the settings form names it.
    pub fn label(self) -> &'static str {
        match self {
            Self::DecimalPoint => "1,250.75 (decimal point)",
            Self::DecimalComma => "1.250,75 (decimal comma)",
            Self::Plain => "1250.75 (plain)",
        }
    }

    /// The decimal separator.
    pub fn decimal(self) -> char {
        match self {
            Self::DecimalComma => ',',
            Self::DecimalPoint | Self::Plain => '.',
        }
    }

    /// The grouping character pages write, if any.
    fn group(self) -> Option<char> {
        match self {
            Self::DecimalPoint => Some(','),
            Self::DecimalComma => Some('.'),
            Self::Plain => None,
        }
    }

    fn is_group(self, c: char) -> bool {
        self.group().is_some_and(|g| g == c || SPACES.contains(&c))
    }

    /// An example in this format, for messages.
    pub fn example(self) -> &'static str {
        match self {
            Self::DecimalPoint => "1,250.75",
            Self::DecimalComma => "1.250,75",
            Self::Plain => "1250.75",
        }
    }

    /// What this format accepts, for messages.
    fn accepts(self) -> &'static str {
        match self {
            Self::DecimalPoint => {
                "digits with a decimal point, grouped in threes by comma or space or not at all, e.g. 1,250.75 or 1250.75"
            }
            Self::DecimalComma => {
                "digits with a decimal comma, grouped in threes by point or space or not at all, e.g. 1.250,75 or 1250,75"
            }
            Self::Plain => "a plain decimal: digits with a decimal point and no grouping, e.g. 1250.75",
        }
    }

    /// The other site format.
    fn other(self) -> Option<Self> {
        match self {
            Self::DecimalPoint => Some(Self::DecimalComma),
            Self::DecimalComma => Some(Self::DecimalPoint),
            Self::Plain => None,
        }
    }

    /// Read a number typed in this format (see the module docs).
    pub fn read(self, text: &str) -> Result<Decimal, String> {
        let t = text.trim();
        if t.is_empty() {
            return Err(format!("required: enter a number such as {}", self.example()));
        }
        self.read_strict(t).map_err(|reason| {
            // Say so when the text is a well-formed number of the other site format.
            let written_other = self
                .other()
                .filter(|o| {
                    !matches!(reason, Refusal::Ambiguous(_) | Refusal::LeadingZero(_)) && t.contains(o.decimal())
                })
                .filter(|o| o.read_strict(t).is_ok());
            match (written_other, reason) {
                (Some(o), _) => format!(
                    "{t:?} is written with a decimal {}; this site writes {}",
                    if o.decimal() == ',' { "comma" } else { "point" },
                    self.accepts()
                ),
                (None, Refusal::Ambiguous(options)) => {
                    format!("{t:?} is ambiguous here (groups of thousands have three digits): use {options}")
                }
                (None, Refusal::TwoDecimals) => format!(
                    "{t:?} has more than one decimal {}; enter {}",
                    if self.decimal() == ',' { "comma" } else { "point" },
                    self.accepts()
                ),
                (None, Refusal::Mixed) => format!("{t:?} mixes grouping characters; enter {}", self.accepts()),
                (None, Refusal::Grouping) => {
                    format!("{t:?} is not grouped in threes; enter {}", self.accepts())
                }
                (None, Refusal::LeadingZero(options)) => {
                    format!("{t:?} is ambiguous here (a group of thousands cannot follow a leading 0): use {options}")
                }
                (None, Refusal::TooLong) => format!(
                    "{t:?} has more digits than can be kept exactly: at most 28 significant digits, 28 after the decimal {}",
                    if self.decimal() == ',' { "comma" } else { "point" }
                ),
                (None, Refusal::NotANumber) => format!("not a number: {t:?}; enter {}", self.accepts()),
            }
        })
    }

    fn read_strict(self, t: &str) -> Result<Decimal, Refusal> {
        let (negative, body) = match t.strip_prefix('-') {
            Some(rest) => (true, rest),
            None => (false, t.strip_prefix('+').unwrap_or(t)),
        };
        if body.is_empty() || !body.chars().all(|c| c.is_ascii_digit() || c == self.decimal() || self.is_group(c)) {
            return Err(Refusal::NotANumber);
        }
        if body.matches(self.decimal()).count() > 1 {
            return Err(Refusal::TwoDecimals);
        }
        let (int, frac) = body.split_once(self.decimal()).unwrap_or((body, ""));
        if (body.contains(self.decimal()) && frac.is_empty()) || !frac.chars().all(|c| c.is_ascii_digit()) {
            return Err(Refusal::NotANumber);
        }
        // Options offered in messages keep the sign typed.
        let sign = if negative { "-" } else { "" };
        let mut seps = int.chars().filter(|c| !c.is_ascii_digit());
        let digits: String = match seps.next() {
            None if int.is_empty() && frac.is_empty() => return Err(Refusal::NotANumber),
            None if int.is_empty() => "0".to_string(),
            None => int.to_string(),
            Some(sep) => {
                if seps.any(|c| c != sep) {
                    return Err(Refusal::Mixed);
                }
                let groups: Vec<&str> = int.split(sep).collect();
                // `1,5` on a decimal-point site: a decimal comma or a slip in `1,500`?
                if let [head, tail] = groups.as_slice()
                    && Some(sep) == self.group()
                    && frac.is_empty()
                    && !head.is_empty()
                    && tail.len() != 3
                    && !tail.is_empty()
                {
                    let mut options = format!("{sign}{head}{}{tail}", self.decimal());
                    // The thousands reading only when its first group is a valid one (`0,500`
                    // is not).
                    if tail.len() < 3 && head.len() <= 3 && !head.starts_with('0') {
                        options.push_str(&format!(" or {sign}{head}{sep}{tail:0<3}"));
                    }
                    return Err(Refusal::Ambiguous(options));
                }
                // `0,500` is no thousands figure: most likely a decimal of the other format.
                if groups.len() > 1 && groups.first().is_some_and(|g| g.starts_with('0')) {
                    let whole = groups.concat();
                    let whole = whole.trim_start_matches('0');
                    let whole = if whole.is_empty() { "0" } else { whole };
                    let whole =
                        if frac.is_empty() { whole.to_string() } else { format!("{whole}{}{frac}", self.decimal()) };
                    let options = match groups.as_slice() {
                        [head, tail] if frac.is_empty() => {
                            format!("{sign}{head}{}{tail} or {sign}{whole}", self.decimal())
                        }
                        _ => format!("{sign}{whole}"),
                    };
                    return Err(Refusal::LeadingZero(options));
                }
                let well_formed = groups.first().is_some_and(|g| (1..=3).contains(&g.len()))
                    && groups.iter().skip(1).all(|g| g.len() == 3);
                if !well_formed {
                    return Err(Refusal::Grouping);
                }
                groups.concat()
            }
        };
        // Zeros that change no value are dropped first, so that only significant digits count
        // against Decimal's 28; `from_str_exact` refuses what `from_str` would round.
        let digits = digits.trim_start_matches('0');
        let frac = frac.trim_end_matches('0');
        let digits = if digits.is_empty() { "0" } else { digits };
        // No `.0` for a whole number: its scale would cost a digit of the 29 at Decimal::MAX.
        let plain = if frac.is_empty() { format!("{sign}{digits}") } else { format!("{sign}{digits}.{frac}") };
        Decimal::from_str_exact(&plain).map(|d| d.normalize()).map_err(|_| Refusal::TooLong)
    }

    /// Read a percentage (`8.5` or `8.5 %` means 8.5 %) into a fraction (`0.085`).
    pub fn read_percent(self, text: &str) -> Result<Decimal, String> {
        let v = text.trim().trim_end_matches('%');
        self.read(v).map(|d| (d / Decimal::ONE_HUNDRED).normalize())
    }

    /// Write `value` rounded half away from zero to `dp` decimals, grouped in threes (the
    /// plain format does not group).
    pub fn write(self, value: Decimal, dp: u32) -> String {
        let rounded = value.round_dp_with_strategy(dp, RoundingStrategy::MidpointAwayFromZero);
        let text = format!("{:.*}", dp as usize, rounded.abs());
        let (int, frac) = text.split_once('.').unwrap_or((text.as_str(), ""));
        let mut out = String::with_capacity(text.len() + int.len() / 3 + 1);
        if rounded.is_sign_negative() && !rounded.is_zero() {
            out.push('-');
        }
        for (i, ch) in int.chars().enumerate() {
            if let Some(g) = self.group()
                && i > 0
                && (int.len() - i) % 3 == 0
            {
                out.push(g);
            }
            out.push(ch);
        }
        if !frac.is_empty() {
            out.push(self.decimal());
            out.push_str(frac);
        }
        out
    }

    /// Write a quantity with the decimals it has (`1250.50` -> `1,250.5`).
    pub fn write_quantity(self, value: Decimal) -> String {
        let v = value.normalize();
        self.write(v, v.scale())
    }

    /// Write `value` in compact units for axes and narrow cells: `k` (thousand), `M` (million),
    /// `bn` (billion, 10^9) and `tn` (trillion, 10^12), short scale. Below 1,000 the value is
    /// written rounded to two decimals with the decimals it has (`250`, `2.5`). From 1,000 on
    /// it takes the largest unit it reaches and is rounded half away from zero to one decimal
    /// below 100 of that unit and to none from 100 on (`1.2 M`, `14.2 bn`, `350 k`); a value
    /// that rounds up to 1,000 of a unit is written in the next one (`999,950` is `1.0 M`, not
    /// `1000 k`). Beyond the trillions it stays in `tn`, grouped (`14,207 tn`). The decimal
    /// separator and grouping are this format's; the exact figure belongs beside it.
    pub fn write_compact(self, value: Decimal) -> String {
        const UNITS: [(u32, &str); 4] = [(3, "k"), (6, "M"), (9, "bn"), (12, "tn")];
        let a = value.abs();
        let sign = if value.is_sign_negative() && !value.is_zero() { "-" } else { "" };
        let Some(mut unit) = UNITS.iter().rposition(|(p, _)| a >= Decimal::from(10_u64.pow(*p))) else {
            let small = self.write_quantity(value.round_dp_with_strategy(2, RoundingStrategy::MidpointAwayFromZero));
            return if small == "-0" { "0".into() } else { small };
        };
        loop {
            let (p, name) = UNITS[unit];
            let scaled = a / Decimal::from(10_u64.pow(p));
            let one = scaled.round_dp_with_strategy(1, RoundingStrategy::MidpointAwayFromZero);
            let (rounded, dp) = if one < Decimal::ONE_HUNDRED {
                (one, 1)
            } else {
                (scaled.round_dp_with_strategy(0, RoundingStrategy::MidpointAwayFromZero), 0)
            };
            if rounded >= Decimal::ONE_THOUSAND && unit + 1 < UNITS.len() {
                unit += 1;
                continue;
            }
            return format!("{sign}{} {name}", self.write(rounded, dp));
        }
    }

    /// A plain decimal text (`-1250.5`, as the API writes it) with this format's decimal
    /// separator and no grouping: CSV cells, which the importer reads back.
    pub fn export(self, plain: &str) -> String {
        plain.replace('.', &self.decimal().to_string())
    }

    /// The CSV field delimiter that goes with this format: `;` beside a decimal comma.
    pub fn csv_delimiter(self) -> u8 {
        match self {
            Self::DecimalComma => b';',
            Self::DecimalPoint | Self::Plain => b',',
        }
    }

    /// The format of the request being answered; the decimal-point format outside one.
    pub fn current() -> Self {
        CURRENT.try_with(|f| *f).unwrap_or_default()
    }

    /// Run `work` with this as the [`current`](Self::current) format.
    pub async fn scope<F: Future>(self, work: F) -> F::Output {
        CURRENT.scope(self, work).await
    }

    /// Run the blocking `work` with this as the [`current`](Self::current) format (work moved
    /// off the async threads does not inherit the request's task-local format).
    pub fn sync_scope<T>(self, work: impl FnOnce() -> T) -> T {
        CURRENT.sync_scope(self, work)
    }
}

/// Why a text is not a number of a format.
enum Refusal {
    NotANumber,
    TwoDecimals,
    Mixed,
    Grouping,
    /// What would be accepted instead.
    Ambiguous(String),
    /// A grouped number whose first group starts with 0; what would be accepted instead.
    LeadingZero(String),
    /// More significant digits than a Decimal holds exactly.
    TooLong,
}

/// Read `text` in `format`: the one number reader (see the module docs).
pub fn read(text: &str, format: NumberFormat) -> Result<Decimal, String> {
    format.read(text)
}

/// Read a whole number in `min..=max` typed as digits only: no sign, no grouping, no decimals,
/// in every format (counts, scores, weights, seeds: small enough to type ungrouped, and a seed
/// is an identifier that grouping would only disguise).
pub fn read_whole(text: &str, min: u64, max: u64) -> Result<u64, String> {
    let t = text.trim();
    if t.is_empty() {
        return Err(format!("required: a whole number from {min} to {max}"));
    }
    if !t.chars().all(|c| c.is_ascii_digit()) {
        return Err(format!(
            "{t:?} is not a whole number from {min} to {max}: enter digits only (no sign, grouping or decimals)"
        ));
    }
    // Only digits are left, so a failure is a value past u64.
    match t.parse::<u64>() {
        Ok(n) if (min..=max).contains(&n) => Ok(n),
        _ => Err(format!("{t:?} is outside {min} to {max}: enter a whole number from {min} to {max}")),
    }
}

/// [`read_whole`] for a count that fits `u32`.
pub fn read_count(text: &str, min: u32, max: u32) -> Result<u32, String> {
    read_whole(text, min.into(), max.into()).map(|n| u32::try_from(n).unwrap_or(max))
}

/// Read a percentage typed in `format` into a fraction.
pub fn read_percent(text: &str, format: NumberFormat) -> Result<Decimal, String> {
    format.read_percent(text)
}

#[cfg(test)]
mod tests {
    use super::NumberFormat::{DecimalComma as Comma, DecimalPoint as Point, Plain};
    use super::*;
    use proptest::prelude::*;
    use rust_decimal::dec;

    #[test]
    fn accepted_inputs() {
        let table = [
            (Point, "1,250.75", dec!(1250.75)),
            (Point, "1250.75", dec!(1250.75)),
            (Point, "1 250.75", dec!(1250.75)),
            (Point, "1\u{202f}250\u{202f}000.5", dec!(1250000.5)),
            (Point, "1\u{a0}250", dec!(1250)),
            (Point, "-12,000.50", dec!(-12000.5)),
            (Point, "1,250", dec!(1250)),
            (Point, "+3", dec!(3)),
            (Point, ".5", dec!(0.5)),
            (Point, "  42 ", dec!(42)),
            (Comma, "1.250,75", dec!(1250.75)),
            (Comma, "12000,50", dec!(12000.5)),
            (Comma, "1 250,75", dec!(1250.75)),
            (Comma, "1\u{202f}250,75", dec!(1250.75)),
            (Comma, "1,5", dec!(1.5)),
            (Comma, "1.250", dec!(1250)),
            (Comma, "-0,25", dec!(-0.25)),
            (Plain, "1250.75", dec!(1250.75)),
            (Plain, "-0.001", dec!(-0.001)),
            (Plain, "7", dec!(7)),
        ];
        for (format, text, expected) in table {
            assert_eq!(format.read(text), Ok(expected), "{format:?} {text:?}");
        }
    }

    #[test]
    fn refused_inputs() {
        let refused = [
            (Point, "1,5"),
            (Point, "1.250,75"),
            (Point, "1_000"),
            (Point, "1.2.3"),
            (Point, "1,250 000"),
            (Point, "12,34,567"),
            (Point, "1,2345"),
            (Point, "1."),
            (Point, "1e5"),
            (Point, "-"),
            (Point, "twelve"),
            (Point, "1.250.000"),
            (Comma, "1.5"),
            (Comma, "1,250.75"),
            (Comma, "1,2,3"),
            (Comma, "1.250 000,5"),
            (Comma, "1_000"),
            (Plain, "1,5"),
            (Plain, "1,500"),
            (Plain, "1 500"),
            (Plain, "1.2.3"),
        ];
        for (format, text) in refused {
            assert!(format.read(text).is_err(), "{format:?} {text:?} was accepted: {:?}", format.read(text));
        }
    }

    #[test]
    fn refusals_say_what_would_be_accepted() {
        assert_eq!(Point.read(""), Err("required: enter a number such as 1,250.75".into()));
        assert_eq!(
            Point.read("1,5"),
            Err("\"1,5\" is ambiguous here (groups of thousands have three digits): use 1.5 or 1,500".into())
        );
        assert_eq!(
            Point.read("12000,50"),
            Err("\"12000,50\" is ambiguous here (groups of thousands have three digits): use 12000.50".into())
        );
        assert_eq!(
            Comma.read("1.5"),
            Err("\"1.5\" is ambiguous here (groups of thousands have three digits): use 1,5 or 1.500".into())
        );
        assert_eq!(
            Point.read("1.250,75"),
            Err("\"1.250,75\" is written with a decimal comma; this site writes digits with a decimal point, \
                 grouped in threes by comma or space or not at all, e.g. 1,250.75 or 1250.75"
                .into())
        );
        assert_eq!(
            Point.read("1_000"),
            Err("not a number: \"1_000\"; enter digits with a decimal point, grouped in threes by comma or space \
                 or not at all, e.g. 1,250.75 or 1250.75"
                .into())
        );
        assert_eq!(
            Comma.read("1,2,3"),
            Err("\"1,2,3\" has more than one decimal comma; enter digits with a decimal comma, grouped in threes \
                 by point or space or not at all, e.g. 1.250,75 or 1250,75"
                .into())
        );
        assert_eq!(
            Comma.read("1.250 000,5"),
            Err("\"1.250 000,5\" mixes grouping characters; enter digits with a decimal comma, grouped in threes \
                 by point or space or not at all, e.g. 1.250,75 or 1250,75"
                .into())
        );
        assert_eq!(
            Plain.read("1,5"),
            Err("not a number: \"1,5\"; enter a plain decimal: digits with a decimal point and no grouping, e.g. 1250.75"
                .into())
        );
    }

    #[test]
    fn a_leading_zero_group_is_refused_not_read_a_thousand_times_larger() {
        // Positive controls: a plain leading zero and real thousands are read.
        assert_eq!(Point.read("0.500"), Ok(dec!(0.5)));
        assert_eq!(Comma.read("0,250"), Ok(dec!(0.25)));
        assert_eq!(Point.read("1,500"), Ok(dec!(1500)));
        assert_eq!(Point.read("0500"), Ok(dec!(500)));
        assert_eq!(
            Point.read("0,500"),
            Err("\"0,500\" is ambiguous here (a group of thousands cannot follow a leading 0): use 0.500 or 500".into())
        );
        assert_eq!(
            Comma.read("0.250"),
            Err("\"0.250\" is ambiguous here (a group of thousands cannot follow a leading 0): use 0,250 or 250".into())
        );
        assert_eq!(
            Point.read("0 500,000.5"),
            Err("\"0 500,000.5\" mixes grouping characters; enter digits with a decimal point, grouped in threes by \
                 comma or space or not at all, e.g. 1,250.75 or 1250.75"
                .into())
        );
        assert_eq!(
            Point.read("0,500,000.5"),
            Err("\"0,500,000.5\" is ambiguous here (a group of thousands cannot follow a leading 0): use 500000.5"
                .into())
        );
        // The hint for `0,5` offers no `0,500`.
        assert_eq!(
            Point.read("0,5"),
            Err("\"0,5\" is ambiguous here (groups of thousands have three digits): use 0.5".into())
        );
    }

    #[test]
    fn the_ambiguity_hint_keeps_the_sign() {
        assert_eq!(
            Point.read("-1,5"),
            Err("\"-1,5\" is ambiguous here (groups of thousands have three digits): use -1.5 or -1,500".into())
        );
        assert_eq!(
            Point.read("-0,500"),
            Err("\"-0,500\" is ambiguous here (a group of thousands cannot follow a leading 0): use -0.500 or -500"
                .into())
        );
        // Positive control: the same text read where it is well formed.
        assert_eq!(Comma.read("-1,5"), Ok(dec!(-1.5)));
    }

    #[test]
    fn more_digits_than_a_decimal_holds_are_refused_not_rounded() {
        // 28 significant digits are kept exactly; `Decimal::from_str` rounds the 30-digit text to 1.
        assert_eq!(Point.read("1.000000000000000000000000001"), Ok(dec!(1.000000000000000000000000001)));
        assert_eq!(Point.read("79,228,162,514,264,337,593,543,950,335"), Ok(Decimal::MAX));
        // Zeros that change no value do not count.
        assert_eq!(Point.read("0001.5000000000000000000000000000000"), Ok(dec!(1.5)));
        let too_long = "has more digits than can be kept exactly: at most 28 significant digits, 28 after the decimal";
        assert_eq!(
            Point.read("1.00000000000000000000000000001"),
            Err(format!("\"1.00000000000000000000000000001\" {too_long} point"))
        );
        assert_eq!(
            Comma.read("79.228.162.514.264.337.593.543.950.336"),
            Err(format!("\"79.228.162.514.264.337.593.543.950.336\" {too_long} comma"))
        );
    }

    #[test]
    fn whole_numbers_are_digits_only() {
        assert_eq!(read_count("36", 1, 240), Ok(36));
        assert_eq!(read_count(" 007 ", 0, 10), Ok(7));
        assert_eq!(read_whole("18446744073709551615", 0, u64::MAX), Ok(u64::MAX));
        let digits_only = "enter digits only (no sign, grouping or decimals)";
        assert_eq!(
            read_count("+36", 1, 240),
            Err(format!("\"+36\" is not a whole number from 1 to 240: {digits_only}"))
        );
        assert_eq!(read_count("-1", 0, 240), Err(format!("\"-1\" is not a whole number from 0 to 240: {digits_only}")));
        assert_eq!(
            read_count("1,200", 1, 5000),
            Err(format!("\"1,200\" is not a whole number from 1 to 5000: {digits_only}"))
        );
        assert_eq!(read_count("3.0", 1, 5), Err(format!("\"3.0\" is not a whole number from 1 to 5: {digits_only}")));
        assert_eq!(
            read_count("241", 1, 240),
            Err("\"241\" is outside 1 to 240: enter a whole number from 1 to 240".into())
        );
        assert_eq!(
            read_whole("18446744073709551616", 0, u64::MAX),
            Err("\"18446744073709551616\" is outside 0 to 18446744073709551615: enter a whole number from 0 to \
                 18446744073709551615"
                .into())
        );
        assert_eq!(read_count(" ", 1, 240), Err("required: a whole number from 1 to 240".into()));
    }

    /// Expected texts: the rule in `write_compact`'s docs, worked by hand (short-scale unit
    /// names are common practice in finance reports).
    #[test]
    fn compact_units_and_their_rounding_boundaries() {
        let p = NumberFormat::DecimalPoint;
        let c = |v: i64| p.write_compact(Decimal::from(v));
        assert_eq!(c(0), "0");
        assert_eq!(c(250), "250");
        assert_eq!(c(999), "999");
        assert_eq!(c(1_000), "1.0 k");
        assert_eq!(c(1_250), "1.3 k");
        assert_eq!(c(99_949), "99.9 k");
        assert_eq!(c(99_950), "100 k");
        assert_eq!(c(350_000), "350 k");
        assert_eq!(c(999_499), "999 k");
        assert_eq!(c(999_500), "1.0 M");
        assert_eq!(c(999_950), "1.0 M");
        assert_eq!(c(1_200_000), "1.2 M");
        assert_eq!(c(14_206_745_464), "14.2 bn");
        assert_eq!(c(14_206_745_464_648), "14.2 tn");
        assert_eq!(c(999_999_999_999_999), "1,000 tn");
        assert_eq!(c(14_206_745_464_648_000), "14,207 tn");
        assert_eq!(c(-1_250), "-1.3 k");
        assert_eq!(c(-76_996), "-77.0 k");
        assert_eq!(c(-999_950), "-1.0 M");
        assert_eq!(c(-14_206_745_464_648), "-14.2 tn");
        assert_eq!(p.write_compact(Decimal::new(25, 1)), "2.5");
        assert_eq!(p.write_compact(Decimal::new(-125, 3)), "-0.13");
        assert_eq!(p.write_compact(Decimal::new(-1, 3)), "0");
        let comma = NumberFormat::DecimalComma;
        assert_eq!(comma.write_compact(Decimal::from(14_206_745_464_i64)), "14,2 bn");
        assert_eq!(comma.write_compact(Decimal::from(14_206_745_464_648_000_i64)), "14.207 tn");
        assert_eq!(comma.write_compact(Decimal::new(25, 1)), "2,5");
        assert_eq!(NumberFormat::Plain.write_compact(Decimal::from(14_206_745_464_648_000_i64)), "14207 tn");
    }

    #[test]
    fn writing_each_format() {
        assert_eq!(Point.write(dec!(-1234567.005), 2), "-1,234,567.01");
        assert_eq!(Comma.write(dec!(-1234567.005), 2), "-1.234.567,01");
        assert_eq!(Plain.write(dec!(-1234567.005), 2), "-1234567.01");
        assert_eq!(Comma.write_quantity(dec!(1250.750)), "1.250,75");
        assert_eq!(Comma.export("-1250.5"), "-1250,5");
        assert_eq!(Point.export("-1250.5"), "-1250.5");
        assert_eq!(Point.read_percent("8.5 %"), Ok(dec!(0.085)));
        assert_eq!(Comma.read_percent("8,5"), Ok(dec!(0.085)));
    }

    #[tokio::test]
    async fn the_current_format_is_the_request_scope() {
        assert_eq!(NumberFormat::current(), Point);
        let inside = Comma.scope(async { NumberFormat::current() }).await;
        assert_eq!(inside, Comma);
    }

    fn money() -> impl Strategy<Value = Decimal> {
        // Cents up to a trillion in size.
        (-100_000_000_000_000_i64..100_000_000_000_000_i64).prop_map(|cents| Decimal::new(cents, 2))
    }

    fn quantity() -> impl Strategy<Value = Decimal> {
        (-99_999_999_999_999_i64..99_999_999_999_999_i64, 0_u32..6).prop_map(|(n, scale)| Decimal::new(n, scale))
    }

    proptest! {
        #[test]
        fn money_written_reads_back(d in money()) {
            for f in [Point, Comma, Plain] {
                prop_assert_eq!(f.read(&f.write(d, 2)), Ok(d.normalize()));
                prop_assert_eq!(f.read(&f.export(&d.to_string())), Ok(d.normalize()));
            }
        }

        #[test]
        fn quantities_written_read_back(q in quantity()) {
            for f in [Point, Comma, Plain] {
                prop_assert_eq!(f.read(&f.write_quantity(q)), Ok(q.normalize()));
            }
        }
    }
}
