//! The controller's ledger: booking forms and API (direct, adjusted to the period's volume,
//! spending), reversals, CSV import and export, and the realized view against the baseline
//! history.

use super::auth::{CurrentUser, Nav, Principal};
use super::chart::PairChart;
use super::problems::Problems;
use super::{ApiError, ApiPath, ApiQuery, AppError, AppState, FormBody, JsonBody, NoQuery};
use crate::app;
use crate::db::{self, CaseFull, ledger::Booked};
use crate::domain::{
    Booking, BookingInput, CaseState, EntryKind, FieldErrors, LedgerEntry, Method, Money, Month, NumberFormat, Percent,
    Plausibility, RealizedView, SiteSettings, UserId, Zone, csv_safe, ledger_csv, quantity, realized_view,
};
use crate::domain::{EntryId, ZoneId};
use askama::Template;
use axum::Json;
use axum::extract::{Multipart, Path, Query, State};
use axum::http::{HeaderMap, StatusCode, header};
use axum::response::{Html, IntoResponse, Redirect, Response};
use rust_decimal::Decimal;
use serde::{Deserialize, Serialize};
use serde_json::{Value, json};

/// The signed-in user as the ledger's write path names them.
fn who(me: &Principal) -> app::ledger::Who<'_> {
    app::ledger::Who { id: UserId(me.user.id), name: me.name(), on_behalf: me.on_behalf.as_deref() }
}

/// The clock's date: nothing later can be booked (month) or paid (day).
fn today(state: &AppState) -> time::Date {
    state.clock.now().date()
}

/// A fresh one-time token for a form: 128 random bits. It is recorded only when the form books
/// (in that transaction), so a page view writes nothing; a forged token can only stop a
/// booking, never allow one.
fn form_token() -> String {
    crate::auth::new_secret("f").expose().chars().take(23).collect()
}

/// The one-time token of a submitted form, from the action URL (`?form=...`).
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct FormQuery {
    form: String,
}

impl FormQuery {
    /// The token, or the error that asks for a resubmission from the page.
    fn token(&self) -> Result<&str, AppError> {
        let t = self.form.trim();
        if t.is_empty() || t.len() > 64 || !t.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-' || b == b'_') {
            return Err(AppError::Invalid(FieldErrors::one(
                "form",
                "this form was not sent from the ledger page (its one-time token is missing): reload the page and \
                 submit it again",
            )));
        }
        Ok(t)
    }
}

/// Where a form submitted twice sends the browser: the ledger page, saying what the first
/// submit booked.
fn already(zone_id: i64, outcome: &str) -> Response {
    Redirect::to(&format!("/zones/{zone_id}/ledger?already={}#entries", outcome.replace(' ', "-"))).into_response()
}

/// Realization and its parts, formatted.
pub struct DriverRow {
    label: String,
    unit: String,
    expected: Money,
    measured: Money,
    quantity: String,
    rate: String,
    chart: PairChart,
}

/// A ledger entry as the history table shows it.
pub struct EntryRow {
    e: LedgerEntry,
    item: String,
    amount: Money,
    inputs: String,
    /// One-time token of its reversal form.
    token: String,
    /// The anchor of its reversal form (`reverse-177`).
    anchor: String,
}

