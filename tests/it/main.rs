//! The integration test binary: one binary, one module per area, shared helpers.
#![expect(clippy::unwrap_used, clippy::expect_used, reason = "tests fail loudly by design")]

mod api;
mod approval;
mod browser;
mod chain;
mod cli;
mod contract;
mod dates;
mod exports;
mod faults;
mod finance;
mod forms;
mod glossary;
mod hardening;
mod helpers;
mod history;
mod hostile;
mod layout;
mod ledger;
mod load;
mod numbers;
mod packs;
mod pages;
mod portfolio;
mod realized;
mod roadmap_api;
mod roadmap_page;
mod scale;
mod security;
mod signin;
mod tokens;
mod zones_roadmap_fields;
