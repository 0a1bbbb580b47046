//! Approval rules: four eyes, returns with a comment, the settings an approved baseline keeps,
//! and the flags its pages show (one-person approval, a start before the approval date).
//!
//! Segregation of duties (a standard capital-approval control, common practice): whoever
//! submitted a version or last changed its content cannot approve it, unless the site allows
//! one-person approval; such a baseline says so wherever it is shown.

use super::{Month, SiteSettings, pct};
use rust_decimal::Decimal;
use serde::Serialize;

/// How a version came to be approved.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ApprovalKind {
    /// By someone who neither submitted nor last edited it.
    SecondPerson,
    /// By its submitter or editor, as the site's one-person setting allows.
    OnePerson,
    /// Loaded as approved from a scenario file.
    Scenario,
}

impl ApprovalKind {
    /// Stored spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::SecondPerson => "second_person",
            Self::OnePerson => "one_person",
            Self::Scenario => "scenario",
        }
    }

    /// Parse the stored spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        [Self::SecondPerson, Self::OnePerson, Self::Scenario]
            .into_iter()
            .find(|k| k.as_str() == value)
            .ok_or_else(|| "one of second_person, one_person, scenario".into())
    }
}

/// The settings an approved version's figures keep: those in force at its approval.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ApprovalSettings {
    /// Currency code.
    pub currency: String,
    /// Annual hurdle rate, fraction.
    pub hurdle_rate: Decimal,
    /// Tax rate, fraction, if the site had one.
    pub tax_rate: Option<Decimal>,
    /// Depreciation years, if set.
    pub depreciation_years: Option<u32>,
}

impl ApprovalSettings {
    /// The site's settings with these in place of today's figure settings.
    pub fn apply(&self, site: &SiteSettings) -> SiteSettings {
        SiteSettings {
            currency: self.currency.clone(),
            hurdle_rate: self.hurdle_rate,
            tax_rate: self.tax_rate,
            depreciation_years: self.depreciation_years,
            ..site.clone()
        }
    }

    /// What differs from today's settings, in words ("hurdle rate 9 % (today 10 %)").
    pub fn describe(&self, today: &SiteSettings) -> String {
        let mut parts = vec![
            changed("hurdle rate", pct(&self.hurdle_rate), pct(&today.hurdle_rate)),
            changed("currency", self.currency.clone(), today.currency.clone()),
        ];
        let tax = |t: Option<Decimal>| t.map_or_else(|| "none".to_string(), |t| pct(&t));
        parts.push(changed("tax rate", tax(self.tax_rate), tax(today.tax_rate)));
        let years = |y: Option<u32>| y.map_or_else(|| "not set".to_string(), |y| format!("{y} years"));
        parts.push(changed("depreciation", years(self.depreciation_years), years(today.depreciation_years)));
        parts.join(", ")
    }
}

fn changed(what: &str, then: String, now: String) -> String {
    if then == now { format!("{what} {then}") } else { format!("{what} {then} (today {now})") }
}

/// A version's review record: the latest edit, submission, approval and return.
#[derive(Debug, Clone, Default, PartialEq, Eq, Serialize)]
pub struct Review {
    /// Last change of the content (header or items).
    pub edited_at: Option<String>,
    /// Who made it.
    pub edited_by: Option<String>,
    /// Everyone who changed its content since it was created (its creator included).
    #[serde(skip)]
    pub editors: Vec<String>,
    /// Latest submission.
    pub submitted_at: Option<String>,
    /// Who submitted.
    pub submitted_by: Option<String>,
    /// The submitter's comment.
    pub submit_comment: String,
    /// Approval time.
    pub approved_at: Option<String>,
    /// Approver.
    pub approved_by: Option<String>,
    /// The approver's comment.
    pub approve_comment: String,
    /// How it was approved.
    pub approval_kind: Option<ApprovalKind>,
    /// Latest return to draft.
    pub returned_at: Option<String>,
    /// Who returned it.
    pub returned_by: Option<String>,
    /// Why (required).
    pub return_comment: String,
}