#[derive(Template)]
#[template(path = "ledger/page.html")]
struct LedgerPage {
    nav: Nav,
    site: SiteSettings,
    notes: Vec<(&'static str, String)>,
    zone: Zone,
    baseline: Option<CaseFull>,
    /// The baseline history, oldest first.
    baselines: Vec<super::cases::BaselineLine>,
    can_book: bool,
    figures: Option<Figures>,
    entries: Vec<EntryRow>,
    /// The values of each booking form: those a refused form was sent with, else empty.
    forms: BookForms,
    /// What a refused form said, beside it and in the summary at the top.
    problems: Problems,
    /// A form submitted twice: what its first submit booked.
    info: Option<String>,
    period_hint: String,
    /// The import's header row, separated as this site's CSV files are.
    csv_header: String,
    /// One-time tokens of the booking and import forms.
    book_token: String,
    import_token: String,
    /// Show the plausibility confirmation (after a refusal, or when already ticked).
    ask_confirm: bool,
}

/// The page's three booking forms, one per kind of booking, each with only the fields it needs
/// (anchors `book-direct`, `book-adjusted`, `book-spending`).
#[derive(Default)]
pub struct BookForms {
    direct: BookingInput,
    adjusted: BookingInput,
    spending: BookingInput,
}

/// The anchor and title of the form a booking was sent from: its kind and method say which.
pub fn booking_form(input: &BookingInput) -> (&'static str, &'static str) {
    match (input.kind.trim(), input.method.trim()) {
        ("spending", _) => ("book-spending", "Book spending"),
        (_, "normalized" | "volume_adjusted") => ("book-adjusted", "Book a saving adjusted to the period's volume"),
        _ => ("book-direct", "Book a saving by direct measurement"),
    }
}

impl BookForms {
    /// Empty forms, but the one `input` was sent from keeps its values.
    fn keeping(input: Option<BookingInput>) -> Self {
        let mut forms = Self::default();
        if let Some(input) = input {
            match booking_form(&input).0 {
                "book-spending" => forms.spending = input,
                "book-adjusted" => forms.adjusted = input,
                _ => forms.direct = input,
            }
        }
        forms
    }
}

/// The anchor and title of the import form.
const IMPORT_FORM: (&str, &str) = ("import", "Import a month from CSV");

/// The refusal of a reversal, beside the entry's reversal form: every message names the entry
/// (`entry 177: ...`).
fn reversal_problems(entry: i64, errors: FieldErrors, notice: Option<String>) -> Problems {
    let named = |m: String| if m.starts_with(&format!("entry {entry} ")) { m } else { format!("entry {entry}: {m}") };
    let mut e = FieldErrors::default();
    for x in errors.0 {
        e.push(x.field, named(x.message));
    }
    Problems::of(&format!("reverse-{entry}"), "Reversal", e, notice.map(named))
}

/// The realized figures of the page.
pub struct Figures {
    elapsed: usize,
    savings_expected: Money,
    savings_measured: Money,
    savings_rate: String,
    forecast: Money,
    expected_total: Money,
    spending: Money,
    spending_expected: Money,
    xnpv: String,
    xirr: String,
    xirr_note: Option<String>,
    /// Several rates make XNPV zero: the shared ambiguity caution with every root.
    xirr_warning: Option<String>,
    drivers: Vec<DriverRow>,
    cumulative: PairChart,
}

fn rate_text(r: Option<f64>) -> String {
    r.map_or_else(|| "–".into(), |r| Percent(r).to_string())
}

fn figures(view: &RealizedView) -> Figures {
    let months = view.elapsed.max(1);
    Figures {
        elapsed: view.elapsed,
        savings_expected: Money(view.savings.expected_to_date),
        savings_measured: Money(view.savings.measured_to_date),
        savings_rate: rate_text(view.savings.rate),
        forecast: Money(view.savings_forecast),
        expected_total: Money(view.savings_expected_total),
        spending: Money(view.spending_to_date),
        spending_expected: Money(view.spending_expected_to_date),
        xnpv: view.realized.as_ref().map_or_else(|| "–".into(), |r| Money(r.xnpv).to_string()),
        xirr: view.realized.as_ref().and_then(|r| r.xirr).map_or_else(|| "none".into(), |x| Percent(x).to_string()),
        xirr_warning: view
            .realized
            .as_ref()
            .filter(|r| r.ambiguous && !r.roots.is_empty())
            .map(|r| super::cases::ambiguous_rate_warning("XIRR", &r.roots, "XNPV")),
        // The ambiguity caution lists every root; the note says why else there is no XIRR.
        xirr_note: view
            .realized
            .as_ref()
            .filter(|r| !r.ambiguous || r.roots.is_empty())
            .and_then(|r| r.xirr_note.clone()),
        drivers: view
            .drivers
            .iter()
            .map(|d| DriverRow {
                // A driver a re-baseline retired keeps its booked months; the name says so.
                label: if d.current { d.label.clone() } else { format!("{} (retired)", d.label) },
                unit: d.unit.clone(),
                expected: Money(d.realization.expected_to_date),
                measured: Money(d.realization.measured_to_date),
                quantity: NumberFormat::current().write(d.measured_quantity, 0),
                rate: rate_text(d.realization.rate),
                chart: PairChart::monthly(&d.expected, &d.measured, months, &d.label),
            })
            .collect(),
        cumulative: PairChart::cumulative(&view.expected_net, &view.measured_net, view.elapsed),
    }
}

/// What the ledger page and API read: the settings of the current baseline (those of its
/// approval), the zone, the baseline history (approval order, the current baseline last), the
/// entries and the realized view against the history.
type Loaded = (SiteSettings, Zone, Vec<CaseFull>, Vec<LedgerEntry>, Option<RealizedView>);

/// The baseline history and entries of a zone, with the realized view (see [`Loaded`]).
async fn load(state: &AppState, zone_id: i64) -> Result<Loaded, AppError> {
    let today = db::get_site(&state.pool).await?;
    let zone = db::get_zone(&state.pool, zone_id).await?;
    let history = db::baseline_history(&state.pool, zone_id).await?;
    let site = current(&history).map_or_else(|| today.clone(), |b| b.case.settings(&today));
    let entries = db::ledger::zone_entries(&state.pool, zone_id).await?;
    // The realized figures (an XIRR over every entry): on the bounded pool.
    crate::app::cpu::run(move || {
        let view = match db::history_of(&history) {
            Some(h) => Some(
                realized_view(&h, &entries, &today)
                    .map_err(|e| AppError::Conflict(format!("the realized figures cannot be computed: {e}")))?,
            ),
            None => None,
        };
        Ok((site, zone, history, entries, view))
    })
    .await?
}

/// The current baseline: the history's last version, when it is approved.
pub(super) fn current(history: &[CaseFull]) -> Option<&CaseFull> {
    history.last().filter(|b| b.case.state == CaseState::Approved)
}

/// An entry's item as the current baseline names it: an item of an older version shows under
/// its identity's latest label (the current one's, unless it was retired).
fn item_name(history: &[CaseFull], e: &LedgerEntry) -> String {
    let latest = |uid: i64, saving: bool| {
        history.iter().rev().find_map(|b| match saving {
            true => b.drivers.iter().find(|d| d.item_uid == uid).map(|d| d.driver.label.clone()),
            false => b.costs.iter().find(|c| c.item_uid == uid).map(|c| c.item.label.clone()),
        })
    };
    let uid = history.iter().find_map(|b| match e.kind() {
        EntryKind::Saving => b.drivers.iter().find(|d| Some(d.id) == e.item.driver().map(|d| d.0)).map(|d| d.item_uid),
        EntryKind::Spending => b.costs.iter().find(|c| Some(c.id) == e.item.cost().map(|c| c.0)).map(|c| c.item_uid),
    });
    uid.and_then(|u| latest(u, e.kind() == EntryKind::Saving))
        .unwrap_or_else(|| format!("item of version {}", e.case_id))
}

async fn page(
    state: &AppState,
    me: &Principal,
    zone_id: i64,
    problems: Problems,
    sent: Option<BookingInput>,
) -> Result<Response, AppError> {
    page_with(state, me, zone_id, problems, sent, None).await
}

/// A refused booking: the page with the form it came from holding its values and errors.
async fn refused_booking(
    state: &AppState,
    me: &Principal,
    zone_id: i64,
    input: BookingInput,
    errors: FieldErrors,
    notice: Option<String>,
) -> Result<Response, AppError> {
    let (anchor, title) = booking_form(&input);
    page(state, me, zone_id, Problems::of(anchor, title, errors, notice), Some(input)).await
}

/// A refused import: the page with the errors beside the import form.
async fn refused_import(
    state: &AppState,
    me: &Principal,
    zone_id: i64,
    errors: FieldErrors,
    notice: Option<String>,
) -> Result<Response, AppError> {
    page(state, me, zone_id, Problems::of(IMPORT_FORM.0, IMPORT_FORM.1, errors, notice), None).await
}

async fn page_with(
    state: &AppState,
    me: &Principal,
    zone_id: i64,
    problems: Problems,
    sent: Option<BookingInput>,
    info: Option<String>,
) -> Result<Response, AppError> {
    let (site, zone, history, entries, view) = load(state, zone_id).await?;
    let rows = entries
        .into_iter()
        .rev()
        .map(|e| {
            let inputs = match (e.baseline_intensity, e.reporting_volume, e.measured_consumption) {
                (Some(i), Some(v), Some(c)) => {
                    format!("{} × {} − {}", quantity(&i), quantity(&v), quantity(&c))
                }
                _ => String::new(),
            };
            EntryRow {
                item: item_name(&history, &e),
                amount: Money(e.amount),
                inputs,
                anchor: format!("reverse-{}", e.id),
                e,
                token: form_token(),
            }
        })
        .collect();
    let status = if !problems.all_errors().is_empty() {
        StatusCode::UNPROCESSABLE_ENTITY
    } else if problems.has_notice() {
        StatusCode::CONFLICT
    } else {
        StatusCode::OK
    };
    let baseline = current(&history).cloned();
    let notes = match &baseline {
        Some(b) => b.case.notes(&db::get_site(&state.pool).await?),
        None => Vec::new(),
    };
    let baselines = super::cases::baseline_lines(&history);
    let page = LedgerPage {
        nav: Nav::from(me),
        notes,
        can_book: me.role().allows(crate::auth::Permission::Ledger) && baseline.is_some(),
        figures: view.as_ref().map(figures),
        period_hint: format!("up to {}", Month::of(today(state))),
        csv_header: ledger_csv::CSV_COLUMNS.join(&char::from(site.number_format.csv_delimiter()).to_string()),
        info,
        book_token: form_token(),
        import_token: form_token(),
        ask_confirm: sent.as_ref().is_some_and(|f| f.confirm_implausible)
            || Plausibility::refused(&problems.all_errors()),
        site,
        zone,
        baseline,
        baselines,
        entries: rows,
        forms: BookForms::keeping(sent),
        problems,
    };
    Ok((status, Html(page.render()?)).into_response())
}

/// The ledger page's query: `already=entry-12` after a form was submitted twice.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct ShowQuery {
    already: String,
}

