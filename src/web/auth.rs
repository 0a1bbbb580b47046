//! Sign-in, sessions, API tokens and the one place that enforces each route's permission.
//!
//! Sessions: a random 256-bit id in an HttpOnly, SameSite=Strict cookie (Secure behind TLS),
//! stored only as its SHA-256 hash; a fresh id at every sign-in; idle and absolute expiry
//! checked on the server against the injectable clock. Scripts send
//! `Authorization: Bearer <token>`; a token carries its owner's role until revoked.
//! We keep sessions in our own table rather than tower-sessions so that expiry runs on the
//! same injectable clock as everything else and the store needs no second sqlx.

use super::{AppError, AppState};
use crate::auth::{Permission, Role, Secret, hash_password, hash_secret, new_secret, usable_hash, verify_password};
use crate::db::{self, User};
use askama::Template;
use axum::extract::connect_info::ConnectInfo;
use axum::extract::{FromRequestParts, MatchedPath, Query, Request, State};
use axum::http::request::Parts;
use axum::http::{HeaderMap, HeaderValue, Method, StatusCode, header};
use axum::middleware::Next;
use axum::response::{Html, IntoResponse, Redirect, Response};
use serde::Deserialize;
use std::net::{IpAddr, SocketAddr};
use std::sync::OnceLock;
use time::Duration;
use time::format_description::well_known::Rfc3339;

/// The session cookie's name.
pub const SESSION_COOKIE: &str = "pl_session";
/// A session unused this long ends (OWASP ASVS 4.0.3 V3.3.2 allows up to 30 minutes idle
/// for L2 when re-authentication is needed; we use 30).
pub const IDLE_TIMEOUT: Duration = Duration::minutes(30);
/// A session ends this long after sign-in whatever its use (ASVS 4.0.3 V3.3.2: 12 hours).
pub const ABSOLUTE_TIMEOUT: Duration = Duration::hours(12);

/// Last-seen times closer together than this are not rewritten (idle expiry is then exact to
/// within a minute).
const TOUCH_INTERVAL: Duration = Duration::minutes(1);

/// Who is asking: the user and how they proved it.
#[derive(Debug, Clone)]
pub struct Principal {
    /// The user.
    pub user: User,
    /// Hash of the session id, when signed in by cookie (logout needs it).
    pub session: Option<String>,
    /// Who made the API token of this request, when it was not the user (an admin making a
    /// token for a controller): ledger entries it books are marked as booked on their behalf.
    pub on_behalf: Option<String>,
}

impl Principal {
    /// The name written into `*_by` columns and the audit trail.
    pub fn name(&self) -> &str {
        &self.user.name
    }

    /// The role.
    pub fn role(&self) -> Role {
        self.user.role
    }
}

/// The signed-in user of a request that passed [`authorize`]; handlers take it to attribute
/// their writes.
pub struct CurrentUser(pub Principal);

impl<S: Send + Sync> FromRequestParts<S> for CurrentUser {
    type Rejection = AppError;

    async fn from_request_parts(parts: &mut Parts, _: &S) -> Result<Self, Self::Rejection> {
        parts.extensions.get::<Principal>().cloned().map(Self).ok_or(AppError::Unauthenticated)
    }
}

/// The principal, if any, for templates that show the account bar.
pub struct MaybeUser(pub Option<Principal>);

impl<S: Send + Sync> FromRequestParts<S> for MaybeUser {
    type Rejection = std::convert::Infallible;

    async fn from_request_parts(parts: &mut Parts, _: &S) -> Result<Self, Self::Rejection> {
        Ok(Self(parts.extensions.get::<Principal>().cloned()))
    }
}

fn cookie_value(headers: &HeaderMap, name: &str) -> Option<String> {
    headers.get_all(header::COOKIE).iter().filter_map(|v| v.to_str().ok()).flat_map(|v| v.split(';')).find_map(|pair| {
        let (k, v) = pair.trim().split_once('=')?;
        (k == name).then(|| v.to_string())
    })
}

fn rfc3339(t: time::OffsetDateTime) -> String {
    t.format(&Rfc3339).unwrap_or_default()
}

