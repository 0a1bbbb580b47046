//! The portfolio: every zone's figures side by side, ranked, and the capital-budget choice.
//!
//! # The budget rule
//! Zones already approved, piloting or measuring are **committed**: their one-off investment is
//! taken from the budget first. Shelved and closed zones are out of the choice. Candidates
//! compete for what is left: the exact 0/1 knapsack ([`crate::finance::selection::knapsack`])
//! picks the set with the largest total value (NPV, chance-weighted or calibrated NPV, as chosen)
//! whose investment fits; a candidate whose value is not positive is never picked. Beside it,
//! the set taken by profitability index (greedy, in that order), for comparison. An optional minimum
//! readiness keeps candidates below it (or not yet scored) out of both sets; readiness never
//! changes the money figures.

use super::history::BaselineHistory;
use super::realized::month_index;
use super::uncertainty::{Calibration, Trials, calibrated_npv, chance_weighted_npv, parse_seed, quantity_ranges};
use super::{
    ApprovalSettings, CaseHeader, Criterion, DriverKind, FieldErrors, Month, NewBenefitDriver, NewCostItem,
    NumberFormat, Readiness, SiteSettings, Zone, ZoneStatus, finance_input,
};
use crate::finance::calibration::Evidence;
use crate::finance::linear::LinearNpv;
use crate::finance::montecarlo::{Simulation, simulate};
use crate::finance::selection::{Item, greedy_in_order, knapsack};
use crate::finance::{CaseMetrics, build_schedule, case_metrics};
use rayon::prelude::*;
use rust_decimal::Decimal;
use rust_decimal::prelude::ToPrimitive;
use serde::{Deserialize, Serialize};
use std::cmp::Ordering;
use std::collections::HashMap;
use std::sync::Arc;

/// What the table is sorted by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RankBy {
    /// NPV, largest first.
    Npv,
    /// Chance-weighted NPV, largest first.
    ChanceWeighted,
    /// Calibrated NPV, largest first.
    Calibrated,
    /// IRR, largest first.
    Irr,
    /// Simple payback, shortest first.
    Payback,
    /// Profitability index, largest first.
    ProfitabilityIndex,
}

impl RankBy {
    /// Every choice, for the select box.
    pub const ALL: [RankBy; 6] =
        [Self::Npv, Self::ChanceWeighted, Self::Calibrated, Self::Irr, Self::Payback, Self::ProfitabilityIndex];

    /// Query-string spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Npv => "npv",
            Self::ChanceWeighted => "chance_weighted_npv",
            Self::Calibrated => "calibrated_npv",
            Self::Irr => "irr",
            Self::Payback => "payback",
            Self::ProfitabilityIndex => "profitability_index",
        }
    }

    /// Words for people.
    pub fn label(self) -> &'static str {
        match self {
            Self::Npv => "NPV",
            Self::ChanceWeighted => "Chance-weighted NPV",
            Self::Calibrated => "Calibrated NPV",
            Self::Irr => "IRR",
            Self::Payback => "Payback (shortest first)",
            Self::ProfitabilityIndex => "Profitability index",
        }
    }

    fn parse(value: &str) -> Result<Self, String> {
        choice(value, &Self::ALL, Self::as_str, Self::Npv)
    }
}

/// The spelling of `chance_weighted_npv` before 0.2.0, still read until 0.3.0 (deprecated).
pub const DEPRECATED_CHANCE_WEIGHTED: &str = "risk_adjusted_npv";

/// One of `all` by its query spelling, `default` when empty; the error lists the spellings.
/// The deprecated [`DEPRECATED_CHANCE_WEIGHTED`] reads as `chance_weighted_npv`.
fn choice<T: Copy>(value: &str, all: &[T], name: fn(T) -> &'static str, default: T) -> Result<T, String> {
    let v = match value.trim() {
        DEPRECATED_CHANCE_WEIGHTED => "chance_weighted_npv",
        v => v,
    };
    if v.is_empty() {
        return Ok(default);
    }
    all.iter().copied().find(|x| name(*x) == v).ok_or_else(|| {
        let names: Vec<&str> = all.iter().map(|x| name(*x)).collect();
        format!("one of {}", names.join(", "))
    })
}