impl Review {
    /// Whether `actor` submitted or ever edited the version (names compare as the users table
    /// does, without case): a trivial last edit by someone else does not make the content's
    /// author a second person.
    pub fn is_author(&self, actor: &str) -> bool {
        [&self.submitted_by, &self.edited_by]
            .into_iter()
            .flatten()
            .chain(&self.editors)
            .any(|n| n.eq_ignore_ascii_case(actor))
    }

    /// The approval `actor` may give: four eyes, or one person where the site allows it.
    pub fn approval_by(&self, actor: &str, one_person_allowed: bool) -> Result<ApprovalKind, String> {
        match (self.is_author(actor), one_person_allowed) {
            (false, _) => Ok(ApprovalKind::SecondPerson),
            (true, true) => Ok(ApprovalKind::OnePerson),
            (true, false) => Err(
                "you submitted or last edited this version: a second person must approve it (segregation of duties)"
                    .into(),
            ),
        }
    }

    /// The note every page of a self-approved or loaded baseline shows.
    pub fn approval_note(&self) -> Option<String> {
        let by = self.approved_by.as_deref().unwrap_or("?");
        let at = self.approved_at.as_deref().map_or("", |a| a.get(..10).unwrap_or(a));
        match self.approval_kind? {
            ApprovalKind::SecondPerson => None,
            ApprovalKind::OnePerson => Some(format!(
                "Self-approved: {by} approved this version alone on {at} (the site allows one-person approval)."
            )),
            ApprovalKind::Scenario => {
                Some(format!("Approved in a scenario file loaded by {by} on {at}, without a second person."))
            }
        }
    }

    /// The flag of a baseline whose start month lies before the month of its approval.
    pub fn retroactive_note(&self, start: Month) -> Option<String> {
        let at = self.approved_at.as_deref()?;
        let approved = Month::parse(at.get(..7)?).ok()?;
        (start < approved).then(|| {
            format!(
                "Starts {start}, before its approval on {}: the months before approval were planned after the fact.",
                at.get(..10).unwrap_or(at)
            )
        })
    }
}

/// Longest comment kept on a version.
pub const MAX_COMMENT: usize = 2000;

/// An optional review comment, trimmed.
pub fn parse_comment(value: &str) -> Result<String, String> {
    let c = value.trim();
    if c.chars().count() > MAX_COMMENT {
        return Err(format!("at most {MAX_COMMENT} characters"));
    }
    Ok(c.to_string())
}

/// The comment a return needs: say what to change.
pub fn parse_return_comment(value: &str) -> Result<String, String> {
    let c = parse_comment(value)?;
    if c.is_empty() { Err("say why the version goes back, e.g. what to change".into()) } else { Ok(c) }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn review(submitted: &str, edited: &str) -> Review {
        Review { submitted_by: Some(submitted.into()), edited_by: Some(edited.into()), ..Review::default() }
    }

    #[test]
    fn the_submitter_and_the_editor_cannot_approve() {
        let r = review("lead-a", "lead-b");
        assert!(r.approval_by("Lead-A", false).is_err());
        assert!(r.approval_by("lead-b", false).is_err());
        assert_eq!(r.approval_by("lead-c", false), Ok(ApprovalKind::SecondPerson));
        assert_eq!(r.approval_by("lead-a", true), Ok(ApprovalKind::OnePerson));
    }

    #[test]
    fn a_return_needs_a_comment() {
        assert!(parse_return_comment("  ").is_err());
        assert_eq!(parse_return_comment(" add the spare parts "), Ok("add the spare parts".to_string()));
        assert!(parse_comment(&"x".repeat(MAX_COMMENT + 1)).is_err());
    }

    #[test]
    fn a_start_before_the_approval_month_is_flagged() {
        let r = Review { approved_at: Some("2025-06-10T08:00:00Z".into()), ..Review::default() };
        let month = |m: &str| Month::parse(m).unwrap_or_else(|e| panic!("{e}"));
        let flag = r.retroactive_note(month("2025-03"));
        assert_eq!(
            flag.as_deref(),
            Some(
                "Starts 2025-03, before its approval on 2025-06-10: the months before approval were planned after the fact."
            )
        );
        assert_eq!(r.retroactive_note(month("2025-06")), None);
    }
}