/// Find the principal of a request: a Bearer token first, else the session cookie (expired
/// sessions are deleted on sight).
async fn principal(state: &AppState, headers: &HeaderMap) -> Result<Option<Principal>, AppError> {
    if let Some(auth) = headers.get(header::AUTHORIZATION) {
        let token = auth.to_str().ok().and_then(|v| v.strip_prefix("Bearer ")).map(str::trim);
        return match token {
            Some(t) => token_principal(state, t).await,
            None => Ok(None),
        };
    }
    let Some(id) = cookie_value(headers, SESSION_COOKIE) else { return Ok(None) };
    let id_hash = hash_secret(&id);
    let Some(row) = db::get_session(&state.pool, &id_hash).await? else { return Ok(None) };
    let now = state.clock.now();
    let parse = |s: &str| time::OffsetDateTime::parse(s, &Rfc3339).ok();
    let (Some(created), Some(seen)) = (parse(&row.created_at), parse(&row.last_seen_at)) else {
        db::delete_session(&state.pool, &id_hash).await?;
        return Ok(None);
    };
    if now - created >= ABSOLUTE_TIMEOUT || now - seen >= IDLE_TIMEOUT {
        db::delete_session(&state.pool, &id_hash).await?;
        return Ok(None);
    }
    // Note activity at most once a minute, so that reading pages does not write on every request.
    if now - seen >= TOUCH_INTERVAL {
        db::touch_session(&state.pool, &id_hash, &rfc3339(now)).await?;
    }
    Ok(Some(Principal { user: row.user, session: Some(id_hash), on_behalf: None }))
}

/// The principal of a Bearer token: unknown, revoked or its owner deactivated is `None` (the
/// usual 401); expired is a 401 that says so and when, so that a script's owner knows what to
/// do. A token lives until its expiry unless revoked (a password change or a deactivation
/// revokes all of the owner's tokens). Its last use is noted at most once a minute.
async fn token_principal(state: &AppState, token: &str) -> Result<Option<Principal>, AppError> {
    let Some(found) = db::token_use(&state.pool, &hash_secret(token)).await? else { return Ok(None) };
    let now = state.clock.now();
    let parse = |s: &str| time::OffsetDateTime::parse(s, &Rfc3339).ok();
    // A token without a readable expiry (written behind the app's back) is refused.
    let Some(expires) = found.expires_at.as_deref().and_then(parse) else { return Ok(None) };
    if now >= expires {
        return Err(AppError::TokenExpired(expires.date()));
    }
    if found.last_used_at.as_deref().and_then(parse).is_none_or(|last| now - last >= TOUCH_INTERVAL) {
        db::touch_token(&state.pool, found.id, &rfc3339(now)).await?;
    }
    let on_behalf = crate::domain::issued_on_behalf(&found.issued_by, &found.user.name).map(str::to_string);
    Ok(Some(Principal { user: found.user, session: None, on_behalf }))
}

/// Route middleware: resolve the principal, then allow or refuse by the route's permission.
/// Anonymous: 401 on the API, a redirect to sign-in on pages. Wrong role: 403.
pub async fn authorize(State(state): State<AppState>, req: Request, next: Next) -> Response {
    let path = req.uri().path().to_string();
    authorize_inner(&state, req, next).await.unwrap_or_else(|e| e.answer_for(&path))
}

async fn authorize_inner(state: &AppState, mut req: Request, next: Next) -> Result<Response, AppError> {
    let path = req.extensions().get::<MatchedPath>().map(|p| p.as_str().to_string()).unwrap_or_default();
    // axum answers HEAD with the GET handler (body dropped), so HEAD needs what GET needs
    // (RFC 9110 section 9.3.2: HEAD is GET without the content).
    let method = if req.method() == Method::HEAD { Method::GET } else { req.method().clone() };
    // Fail closed: a route missing from the table needs the highest permission.
    let permission = state.permissions.get(&(method.clone(), path.clone())).copied().unwrap_or(Permission::Admin);
    let who = principal(state, req.headers()).await?;
    let api = path.starts_with("/api/");
    match (&who, permission) {
        (_, Permission::Public) => {}
        (None, _) if api => return Err(AppError::Unauthenticated),
        (None, _) => {
            let target = req.uri().path_and_query().map_or("/zones", |p| p.as_str());
            let next_param = if method == Method::GET { format!("?next={}", urlencode(target)) } else { String::new() };
            return Ok(Redirect::to(&format!("/login{next_param}")).into_response());
        }
        (Some(p), needed) if !p.role().allows(needed) => return Err(AppError::Forbidden),
        _ => {}
    }
    if let Some(p) = who {
        req.extensions_mut().insert(p);
    }
    Ok(next.run(req).await)
}