/// Which NPV the budget choice maximises.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ValueBasis {
    /// NPV as entered.
    Npv,
    /// Chance-weighted NPV.
    ChanceWeighted,
    /// Calibrated NPV.
    Calibrated,
}

impl ValueBasis {
    /// Every choice.
    pub const ALL: [ValueBasis; 3] = [Self::Npv, Self::ChanceWeighted, Self::Calibrated];

    /// Query-string spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Npv => "npv",
            Self::ChanceWeighted => "chance_weighted_npv",
            Self::Calibrated => "calibrated_npv",
        }
    }

    /// Words for people.
    pub fn label(self) -> &'static str {
        match self {
            Self::Npv => "NPV",
            Self::ChanceWeighted => "chance-weighted NPV",
            Self::Calibrated => "calibrated NPV",
        }
    }

    /// Read the query spelling (empty for NPV); the error lists the spellings.
    pub(crate) fn parse(value: &str) -> Result<Self, String> {
        choice(value, &Self::ALL, Self::as_str, Self::Npv)
    }
}

/// The portfolio query as the page form, the CSV link and the API give it.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct PortfolioQuery {
    /// Capital budget for one-off investment; empty for no choice.
    #[serde(skip_serializing_if = "String::is_empty")]
    pub budget: String,
    /// Ranking metric ([`RankBy::as_str`]).
    #[serde(skip_serializing_if = "String::is_empty")]
    pub rank: String,
    /// Value the choice maximises ([`ValueBasis::as_str`]).
    #[serde(skip_serializing_if = "String::is_empty")]
    pub basis: String,
    /// Minimum weighted readiness (1 to 5) for a candidate to be chosen; empty for none.
    #[serde(skip_serializing_if = "String::is_empty")]
    pub min_readiness: String,
    /// Monte Carlo seed; empty for the default.
    #[serde(skip_serializing_if = "String::is_empty")]
    pub seed: String,
}

/// A valid portfolio query.
#[derive(Debug, Clone, PartialEq)]
pub struct PortfolioParams {
    /// Capital budget.
    pub budget: Option<Decimal>,
    /// Ranking.
    pub rank: RankBy,
    /// Value maximised.
    pub basis: ValueBasis,
    /// Minimum readiness.
    pub min_readiness: Option<Decimal>,
    /// Monte Carlo settings.
    pub trials: Trials,
}

/// Largest budget accepted: far above any plant's, and inside i64 cents.
pub(crate) const MAX_BUDGET: Decimal = Decimal::from_parts(0xD4A5_1000, 0xE8, 0, false, 0); // 1e12

impl PortfolioParams {
    /// Validate each field, numbers typed in `f`; errors name it.
    pub fn parse(q: &PortfolioQuery, f: NumberFormat) -> Result<Self, FieldErrors> {
        let mut e = FieldErrors::default();
        let budget = if q.budget.trim().is_empty() {
            None
        } else {
            e.take(
                "budget",
                f.read(&q.budget).and_then(|b| {
                    if b < Decimal::ZERO || b > MAX_BUDGET {
                        Err(format!("an amount from 0 to {}", f.write(MAX_BUDGET, 0)))
                    } else {
                        Ok(b)
                    }
                }),
            )
        };
        let rank = e.take("rank", RankBy::parse(&q.rank));
        let basis = e.take("basis", ValueBasis::parse(&q.basis));
        let min_readiness = if q.min_readiness.trim().is_empty() {
            None
        } else {
            e.take(
                "min_readiness",
                f.read(&q.min_readiness).and_then(|m| {
                    if (Decimal::ONE..=Decimal::from(5)).contains(&m) {
                        Ok(m)
                    } else {
                        Err("a score from 1 to 5".into())
                    }
                }),
            )
        };
        let seed = e.take("seed", parse_seed(&q.seed));
        match (rank, basis, seed) {
            (Some(rank), Some(basis), Some(seed)) if e.is_empty() => {
                Ok(Self { budget, rank, basis, min_readiness, trials: Trials { seed, ..Trials::default() } })
            }
            _ => Err(e),
        }
    }
}

