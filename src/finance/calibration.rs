//! Reference-class calibration: how much of what was expected did past pilots deliver, per kind
//! of benefit, and how far to trust that.
//!
//! # The rule
//! For one kind of driver (energy, scrap ...), the evidence is every driver of that kind in the
//! baselines of measuring and closed zones: expected and measured money to date, and the number
//! of months with an expected benefit so far. With `E` and `M` the sums of expected and measured
//! money and `n` the sum of those months (driver-months):
//!
//! - raw ratio `r = max(0, M / E)`;
//! - credibility `Z = n / (n + K)` with `K` = [`PRIOR_MONTHS`] driver-months;
//! - factor `f = Z * r + (1 - Z) * 1`.
//!
//! So little evidence leaves the forecast almost as entered (`f` near 1), and a long record moves
//! it toward what was measured. A kind with no evidence (or nothing expected yet) keeps
//! `f = 1`. Calibrated NPV multiplies each driver's quantity by its kind's factor.
//!
//! # References
//! Reference-class forecasting: Kahneman and Lovallo, "Timid choices and bold forecasts",
//! *Management Science* 39(1), 1993; Flyvbjerg, "From Nobel Prize to project management:
//! getting risks right", *Project Management Journal* 37(3), 2006. The credibility weight
//! `n / (n + K)` is Bühlmann's, "Experience rating and credibility", *ASTIN Bulletin* 4(3), 1967
//! (citations from memory). `K` = 12 is our choice: a year of one driver's evidence counts half.

/// Driver-months of evidence that weigh as much as the forecast itself.
pub const PRIOR_MONTHS: f64 = 12.0;

/// One past driver's record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Evidence {
    /// Money expected to date.
    pub expected: f64,
    /// Money measured to date.
    pub measured: f64,
    /// Months with an expected benefit so far.
    pub months: u32,
}

/// A calibration factor and where it came from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Factor {
    /// `f`, applied to the quantities.
    pub factor: f64,
    /// `M / E` before shrinking (`None` without evidence).
    pub raw: Option<f64>,
    /// `Z`, the weight given to the evidence.
    pub credibility: f64,
    /// Drivers that gave evidence.
    pub drivers: usize,
    /// Driver-months of evidence.
    pub months: u32,
}

impl Factor {
    /// No evidence: the forecast stands.
    pub const NONE: Factor = Factor { factor: 1.0, raw: None, credibility: 0.0, drivers: 0, months: 0 };
}

/// The factor for one kind from its evidence (see the [module docs](self)).
///
/// # Example
/// ```
/// use pilot_ledger::finance::calibration::{Evidence, factor};
///
/// // Two energy drivers measured 60 % of what was expected over 12 months each.
/// let f = factor(&[Evidence { expected: 1000.0, measured: 600.0, months: 12 }; 2]);
/// assert_eq!(f.raw, Some(0.6));
/// assert!((f.credibility - 24.0 / 36.0).abs() < 1e-12);
/// assert!((f.factor - (0.6 * 24.0 + 12.0) / 36.0).abs() < 1e-12);
/// ```
pub fn factor(evidence: &[Evidence]) -> Factor {
    let useful: Vec<&Evidence> = evidence.iter().filter(|e| e.months > 0 && e.expected > 0.0).collect();
    let expected: f64 = useful.iter().map(|e| e.expected).sum();
    if useful.is_empty() || expected <= 0.0 {
        return Factor::NONE;
    }
    let measured: f64 = useful.iter().map(|e| e.measured).sum();
    let months: u32 = useful.iter().map(|e| e.months).sum();
    let raw = (measured / expected).max(0.0);
    let z = f64::from(months) / (f64::from(months) + PRIOR_MONTHS);
    Factor { factor: z * raw + (1.0 - z), raw: Some(raw), credibility: z, drivers: useful.len(), months }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_evidence_keeps_the_forecast() {
        assert_eq!(factor(&[]), Factor::NONE);
        assert_eq!(factor(&[Evidence { expected: 0.0, measured: 50.0, months: 3 }]), Factor::NONE);
        assert_eq!(factor(&[Evidence { expected: 10.0, measured: 50.0, months: 0 }]), Factor::NONE);
    }

    #[test]
    fn money_weighted_and_never_negative() {
        let f = factor(&[
            Evidence { expected: 3000.0, measured: 3000.0, months: 6 },
            Evidence { expected: 1000.0, measured: 0.0, months: 6 },
        ]);
        assert_eq!(f.raw, Some(0.75));
        assert!((f.factor - (0.5 * 0.75 + 0.5)).abs() < 1e-12);
        let reversed = factor(&[Evidence { expected: 100.0, measured: -40.0, months: 12 }]);
        assert_eq!(reversed.raw, Some(0.0));
        assert!((reversed.factor - 0.5).abs() < 1e-12);
    }
}