fn urlencode(s: &str) -> String {
    s.bytes()
        .map(|b| match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'/' | b'-' | b'_' | b'.' => (b as char).to_string(),
            _ => format!("%{b:02X}"),
        })
        .collect()
}

/// Only a same-site path may be a redirect target (no open redirect, ASVS 4.0.3 V5.1.5; OWASP
/// Unvalidated Redirects and Forwards Cheat Sheet): visible ASCII as sent, and once
/// percent-decoded one leading `/`, no `//`, no `\`, no control character or white space
/// (browsers drop a tab or newline, so `/\t/evil.example` becomes `//evil.example`, another
/// site). Anything else goes to `/`.
fn safe_next(next: &str) -> &str {
    let safe = next.bytes().all(|b| b.is_ascii_graphic())
        && percent_decode(next).is_some_and(|path| {
            path.starts_with('/')
                && !path.contains("//")
                && !path.contains('\\')
                && !path.chars().any(|c| c.is_control() || c.is_whitespace())
        });
    if safe { next } else { "/" }
}

/// `%XX` sequences decoded; `None` for a broken sequence or bytes that are not UTF-8.
fn percent_decode(s: &str) -> Option<String> {
    let (mut out, mut bytes) = (Vec::with_capacity(s.len()), s.bytes());
    while let Some(b) = bytes.next() {
        if b == b'%' {
            let hex = [bytes.next()?, bytes.next()?];
            if !hex.iter().all(u8::is_ascii_hexdigit) {
                return None;
            }
            out.push(u8::from_str_radix(std::str::from_utf8(&hex).ok()?, 16).ok()?);
        } else {
            out.push(b);
        }
    }
    String::from_utf8(out).ok()
}

#[derive(Template)]
#[template(path = "login.html")]
struct LoginPage {
    nav: Nav,
    next: String,
    name: String,
    message: Option<String>,
}

/// Query of the sign-in page.
#[derive(Deserialize, Default)]
pub struct LoginQuery {
    #[serde(default)]
    next: String,
}

/// GET /login
pub async fn login_page(Query(q): Query<LoginQuery>) -> Result<Html<String>, AppError> {
    Ok(Html(LoginPage { nav: Nav::default(), next: q.next, name: String::new(), message: None }.render()?))
}

/// The sign-in form.
#[derive(Deserialize, Default)]
#[serde(default)]
pub struct LoginForm {
    name: String,
    password: String,
    next: String,
}

/// The client's address as the listener saw it (absent in in-process tests).
pub struct ClientAddr(pub Option<IpAddr>);

impl<S: Send + Sync> FromRequestParts<S> for ClientAddr {
    type Rejection = std::convert::Infallible;

    async fn from_request_parts(parts: &mut Parts, _: &S) -> Result<Self, Self::Rejection> {
        Ok(Self(parts.extensions.get::<ConnectInfo<SocketAddr>>().map(|c| c.0.ip())))
    }
}

/// The address sign-in throttling counts by: IPv4 as is (IPv4-mapped IPv6 included), IPv6 by
/// its /64, since one host or subscriber commonly holds a whole /64 (common practice) and could
/// otherwise change address at every attempt.
fn throttle_address(ip: Option<IpAddr>) -> String {
    match ip.map(|ip| ip.to_canonical()) {
        None => "unknown".to_string(),
        Some(IpAddr::V4(v4)) => v4.to_string(),
        Some(IpAddr::V6(v6)) => {
            let s = v6.segments();
            format!("{:x}:{:x}:{:x}:{:x}::/64", s[0], s[1], s[2], s[3])
        }
    }
}