/// A case's parts as the portfolio needs them (ids kept for the realized view).
#[derive(Debug, Clone, PartialEq)]
pub struct CaseParts {
    /// Case version id.
    pub id: i64,
    /// Version number.
    pub version: u32,
    /// Whether it is the approved baseline.
    pub baseline: bool,
    /// Header.
    pub header: CaseHeader,
    /// Cost items with ids.
    pub costs: Vec<(i64, NewCostItem)>,
    /// Drivers with ids.
    pub drivers: Vec<(i64, NewBenefitDriver)>,
    /// The settings of its approval, which its figures keep; `None` uses today's.
    pub frozen: Option<ApprovalSettings>,
    /// Identity of each cost item across versions, in `costs` order.
    pub cost_uids: Vec<i64>,
    /// Identity of each driver across versions, in `drivers` order.
    pub driver_uids: Vec<i64>,
}

/// A zone's ledger as running totals: what each baseline driver booked (kept in the booking's
/// transaction, see `db::ledger`), and the latest month with a live entry of the baseline
/// (neither reversed nor a reversal), as the ledger page counts elapsed months.
#[derive(Debug, Clone, Default)]
pub struct LedgerTotals {
    /// Latest month with a live entry.
    pub latest: Option<Month>,
    /// Booked money per driver id.
    pub drivers: HashMap<i64, Decimal>,
}

/// One zone with what the portfolio computes from.
#[derive(Debug, Clone)]
pub struct ZoneData {
    /// The zone.
    pub zone: Zone,
    /// Its baseline, or else its newest version.
    pub case: Option<CaseParts>,
    /// Its ledger totals.
    pub ledger: LedgerTotals,
    /// Its baseline history (approved and superseded versions), when it has a baseline.
    pub history: Option<BaselineHistory>,
    /// Readiness scores (criterion id -> 1..5).
    pub scores: HashMap<i64, u8>,
}

/// A zone's case figures that do not depend on other zones: computed once per change of the
/// zone (the web layer caches them) and combined per request with the calibration.
#[derive(Debug, Clone)]
pub struct BaseFigures {
    /// Pre-tax metrics.
    pub metrics: CaseMetrics,
    /// NPV as a straight line in the quantities.
    pub model: LinearNpv,
    /// Kind of each driver, in case order.
    pub kinds: Vec<DriverKind>,
    /// Monte Carlo of NPV.
    pub simulation: Simulation,
    /// Chance the pilot works (`success_probability`).
    pub success_probability: Decimal,
    /// The case's first month (its month offset 0).
    pub start_month: Month,
    /// Go-live month offset.
    pub go_live_offset: u32,
    /// Ramp-up months.
    pub ramp_up_months: u32,
    /// One-off outlays in cents (positive) by month offset, as the schedule has them (the same
    /// money as `metrics.total_one_off`): the roadmap shifts them with the start.
    pub one_off_months: Vec<(u32, i64)>,
}

/// Everything the portfolio keeps of one zone between requests.
#[derive(Debug, Clone)]
pub struct ZoneBase {
    /// The zone.
    pub zone: Zone,
    /// The case the figures come from (id, version, label, baseline).
    pub case: Option<(i64, u32, String, bool)>,
    /// Readiness scores.
    pub scores: HashMap<i64, u8>,
    /// Figures, or why there are none.
    pub figures: Result<BaseFigures, String>,
    /// Savings realization to date, for a baseline with bookings.
    pub realization: Option<f64>,
    /// Per driver of the baseline: its kind and its record, for calibration.
    pub evidence: Vec<(DriverKind, Evidence)>,
    /// The hurdle rate of the figures, and whether it is the one frozen at approval (else
    /// today's setting).
    pub hurdle: (Decimal, bool),
    /// What the figures were computed from: the case, the hurdle rate and the trials.
    inputs: Option<(CaseParts, f64, Trials)>,
}