/// GET /zones/{id}/ledger
pub async fn show(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
    Query(q): Query<ShowQuery>,
) -> Result<Response, AppError> {
    // Only the two shapes the redirect writes are shown, never free text from the URL.
    let info = q.already.split_once('-').and_then(|(what, n)| {
        let n: i64 = n.parse().ok()?;
        let what = match what {
            "entry" => "entry",
            "import" => "import",
            _ => return None,
        };
        Some(format!("that form was already submitted: it booked {what} #{n}; nothing was booked again."))
    });
    page_with(&state, &me, id, Problems::default(), None, info).await
}

/// POST /zones/{id}/ledger?form=TOKEN: book from the form.
pub async fn book(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
    Query(q): Query<FormQuery>,
    FormBody(input): FormBody<BookingInput>,
) -> Result<Response, AppError> {
    let token = match q.token() {
        Ok(t) => t,
        Err(AppError::Invalid(e)) => return refused_booking(&state, &me, id, input, e, None).await,
        Err(other) => return Err(other),
    };
    let booking = match Booking::parse(&input, NumberFormat::current()) {
        Ok(b) => b,
        Err(e) => return refused_booking(&state, &me, id, input, e, None).await,
    };
    let now = state.clock.now();
    match app::ledger::book(&state.pool, who(&me), ZoneId(id), &booking, (today(&state), now), None, Some(token))
        .await
        .map_err(AppError::from)
    {
        Ok(app::ledger::Once::Done(_)) => Ok(Redirect::to(&format!("/zones/{id}/ledger#entries")).into_response()),
        Ok(app::ledger::Once::Already(outcome)) => Ok(already(id, &outcome)),
        Err(AppError::Invalid(e)) => refused_booking(&state, &me, id, input, e, None).await,
        Err(AppError::Conflict(msg)) => {
            refused_booking(&state, &me, id, input, FieldErrors::default(), Some(msg)).await
        }
        Err(other) => Err(other),
    }
}