/// A fixed argon2id hash to verify against for unknown names, so that unknown and known
/// names take the same time and get the same answer (ASVS 4.0.3 V2.2.1 / V3.2.1 intent).
fn dummy_hash() -> &'static str {
    static HASH: OnceLock<String> = OnceLock::new();
    HASH.get_or_init(|| hash_password("no such user, no such password").unwrap_or_default())
}

fn login_failed(form: &LoginForm, status: StatusCode, message: String) -> Result<Response, AppError> {
    let page =
        LoginPage { nav: Nav::default(), next: form.next.clone(), name: form.name.clone(), message: Some(message) };
    Ok((status, Html(page.render()?)).into_response())
}

/// The answer to a pair (account, address) that is backing off: 429 with Retry-After, the
/// password unchecked.
fn backing_off(form: &LoginForm, wait: Duration) -> Result<Response, AppError> {
    let seconds = wait.whole_seconds() + i64::from(wait.subsec_nanoseconds() > 0);
    let seconds = seconds.max(1);
    let when = match seconds {
        1 => "1 second".to_string(),
        s if s < 120 => format!("{s} seconds"),
        s => format!("{} minutes", (s + 59) / 60),
    };
    let mut res = login_failed(
        form,
        StatusCode::TOO_MANY_REQUESTS,
        format!("Too many failed sign-ins for this account from this address; try again in {when}."),
    )?;
    if let Ok(v) = HeaderValue::from_str(&seconds.to_string()) {
        res.headers_mut().insert(header::RETRY_AFTER, v);
    }
    Ok(res)
}

/// POST /login: back-off of the (name, address) pair, the name's delay, then one password
/// check whatever the account; on success a fresh session. See [`crate::auth::Throttle`].
pub async fn login(
    State(state): State<AppState>,
    ClientAddr(addr): ClientAddr,
    headers: HeaderMap,
    super::FormBody(form): super::FormBody<LoginForm>,
) -> Result<Response, AppError> {
    let clock = state.clock.as_ref();
    let address = throttle_address(addr);
    let delay = match state.throttle.begin(&form.name, &address, clock) {
        Ok(delay) => delay,
        Err(wait) => return backing_off(&form, wait),
    };
    // Slows a guesser spread over many addresses; the right password still signs in after it.
    if !delay.is_zero() {
        tokio::time::sleep(delay).await;
    }
    let found = db::user_for_login(&state.pool, form.name.trim()).await?;
    // Exactly one argon2 verification for every name, unknown, disabled or without a usable hash
    // (then against the dummy hash), and one answer for all failures: neither the time nor the
    // message tells which names exist (OWASP Authentication Cheat Sheet, "Authentication and
    // Error Messages").
    let (candidate, stored) = found.map_or((None, None), |(user, hash)| (Some(user), Some(hash)));
    let usable = stored.as_deref().is_some_and(usable_hash);
    let hash = match stored {
        Some(h) if usable => h,
        _ => dummy_hash().to_string(),
    };
    state.throttle.count_password_check();
    // Off the async threads: argon2id takes tens of milliseconds of CPU by design.
    let password = form.password.clone();
    let matches = crate::app::cpu::password(move || verify_password(&password, &hash)).await?;
    let user = candidate.filter(|u| matches && usable && u.active);
    let now = rfc3339(clock.now());
    let Some(user) = user else {
        let mut tx = db::begin_write(&state.pool).await?;
        let subject = format!("account {}", form.name.trim().chars().take(64).collect::<String>());
        let seen = addr.map_or_else(|| "unknown".to_string(), |a| a.to_string());
        db::audit::record(&mut tx, &now, "anonymous", "sign_in_failed", &subject, &format!("address:{seen}")).await?;
        tx.commit().await?;
        return login_failed(&form, StatusCode::UNAUTHORIZED, "Unknown user name or wrong password.".into());
    };
    state.throttle.succeed(&form.name, &address);
    // A fresh id at every sign-in; any session the browser had is ended (no fixation).
    if let Some(old) = cookie_value(&headers, SESSION_COOKIE) {
        db::delete_session(&state.pool, &hash_secret(&old)).await?;
    }
    let id: Secret = new_secret("");
    db::insert_session(&state.pool, &hash_secret(id.expose()), user.id, &now).await?;
    let mut tx = db::begin_write(&state.pool).await?;
    db::audit::record(&mut tx, &now, &user.name, "sign_in", &format!("user {}", user.id), "").await?;
    tx.commit().await?;
    let mut res = Redirect::to(safe_next(&form.next)).into_response();
    set_cookie(&mut res, &session_cookie(id.expose(), state.secure_cookies));
    Ok(res)
}