/// Compute a zone's base figures (see [`ZoneBase`]). When `previous` was computed from the
/// same case, hurdle rate and trials (a booking or a readiness score changed, not the case),
/// its figures are reused: the schedule and the Monte Carlo are the costly part.
pub fn zone_base(data: ZoneData, site: &SiteSettings, trials: Trials, previous: Option<&ZoneBase>) -> ZoneBase {
    // An approved baseline keeps the hurdle rate of its approval; the cache check below
    // compares the case (frozen settings included) and this rate.
    let frozen = data.case.as_ref().and_then(|c| c.frozen.as_ref());
    let hurdle_rate = frozen.map_or(site.hurdle_rate, |f| f.hurdle_rate);
    let hurdle = frozen.map_or_else(|| site.hurdle_f64(), |f| f.apply(site).hurdle_f64());
    let inputs = data.case.clone().map(|c| (c, hurdle, trials));
    let (figures, realization, evidence) = match &data.case {
        None => (Err("no business case yet".to_string()), None, Vec::new()),
        Some(c) => {
            let figures = match previous {
                Some(p) if p.inputs.is_some() && p.inputs == inputs => p.figures.clone(),
                _ => base_figures(c, hurdle, trials),
            };
            let (realization, evidence) = match (&data.history, data.ledger.latest) {
                (Some(history), Some(latest)) if c.baseline => realized(history, &data.ledger, latest, site),
                _ => (None, Vec::new()),
            };
            (figures, realization, evidence)
        }
    };
    ZoneBase {
        case: data.case.as_ref().map(|c| (c.id, c.version, c.header.label.clone(), c.baseline)),
        zone: data.zone,
        scores: data.scores,
        figures,
        realization,
        evidence,
        hurdle: (hurdle_rate, frozen.is_some()),
        inputs,
    }
}

fn base_figures(c: &CaseParts, hurdle: f64, trials: Trials) -> Result<BaseFigures, String> {
    let input = finance_input(&c.header, c.costs.iter().map(|(_, x)| x), c.drivers.iter().map(|(_, d)| d), None);
    let schedule = build_schedule(&input, hurdle).map_err(|e| format!("the case cannot be computed: {e}"))?;
    let metrics = case_metrics(&schedule);
    let one_off_months = (0u32..)
        .zip(&schedule.rows)
        .filter(|(_, r)| !r.one_off.is_zero())
        .map(|(m, r)| (m, cents(-r.one_off)))
        .collect();
    let model = LinearNpv::new(&input, hurdle).map_err(|e| format!("the case cannot be computed: {e}"))?;
    let ranges = quantity_ranges(c.drivers.iter().map(|(_, d)| d))
        .map_err(|e| format!("the uncertainty cannot be computed: {e}"))?;
    let simulation = simulate(&model, &ranges, trials.count, trials.seed)
        .map_err(|e| format!("the uncertainty cannot be computed: {e}"))?;
    Ok(BaseFigures {
        metrics,
        model,
        kinds: c.drivers.iter().map(|(_, d)| d.kind).collect(),
        simulation,
        success_probability: c.header.success_probability,
        start_month: c.header.start_month,
        go_live_offset: c.header.go_live_offset,
        ramp_up_months: c.header.ramp_up_months,
        one_off_months,
    })
}

