//! A refused form's errors on its page: beside the form that caused them, and in a summary at
//! the top of the page that links to them.
//!
//! A page with several forms keeps one [`Problems`]; each form has an anchor id (`book-spending`,
//! `reverse-177`). `templates/macros.html` renders it twice: `error_summary` at the top of the
//! page (a link per form to `#<anchor>-problems`) and `form_problems` beside the form (the box
//! with that id); fields read their own message with [`Problems::errors`].

use crate::domain::FieldErrors;

/// What one refused form said.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct FormProblem {
    /// The form's anchor id on the page; its problems box is `<anchor>-problems`.
    pub anchor: String,
    /// The form's name for people ("Book spending").
    pub title: String,
    /// Field errors (each also shown beside its field).
    pub errors: FieldErrors,
    /// A refusal that is not about one field (a conflict).
    pub notice: Option<String>,
}

impl FormProblem {
    /// The lines the summary and the form's box list: `field: message`, then the notice.
    pub fn lines(&self) -> Vec<String> {
        let mut lines: Vec<String> = self.errors.0.iter().map(|e| format!("{}: {}", e.field, e.message)).collect();
        lines.extend(self.notice.clone());
        lines
    }
}

/// The refused forms of one page (at most one per request today; empty on a page that
/// nothing refused).
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Problems(pub Vec<FormProblem>);

/// No field errors: what a form that did not fail reads.
static NONE: FieldErrors = FieldErrors(Vec::new());

impl Problems {
    /// The problems of the form at `anchor`: its field errors and notice, if it said anything.
    pub fn of(anchor: &str, title: &str, errors: FieldErrors, notice: Option<String>) -> Self {
        if errors.is_empty() && notice.is_none() {
            return Self::default();
        }
        Self(vec![FormProblem { anchor: anchor.into(), title: title.into(), errors, notice }])
    }

    /// These problems and `other`'s (a page with two refused forms).
    pub fn and(mut self, other: Self) -> Self {
        self.0.extend(other.0);
        self
    }

    /// Nothing was refused.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    /// The problems of the form at `anchor`, if it was refused.
    pub fn at(&self, anchor: impl AsRef<str>) -> Option<&FormProblem> {
        self.0.iter().find(|p| p.anchor == anchor.as_ref())
    }

    /// The field errors of the form at `anchor` (empty for a form that was not refused), for
    /// the messages beside its fields.
    pub fn errors(&self, anchor: &str) -> &FieldErrors {
        self.at(anchor).map_or(&NONE, |p| &p.errors)
    }

    /// Whether any form refused anything but field errors (a conflict: status 409).
    pub fn has_notice(&self) -> bool {
        self.0.iter().any(|p| p.notice.is_some())
    }

    /// Every field error of the page, whatever the form (refusal rules that look at them all).
    pub fn all_errors(&self) -> FieldErrors {
        FieldErrors(self.0.iter().flat_map(|p| p.errors.0.iter().cloned()).collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_form_reads_only_its_own_errors() {
        let p = Problems::of("book-spending", "Book spending", FieldErrors::one("amount", "more than zero"), None);
        assert_eq!(p.errors("book-spending").get("amount"), Some("more than zero"));
        assert!(p.errors("book-direct").is_empty());
        assert_eq!(p.at("book-spending").map(FormProblem::lines), Some(vec!["amount: more than zero".to_string()]));
        assert!(Problems::of("x", "X", FieldErrors::default(), None).is_empty());
        let conflict = Problems::of("reverse-7", "Reverse entry 7", FieldErrors::default(), Some("entry 7: no".into()));
        assert!(conflict.has_notice());
        assert_eq!(conflict.0[0].lines(), vec!["entry 7: no".to_string()]);
    }
}
