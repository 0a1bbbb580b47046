//! Readiness: a zone's weighted score on a few criteria, shown beside its money figures. Money
//! decides the capital-budget choice; readiness can only filter candidates out of it.

use super::FieldErrors;
use serde::Serialize;
use std::collections::HashMap;

/// Lowest and highest score a criterion takes.
pub const SCORE_RANGE: std::ops::RangeInclusive<u8> = 1..=5;
/// Largest weight the admin can give a criterion.
pub const MAX_WEIGHT: u8 = 10;

/// One readiness criterion.
#[derive(Debug, Clone, Serialize)]
pub struct Criterion {
    /// Row id.
    pub id: i64,
    /// Stable key (scenario files and form fields use it).
    pub key: String,
    /// Words for people.
    pub label: String,
    /// What 1 and 5 mean.
    pub hint: String,
    /// Relative weight, 0 to [`MAX_WEIGHT`].
    pub weight: u8,
}

/// A zone's weighted readiness.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Readiness {
    /// Weighted mean of the scores given, 1 to 5.
    pub score: f64,
    /// Criteria scored.
    pub rated: usize,
    /// Criteria with a weight above zero.
    pub of: usize,
}

impl Readiness {
    /// `sum(w_i * s_i) / sum(w_i)` over the criteria with a weight and a score; `None` when none
    /// of the weighted criteria is scored.
    pub fn weighted(criteria: &[Criterion], scores: &HashMap<i64, u8>) -> Option<Self> {
        // No allocation: the portfolio weighs every zone on each recomputation.
        let (mut sum, mut weights, mut rated, mut of) = (0.0, 0.0, 0, 0);
        for c in criteria.iter().filter(|c| c.weight > 0) {
            of += 1;
            if let Some(&s) = scores.get(&c.id) {
                sum += f64::from(c.weight) * f64::from(s);
                weights += f64::from(c.weight);
                rated += 1;
            }
        }
        (rated > 0).then(|| Self { score: sum / weights, rated, of })
    }

    /// Whether every weighted criterion is scored.
    pub fn complete(&self) -> bool {
        self.rated == self.of
    }
}

/// Parse a form of `score_<key>` fields: `1` to `5`, or empty for "not scored".
pub fn parse_scores(
    criteria: &[Criterion],
    form: &HashMap<String, String>,
) -> Result<Vec<(i64, Option<u8>)>, FieldErrors> {
    let mut e = FieldErrors::default();
    let mut out = Vec::with_capacity(criteria.len());
    for c in criteria {
        let field = format!("score_{}", c.key);
        let value = form.get(&field).map_or("", |v| v.trim());
        if value.is_empty() {
            out.push((c.id, None));
            continue;
        }
        let (lo, hi) = (*SCORE_RANGE.start(), *SCORE_RANGE.end());
        match super::read_whole(value, lo.into(), hi.into()) {
            Ok(s) => out.push((c.id, u8::try_from(s).ok())),
            Err(msg) => e.push(field, format!("{msg}; or leave it empty")),
        }
    }
    e.into_result(|| out)
}

/// Parse a form of `weight_<key>` fields, each `0` to [`MAX_WEIGHT`]; at least one above zero.
pub fn parse_weights(criteria: &[Criterion], form: &HashMap<String, String>) -> Result<Vec<(i64, u8)>, FieldErrors> {
    let mut e = FieldErrors::default();
    let mut out = Vec::with_capacity(criteria.len());
    for c in criteria {
        let field = format!("weight_{}", c.key);
        match super::read_whole(form.get(&field).map_or("", String::as_str), 0, MAX_WEIGHT.into()) {
            Ok(w) => out.push((c.id, u8::try_from(w).unwrap_or(MAX_WEIGHT))),
            Err(msg) => e.push(field, msg),
        }
    }
    if e.is_empty() && out.iter().all(|(_, w)| *w == 0) {
        e.push("weights", "give at least one criterion a weight above zero");
    }
    e.into_result(|| out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn criteria() -> Vec<Criterion> {
        [("a", 3), ("b", 1), ("c", 0)]
            .iter()
            .enumerate()
            .map(|(i, (k, w))| Criterion {
                id: i as i64 + 1,
                key: (*k).into(),
                label: k.to_uppercase(),
                hint: String::new(),
                weight: *w,
            })
            .collect()
    }

    #[test]
    fn weighted_mean_over_scored_weighted_criteria() {
        let c = criteria();
        let all = HashMap::from([(1, 5), (2, 1), (3, 1)]);
        // (3 * 5 + 1 * 1) / 4 = 4; the zero-weight criterion does not count.
        assert_eq!(Readiness::weighted(&c, &all), Some(Readiness { score: 4.0, rated: 2, of: 2 }));
        let part = HashMap::from([(2, 2)]);
        let r = Readiness::weighted(&c, &part);
        assert_eq!(r.map(|r| (r.score, r.complete())), Some((2.0, false)));
        assert_eq!(Readiness::weighted(&c, &HashMap::from([(3, 4)])), None);
    }

    #[test]
    fn forms_name_the_bad_field() {
        let c = criteria();
        let form = HashMap::from([("score_a".to_string(), "6".to_string()), ("score_b".into(), "".into())]);
        let e = parse_scores(&c, &form).err().unwrap_or_default();
        assert_eq!(
            e.get("score_a"),
            Some("\"6\" is outside 1 to 5: enter a whole number from 1 to 5; or leave it empty")
        );
        // Scores and weights go through the one whole-number reader: a sign is refused.
        let form = HashMap::from([("score_a".to_string(), "+3".to_string())]);
        let e = parse_scores(&c, &form).err().unwrap_or_default();
        assert_eq!(
            e.get("score_a"),
            Some(
                "\"+3\" is not a whole number from 1 to 5: enter digits only (no sign, grouping or decimals); or leave it empty"
            )
        );
        let form = HashMap::from([("score_a".to_string(), " 3 ".to_string())]);
        assert_eq!(parse_scores(&c, &form).ok(), Some(vec![(1, Some(3)), (2, None), (3, None)]));
        let w = HashMap::from([
            ("weight_a".to_string(), "+2".to_string()),
            ("weight_b".into(), "2".into()),
            ("weight_c".into(), "0".into()),
        ]);
        let e = parse_weights(&c, &w).err().unwrap_or_default();
        assert_eq!(
            e.get("weight_a"),
            Some("\"+2\" is not a whole number from 0 to 10: enter digits only (no sign, grouping or decimals)")
        );
        assert_eq!(e.get("weight_b"), None);
        let w = HashMap::from([
            ("weight_a".to_string(), "0".to_string()),
            ("weight_b".into(), "0".into()),
            ("weight_c".into(), "0".into()),
        ]);
        assert!(parse_weights(&c, &w).err().unwrap_or_default().get("weights").is_some());
        let w = HashMap::from([("weight_a".to_string(), "11".to_string())]);
        let e = parse_weights(&c, &w).err().unwrap_or_default();
        assert!(e.get("weight_a").is_some() && e.get("weight_b").is_some());
    }
}