/// Realization to date and per-driver evidence from the ledger totals: months count from the
/// history's start through the latest month with a live entry (as on the ledger page); each
/// month is expected from the baseline in force in it, and a driver's booked money counts for
/// its identity whichever version it was booked against.
fn realized(
    history: &BaselineHistory,
    ledger: &LedgerTotals,
    latest: Month,
    site: &SiteSettings,
) -> (Option<f64>, Vec<(DriverKind, Evidence)>) {
    let Ok(expected) = history.expected(site) else { return (None, Vec::new()) };
    let elapsed = month_index(expected.start, latest).map_or(0, |i| i + 1).min(history.months());
    let mut measured = vec![Decimal::ZERO; expected.drivers.len()];
    for (id, amount) in &ledger.drivers {
        if let Some(line) = expected.line_of(*id) {
            measured[line] += amount;
        }
    }
    let (mut expected_all, mut measured_all) = (Decimal::ZERO, Decimal::ZERO);
    let mut evidence = Vec::with_capacity(expected.drivers.len());
    for (d, measured) in expected.drivers.iter().zip(measured) {
        let to_date: Decimal = d.expected.iter().take(elapsed).sum();
        let months = d.expected.iter().take(elapsed).filter(|b| **b > Decimal::ZERO).count();
        expected_all += to_date;
        measured_all += measured;
        evidence.push((
            d.kind,
            Evidence {
                expected: to_date.to_f64().unwrap_or(0.0),
                measured: measured.to_f64().unwrap_or(0.0),
                months: u32::try_from(months).unwrap_or(u32::MAX),
            },
        ));
    }
    let rate = (expected_all > Decimal::ZERO).then(|| (measured_all / expected_all).to_f64().unwrap_or(0.0));
    (rate, evidence)
}

/// Where a zone stands in the budget choice.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Standing {
    /// Approved or running: counted against the budget first.
    Committed,
    /// In the recommended set.
    Recommended,
    /// A candidate the recommended set leaves out.
    LeftOut,
    /// A candidate kept out by the minimum readiness.
    BelowReadiness,
    /// Shelved or closed, or without a computable case: not part of the choice.
    NotInChoice,
}

impl Standing {
    /// Words for people (and the CSV).
    pub fn label(self) -> &'static str {
        match self {
            Self::Committed => "committed",
            Self::Recommended => "recommended",
            Self::LeftOut => "left out",
            Self::BelowReadiness => "below readiness minimum",
            Self::NotInChoice => "not in the choice",
        }
    }
}

/// One row of the portfolio.
#[derive(Debug, Clone)]
pub struct PortfolioRow {
    /// The zone's cached figures.
    pub base: Arc<ZoneBase>,
    /// Chance-weighted NPV.
    pub chance_weighted: Option<Decimal>,
    /// Calibrated NPV.
    pub calibrated: Option<Decimal>,
    /// Weighted readiness.
    pub readiness: Option<Readiness>,
    /// Budget standing (without a budget: committed, candidate rows as left out).
    pub standing: Standing,
    /// Whether the profitability-index order would take it.
    pub taken_by_profitability_index: bool,
}

impl PortfolioRow {
    /// The zone.
    pub fn zone(&self) -> &Zone {
        &self.base.zone
    }

    /// The figures, when the case can be computed.
    pub fn figures(&self) -> Option<&BaseFigures> {
        self.base.figures.as_ref().ok()
    }

    /// Why there are no figures.
    pub fn problem(&self) -> Option<&str> {
        self.base.figures.as_ref().err().map(String::as_str)
    }

    /// NPV at the likely quantities.
    pub fn npv(&self) -> Option<Decimal> {
        self.figures().map(|f| f.metrics.npv)
    }

    /// Investment (one-off costs, undiscounted).
    pub fn investment(&self) -> Option<Decimal> {
        self.figures().map(|f| f.metrics.total_one_off)
    }

    /// The value the budget choice uses.
    pub fn value(&self, basis: ValueBasis) -> Option<Decimal> {
        match basis {
            ValueBasis::Npv => self.npv(),
            ValueBasis::ChanceWeighted => self.chance_weighted,
            ValueBasis::Calibrated => self.calibrated,
        }
    }

    /// The ranking key: larger is better (payback is negated), `None` sorts last.
    fn key(&self, rank: RankBy) -> Option<f64> {
        let m = &self.figures()?.metrics;
        match rank {
            RankBy::Npv => m.npv.to_f64(),
            RankBy::ChanceWeighted => self.chance_weighted.and_then(|v| v.to_f64()),
            RankBy::Calibrated => self.calibrated.and_then(|v| v.to_f64()),
            RankBy::Irr => m.irr_annual,
            RankBy::Payback => m.payback_months.as_ref().and_then(|p| p.periods.to_f64()).map(|p| -p),
            RankBy::ProfitabilityIndex => m.profitability_index.and_then(|p| p.to_f64()),
        }
    }
}

