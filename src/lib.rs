//! pilot-ledger: business cases, an append-only benefit ledger and a ranked portfolio for
//! instrumenting production zones.
//!
//! Dependencies point one way: `web` -> `app` -> `db` -> `domain` -> `finance`. `finance` is pure
//! maths with no web or database types; `db` is the only place with SQL; `web` is thin.

pub mod app;
pub mod auth;
pub mod cli;
pub mod config;
pub mod db;
pub mod domain;
pub mod finance;
pub mod web;

pub use web::{AppState, app};