fn session_cookie(value: &str, secure: bool) -> String {
    let secure = if secure { "; Secure" } else { "" };
    format!("{SESSION_COOKIE}={value}; Path=/; HttpOnly; SameSite=Strict{secure}")
}

fn set_cookie(res: &mut Response, cookie: &str) {
    if let Ok(v) = HeaderValue::from_str(cookie) {
        res.headers_mut().append(header::SET_COOKIE, v);
    }
}

/// POST /logout: end the session on the server and clear the cookie.
pub async fn logout(State(state): State<AppState>, CurrentUser(p): CurrentUser) -> Result<Response, AppError> {
    if let Some(hash) = &p.session {
        db::delete_session(&state.pool, hash).await?;
    }
    let mut tx = db::begin_write(&state.pool).await?;
    db::audit::record(&mut tx, &rfc3339(state.clock.now()), p.name(), "sign_out", &format!("user {}", p.user.id), "")
        .await?;
    tx.commit().await?;
    let mut res = Redirect::to("/login").into_response();
    set_cookie(&mut res, &format!("{}; Max-Age=0", session_cookie("", state.secure_cookies)));
    Ok(res)
}

/// What the page header shows and which controls a page offers. Hiding a control is only
/// a courtesy: [`authorize`] refuses the request anyway.
#[derive(Debug, Clone, Default)]
pub struct Nav {
    /// Signed-in user name; empty when anonymous.
    pub name: String,
    /// Role name.
    pub role: String,
    /// May write zones and cases.
    pub can_edit: bool,
    /// May open the admin pages.
    pub is_admin: bool,
}

impl From<&Principal> for Nav {
    fn from(p: &Principal) -> Self {
        Self {
            name: p.name().to_string(),
            role: p.role().as_str().to_string(),
            can_edit: p.role().allows(Permission::EditCases),
            is_admin: p.role().allows(Permission::Admin),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ipv6_is_throttled_by_its_64_and_mapped_ipv4_as_ipv4() -> Result<(), std::net::AddrParseError> {
        let of = |s: &str| s.parse::<IpAddr>().map(|ip| throttle_address(Some(ip)));
        assert_eq!(of("2001:db8:1:2:aaaa::1")?, "2001:db8:1:2::/64");
        assert_eq!(of("2001:db8:1:2:bbbb::9")?, of("2001:db8:1:2::77")?);
        assert_ne!(of("2001:db8:1:3::1")?, of("2001:db8:1:2::1")?);
        assert_eq!(of("::ffff:10.0.0.7")?, "10.0.0.7");
        assert_eq!(of("10.0.0.7")?, "10.0.0.7");
        assert_eq!(throttle_address(None), "unknown");
        Ok(())
    }

    #[test]
    fn next_is_a_same_site_path_or_home() {
        // OWASP Unvalidated Redirects and Forwards Cheat Sheet; the tab trick is how browsers
        // read `/\t/evil.example` (the URL parser drops tabs and newlines: WHATWG URL standard).
        for bad in [
            "/%09/evil.example",
            "/\t/evil.example",
            "//evil.example",
            "/\\evil.example",
            "/%5Cevil.example",
            "https://evil.example",
            "/%2F%2Fevil",
            "/%2f/evil",
            "/zones%0A",
            "/zones/%E9",
            "/zones/\u{e9}",
            "/zones/%G1",
            "/zones/%4",
            "zones",
            "",
        ] {
            assert_eq!(safe_next(bad), "/", "{bad:?}");
        }
        for good in ["/zones/3?x=1", "/", "/portfolio?rank=npv&budget=100000", "/cases/7/flows", "/zones?q=a%2Cb"] {
            assert_eq!(safe_next(good), good);
        }
    }
}
