//! Row ids with their own types, so a zone id cannot be passed where a case id is meant.
//! Each is the stored integer; SQL binds and reads the inner value (`id.0`).

use serde::{Deserialize, Serialize};

macro_rules! id_type {
    ($(#[$doc:meta] $name:ident),+ $(,)?) => {$(
        #[$doc]
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
        #[serde(transparent)]
        pub struct $name(pub i64);

        impl std::fmt::Display for $name {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                self.0.fmt(f)
            }
        }
    )+};
}

id_type!(
    /// A production zone.
    ZoneId,
    /// A case version.
    CaseId,
    /// A ledger entry.
    EntryId,
    /// A benefit driver of a case version.
    DriverId,
    /// A cost item of a case version.
    CostItemId,
    /// A user account.
    UserId,
);
