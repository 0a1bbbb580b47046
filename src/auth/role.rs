//! Roles and what each may do. Every route names one [`Permission`] (see `web::routes`).

use serde::Serialize;
use std::fmt;

/// A user's one role.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Role {
    /// Programme lead: writes zones and business cases.
    Lead,
    /// Plant controller: books and corrects the ledger, imports CSV.
    Controller,
    /// Management: reads everything, changes nothing.
    Viewer,
    /// Manages users, roles, site settings and API tokens; may do everything.
    Admin,
}

/// What a route needs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Permission {
    /// Anyone, signed in or not (sign-in page, about page, API description).
    Public,
    /// Any signed-in user (sign out, home).
    SignedIn,
    /// Read zones, cases and figures.
    Read,
    /// Create and change zones and business cases.
    EditCases,
    /// Book and correct ledger entries, import CSV (the ledger routes arrive later).
    Ledger,
    /// Users, roles, tokens, site settings, audit trail.
    Admin,
}

impl Role {
    /// Every role.
    pub const ALL: [Role; 4] = [Self::Lead, Self::Controller, Self::Viewer, Self::Admin];

    /// Stored spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Lead => "lead",
            Self::Controller => "controller",
            Self::Viewer => "viewer",
            Self::Admin => "admin",
        }
    }

    /// Parse the stored spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        Self::ALL
            .into_iter()
            .find(|r| r.as_str() == value.trim())
            .ok_or_else(|| "one of lead, controller, viewer, admin".to_string())
    }

    /// Whether this role holds `permission`. The one place that says who may do what.
    pub fn allows(self, permission: Permission) -> bool {
        use Permission as P;
        match permission {
            P::Public | P::SignedIn | P::Read => true,
            P::EditCases => matches!(self, Self::Lead | Self::Admin),
            P::Ledger => matches!(self, Self::Controller | Self::Admin),
            P::Admin => self == Self::Admin,
        }
    }
}

impl fmt::Display for Role {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}