/// The reversal form and body.
#[derive(Deserialize, Serialize, Default)]
#[serde(default)]
pub struct ReverseInput {
    evidence: String,
}

/// POST /zones/{id}/ledger/{entry}/reverse?form=TOKEN
pub async fn reverse(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path((id, entry)): Path<(i64, i64)>,
    Query(q): Query<FormQuery>,
    FormBody(input): FormBody<ReverseInput>,
) -> Result<Response, AppError> {
    let result = match q.token() {
        Ok(token) => {
            let (evidence, now) = (&input.evidence, state.clock.now());
            app::ledger::reverse(&state.pool, who(&me), ZoneId(id), EntryId(entry), evidence, Some(token), now)
                .await
                .map_err(AppError::from)
        }
        Err(e) => Err(e),
    };
    match result {
        Ok(app::ledger::Once::Done(_)) => Ok(Redirect::to(&format!("/zones/{id}/ledger#entries")).into_response()),
        Ok(app::ledger::Once::Already(outcome)) => Ok(already(id, &outcome)),
        Err(AppError::Conflict(msg)) => {
            page(&state, &me, id, reversal_problems(entry, FieldErrors::default(), Some(msg)), None).await
        }
        Err(AppError::Invalid(e)) => page(&state, &me, id, reversal_problems(entry, e, None), None).await,
        Err(other) => Err(other),
    }
}