/// The capital-budget choice.
#[derive(Debug, Clone)]
pub struct BudgetChoice {
    /// The budget.
    pub budget: Decimal,
    /// Investment of committed zones.
    pub committed: Decimal,
    /// What is left for candidates (never below zero).
    pub available: Decimal,
    /// Recommended candidates' investment.
    pub recommended_cost: Decimal,
    /// Recommended candidates' total value.
    pub recommended_value: Decimal,
    /// Investment of the set taken by profitability index.
    pub taken_by_profitability_index_cost: Decimal,
    /// Total value of the set taken by profitability index.
    pub taken_by_profitability_index_value: Decimal,
    /// Codes in the recommended set but not the one taken by profitability index.
    pub only_recommended: Vec<String>,
    /// Codes in the set taken by profitability index but not the recommended one.
    pub only_taken_by_profitability_index: Vec<String>,
    /// The best left-out candidate by profitability index, and the budget it lacks beyond what
    /// the recommended set leaves unspent.
    pub next_in_line: Option<(String, Decimal)>,
    /// Whether the knapsack proved its set optimal.
    pub proven: bool,
}

/// The whole portfolio.
#[derive(Debug, Clone)]
pub struct Portfolio {
    /// Rows, ranked.
    pub rows: Vec<PortfolioRow>,
    /// The budget choice, when a budget was given.
    pub choice: Option<BudgetChoice>,
    /// The parameters used.
    pub params: PortfolioParams,
}

impl Portfolio {
    /// The codes of the zones `pick` takes, in rank order (the budget choice's sets).
    pub fn codes_where(&self, pick: impl Fn(&PortfolioRow) -> bool) -> Vec<String> {
        self.rows.iter().filter(|r| pick(r)).map(|r| r.zone().code.clone()).collect()
    }
}

pub(crate) fn cents(d: Decimal) -> i64 {
    (d * Decimal::ONE_HUNDRED).round().to_i64().unwrap_or(i64::MAX)
}

fn from_cents(c: i64) -> Decimal {
    Decimal::new(c, 2)
}

/// The reference class for calibration: the evidence of measuring and closed zones, measured
/// against their approved baselines (see [`crate::finance::calibration`]).
pub fn calibration_of<'a>(zones: impl IntoIterator<Item = &'a ZoneBase>) -> Calibration {
    let mut evidence: HashMap<DriverKind, Vec<Evidence>> = HashMap::new();
    let mut sources = Vec::new();
    for z in zones {
        if !matches!(z.zone.status, ZoneStatus::Measuring | ZoneStatus::Closed) || z.evidence.is_empty() {
            continue;
        }
        sources.push(z.zone.code.clone());
        for (kind, e) in &z.evidence {
            evidence.entry(*kind).or_default().push(*e);
        }
    }
    sources.sort();
    Calibration::from_evidence(evidence, sources)
}