/// An upload that could not be read. A body cut by the outer size limit reaches multipart as
/// a failed stream read, which axum answers 500: it is the client's, and a 413.
fn upload_error(e: axum::extract::multipart::MultipartError) -> AppError {
    let mut status = e.status();
    let mut source: Option<&(dyn std::error::Error + 'static)> = Some(&e);
    while let Some(err) = source {
        if err.is::<http_body_util::LengthLimitError>() {
            status = StatusCode::PAYLOAD_TOO_LARGE;
        }
        source = err.source();
    }
    if status.is_server_error() {
        status = StatusCode::BAD_REQUEST;
    }
    AppError::BadRequest { status, message: e.body_text() }
}

/// POST /zones/{id}/ledger/import?form=TOKEN: a CSV file from the form (multipart), with the
/// optional `again` checkbox (book the same rows again on purpose).
pub async fn import(
    State(state): State<AppState>,
    CurrentUser(me): CurrentUser,
    Path(id): Path<i64>,
    Query(q): Query<FormQuery>,
    mut multipart: Multipart,
) -> Result<Response, AppError> {
    let mut file: Option<(String, Vec<u8>)> = None;
    let mut again = false;
    while let Some(field) = multipart.next_field().await.map_err(upload_error)? {
        match field.name() {
            Some("file") => {
                let name = field.file_name().unwrap_or("upload.csv").to_string();
                let bytes = field.bytes().await.map_err(upload_error)?;
                file = Some((name, bytes.to_vec()));
            }
            Some("again") => again = crate::domain::de::flag_text(&field.text().await.map_err(upload_error)?),
            _ => {}
        }
    }
    let token = match q.token() {
        Ok(t) => t,
        Err(AppError::Invalid(e)) => return refused_import(&state, &me, id, e, None).await,
        Err(other) => return Err(other),
    };
    let Some((name, bytes)) = file else {
        return refused_import(&state, &me, id, FieldErrors::one("file", "choose a CSV file"), None).await;
    };
    match app::ledger::import(
        &state.pool,
        who(&me),
        ZoneId(id),
        app::ledger::Upload { file_name: &name, bytes, again },
        Some(token),
        (today(&state), state.clock.now()),
    )
    .await
    .map_err(AppError::from)
    {
        Ok(app::ledger::Once::Done(n)) => {
            tracing::info!(zone = id, rows = n, file = %name, "CSV imported");
            Ok(Redirect::to(&format!("/zones/{id}/ledger#entries")).into_response())
        }
        Ok(app::ledger::Once::Already(outcome)) => Ok(already(id, &outcome)),
        Err(AppError::Invalid(e)) => refused_import(&state, &me, id, e, None).await,
        Err(AppError::Conflict(msg)) => refused_import(&state, &me, id, FieldErrors::default(), Some(msg)).await,
        Err(other) => Err(other),
    }
}

/// The ledger as CSV in the import layout plus bookkeeping columns, numbers (ungrouped) and
/// delimiter in the site's format so that the importer reads the file back.
fn csv_of(
    entries: &[LedgerEntry],
    zone_codes: &std::collections::HashMap<i64, String>,
    numbers: NumberFormat,
) -> Result<String, AppError> {
    let mut w = csv::WriterBuilder::new().delimiter(numbers.csv_delimiter()).from_writer(Vec::new());
    let mut head: Vec<&str> = vec!["entry", "zone"];
    head.extend(ledger_csv::CSV_COLUMNS);
    head.extend(ledger_csv::CSV_OPTIONAL_COLUMNS);
    head.extend(["unit_value", "reverses", "reversed_by", "booked_at", "booked_by", "on_behalf_by"]);
    let internal = |e: csv::Error| AppError::Internal(e.into());
    w.write_record(&head).map_err(internal)?;
    let text = |d: Option<Decimal>| d.map(|d| numbers.export(&d.to_string())).unwrap_or_default();
    let id = |v: Option<i64>| v.map(|v| v.to_string()).unwrap_or_default();
    for e in entries {
        let amount = if e.kind() == EntryKind::Spending { text(Some(-e.amount)) } else { String::new() };
        w.write_record([
            e.id.to_string(),
            // Text cells go through `csv_safe` (OWASP "CSV Injection"); numbers stay numbers.
            zone_codes.get(&e.zone_id).map(|c| csv_safe(c)).unwrap_or_default(),
            e.period.to_string(),
            e.kind().as_str().to_string(),
            id(Some(e.item.id())),
            if e.method == Method::Spend { String::new() } else { e.method.as_str().to_string() },
            text(e.quantity),
            text(e.baseline_intensity),
            text(e.reporting_volume),
            text(e.measured_consumption),
            amount,
            csv_safe(&e.evidence),
            e.paid_on.map(|d| d.to_string()).unwrap_or_default(),
            if e.implausible_confirmed { "yes".into() } else { String::new() },
            text(e.unit_value),
            id(e.reverses_id.map(|r| r.0)),
            id(e.reversed_by.map(|r| r.0)),
            e.booked_at.clone(),
            csv_safe(&e.booked_by),
            // Empty, or who made the token it was booked with on `booked_by`'s behalf.
            e.on_behalf_by.as_deref().map(csv_safe).unwrap_or_default(),
        ])
        .map_err(internal)?;
    }
    let bytes = w.into_inner().map_err(|e| AppError::Internal(anyhow::anyhow!("csv: {e}")))?;
    String::from_utf8(bytes).map_err(|e| AppError::Internal(e.into()))
}

pub(super) fn csv_response(name: &str, body: impl IntoResponse) -> Response {
    (
        [
            (header::CONTENT_TYPE, "text/csv; charset=utf-8".to_string()),
            (header::CONTENT_DISPOSITION, format!("attachment; filename=\"{name}\"")),
        ],
        body,
    )
        .into_response()
}

/// GET /zones/{id}/ledger.csv
pub async fn export_zone(State(state): State<AppState>, Path(id): Path<i64>) -> Result<Response, AppError> {
    let zone = db::get_zone(&state.pool, id).await?;
    let entries = db::ledger::zone_entries(&state.pool, id).await?;
    let codes = std::iter::once((zone.id, zone.code.clone())).collect();
    Ok(csv_response(&format!("ledger-{}.csv", zone.code), csv_on_pool(entries, codes).await?))
}

/// GET /ledger.csv: every zone's entries.
pub async fn export_all(State(state): State<AppState>) -> Result<Response, AppError> {
    let codes = db::list_zones(&state.pool).await?.into_iter().map(|z| (z.id, z.code)).collect();
    let entries = db::ledger::all_entries(&state.pool).await?;
    Ok(csv_response("ledger.csv", csv_on_pool(entries, codes).await?))
}

/// [`csv_of`] on the bounded pool, in the request's number format: a ledger has millions of
/// rows at a plant group's scale.
async fn csv_on_pool(
    entries: Vec<LedgerEntry>,
    codes: std::collections::HashMap<i64, String>,
) -> Result<String, AppError> {
    crate::app::cpu::run(move || csv_of(&entries, &codes, NumberFormat::current())).await?
}

/// GET /api/v1/zones/{id}/ledger: entries and realized figures.
pub async fn api_show(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    ApiPath(id): ApiPath<i64>,
) -> Result<Json<Value>, ApiError> {
    let (site, _, history, entries, view) = load(&state, id).await?;
    let realized = view.map(|v| {
        json!({
            "elapsed_months": v.elapsed,
            "savings_expected_to_date": v.savings.expected_to_date.to_string(),
            "savings_measured_to_date": v.savings.measured_to_date.to_string(),
            "savings_realization": v.savings.rate.map(super::metrics::rate_text),
            "savings_forecast_at_completion": super::metrics::money_text(v.savings_forecast),
            "spending_to_date": v.spending_to_date.to_string(),
            "xnpv": v.realized.as_ref().map(|r| super::metrics::money_text(r.xnpv)),
            "xirr": v.realized.as_ref().and_then(|r| r.xirr).map(super::metrics::rate_text),
            "xirr_ambiguous": v.realized.as_ref().is_some_and(|r| r.ambiguous),
            "xirr_roots": v.realized.as_ref().map(|r| r.roots.iter().map(|x| super::metrics::rate_text(*x)).collect::<Vec<_>>()).unwrap_or_default(),
            "xirr_note": v.realized.as_ref().and_then(|r| r.xirr_note.clone()),
            "start_month": v.start.to_string(),
            "drivers": v.drivers.iter().map(|d| json!({
                "id": d.id, "item_uid": d.uid, "current": d.current, "label": d.label,
                "expected": d.expected.iter().map(|x| x.to_string()).collect::<Vec<_>>(),
                "measured": d.measured.iter().map(|x| x.to_string()).collect::<Vec<_>>(), "expected_to_date": d.realization.expected_to_date.to_string(),
                "measured_to_date": d.realization.measured_to_date.to_string(),
                "realization": d.realization.rate.map(super::metrics::rate_text),
            })).collect::<Vec<_>>(),
        })
    });
    let (currency, hurdle_rate) = (&site.currency, site.hurdle_rate.to_string());
    Ok(Json(json!({
        "baseline_case_id": current(&history).map(|b| b.case.id),
        "baselines": super::cases::baseline_lines(&history).iter().map(super::cases::BaselineLine::json).collect::<Vec<_>>(),
        "currency": currency,
        "hurdle_rate": hurdle_rate,
        "entries": entries,
        "realized": realized,
    })))
}

/// POST /api/v1/zones/{id}/ledger: book one entry. An `Idempotency-Key` header (per user)
/// makes a retry book once: the repeat answers 200 with the first entry; the same key with a
/// different body or URL answers 409 and books nothing; a key that is not 1 to 100 printable
/// ASCII characters is a 400.
pub async fn api_book(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(me): CurrentUser,
    ApiPath(id): ApiPath<i64>,
    headers: HeaderMap,
    JsonBody(input): JsonBody<BookingInput>,
) -> Result<Response, ApiError> {
    let key = match headers.get("idempotency-key") {
        None => None,
        Some(v) => Some(
            crate::domain::idempotency_key(v.as_bytes())
                .map_err(|message| AppError::InvalidHeader(FieldErrors::one("Idempotency-Key", message)))?,
        ),
    };
    let booking = Booking::parse(&input, NumberFormat::Plain)?;
    // The request's fingerprint: method, path and the booking as parsed, numbers normalised.
    let fingerprint =
        crate::auth::sha256_hex(format!("POST /api/v1/zones/{id}/ledger\n{}", booking.canonical()).as_bytes());
    let key = key.map(|key| db::ledger::Idempotency { user_id: me.user.id, key, fingerprint: &fingerprint });
    let (today, now) = (today(&state), state.clock.now());
    let booked =
        match app::ledger::book(&state.pool, who(&me), ZoneId(id), &booking, (today, now), key.as_ref(), None).await? {
            app::ledger::Once::Done(b) => b,
            // Only forms carry a one-time token; kept total all the same.
            app::ledger::Once::Already(outcome) => {
                return Err(AppError::Conflict(format!("already submitted: it booked {outcome}")).into());
            }
        };
    Ok(match booked {
        Booked::New(e) => (StatusCode::CREATED, Json(json!({ "entry": e }))).into_response(),
        Booked::Replayed(e) => {
            (StatusCode::OK, [("idempotent-replayed", "true")], Json(json!({ "entry": e }))).into_response()
        }
    })
}

/// POST /api/v1/zones/{id}/ledger/{entry}/reverse with `{"evidence": "..."}`.
pub async fn api_reverse(
    State(state): State<AppState>,
    _: ApiQuery<NoQuery>,
    CurrentUser(me): CurrentUser,
    ApiPath((id, entry)): ApiPath<(i64, i64)>,
    JsonBody(input): JsonBody<ReverseInput>,
) -> Result<Response, ApiError> {
    let now = state.clock.now();
    match app::ledger::reverse(&state.pool, who(&me), ZoneId(id), EntryId(entry), &input.evidence, None, now).await? {
        app::ledger::Once::Done(r) => Ok((StatusCode::CREATED, Json(json!({ "entry": r }))).into_response()),
        app::ledger::Once::Already(outcome) => {
            Err(AppError::Conflict(format!("already submitted: it booked {outcome}")).into())
        }
    }
}