/// Build the portfolio from each zone's base figures (see the [module docs](self) for the
/// budget rule).
pub fn build_portfolio(
    zones: Vec<Arc<ZoneBase>>,
    criteria: &[Criterion],
    calibration: &Calibration,
    params: PortfolioParams,
) -> Portfolio {
    // In parallel: a plant group has 10,000 rows, each with decimal arithmetic.
    let mut rows: Vec<PortfolioRow> = zones
        .into_par_iter()
        .map(|base| {
            let f = base.figures.as_ref().ok();
            let chance_weighted = f.map(|f| chance_weighted_npv(&f.metrics, f.success_probability));
            let calibrated = f.map(|f| calibrated_npv(f.metrics.npv, &f.model, f.kinds.iter().copied(), calibration));
            let readiness = Readiness::weighted(criteria, &base.scores);
            let standing = match base.zone.status {
                _ if f.is_none() => Standing::NotInChoice,
                ZoneStatus::Approved | ZoneStatus::Piloting | ZoneStatus::Measuring => Standing::Committed,
                ZoneStatus::Candidate => match (params.min_readiness, readiness) {
                    (Some(min), r) if r.is_none_or(|r| Decimal::try_from(r.score).unwrap_or_default() < min) => {
                        Standing::BelowReadiness
                    }
                    _ => Standing::LeftOut,
                },
                ZoneStatus::Closed | ZoneStatus::Shelved => Standing::NotInChoice,
            };
            PortfolioRow { base, chance_weighted, calibrated, readiness, standing, taken_by_profitability_index: false }
        })
        .collect();
    let choice = params.budget.map(|budget| choose(&mut rows, budget, params.basis));
    // Each key computed once (decimal to float conversions): a plant group ranks 10,000 rows.
    let rank = params.rank;
    let mut keyed: Vec<(Option<f64>, PortfolioRow)> = rows.into_iter().map(|r| (r.key(rank), r)).collect();
    keyed.sort_by(|(ka, a), (kb, b)| match (ka, kb) {
        (Some(x), Some(y)) => y.total_cmp(x).then_with(|| a.zone().code.cmp(&b.zone().code)),
        (Some(_), None) => Ordering::Less,
        (None, Some(_)) => Ordering::Greater,
        (None, None) => a.zone().code.cmp(&b.zone().code),
    });
    Portfolio { rows: keyed.into_iter().map(|(_, r)| r).collect(), choice, params }
}

/// Run the knapsack and the profitability-index order over the candidate rows; mark each row's standing.
fn choose(rows: &mut [PortfolioRow], budget: Decimal, basis: ValueBasis) -> BudgetChoice {
    let committed: Decimal =
        rows.iter().filter(|r| r.standing == Standing::Committed).filter_map(PortfolioRow::investment).sum();
    let available = (budget - committed).max(Decimal::ZERO);
    let candidates: Vec<usize> = (0..rows.len()).filter(|&i| rows[i].standing == Standing::LeftOut).collect();
    let items: Vec<Item> = candidates
        .iter()
        .map(|&i| Item {
            cost: cents(rows[i].investment().unwrap_or_default()),
            value: cents(rows[i].value(basis).unwrap_or_default()),
        })
        .collect();
    let best = knapsack(&items, cents(available));
    // Profitability index, best first; a case without one-off cost (no index) goes first.
    let pi = |k: usize| {
        rows[candidates[k]]
            .figures()
            .and_then(|f| f.metrics.profitability_index)
            .and_then(|p| p.to_f64())
            .unwrap_or(f64::INFINITY)
    };
    let mut order: Vec<usize> = (0..candidates.len()).collect();
    order.sort_by(|&a, &b| pi(b).total_cmp(&pi(a)).then(a.cmp(&b)));
    let greedy = greedy_in_order(&items, &order, cents(available));
    for &k in &best.chosen {
        rows[candidates[k]].standing = Standing::Recommended;
    }
    for &k in &greedy.chosen {
        rows[candidates[k]].taken_by_profitability_index = true;
    }
    let code = |k: usize| rows[candidates[k]].zone().code.clone();
    let only_recommended = best.chosen.iter().filter(|k| !greedy.chosen.contains(k)).map(|&k| code(k)).collect();
    let only_taken_by_profitability_index =
        greedy.chosen.iter().filter(|k| !best.chosen.contains(k)).map(|&k| code(k)).collect();
    let unspent = cents(available) - best.cost;
    let next_in_line = order
        .iter()
        .copied()
        .find(|k| !best.chosen.contains(k) && items[*k].value > 0)
        .map(|k| (code(k), from_cents((items[k].cost - unspent).max(0))));
    BudgetChoice {
        budget,
        committed,
        available,
        recommended_cost: from_cents(best.cost),
        recommended_value: from_cents(best.value),
        taken_by_profitability_index_cost: from_cents(greedy.cost),
        taken_by_profitability_index_value: from_cents(greedy.value),
        only_recommended,
        only_taken_by_profitability_index,
        next_in_line,
        proven: best.proven,
    }
}
