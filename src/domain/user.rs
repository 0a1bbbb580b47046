//! Account names, and the life of an API token.

/// Longest user name: it is written into every `*_by` column and each Idempotency-Key's row.
pub const USER_NAME_MAX: usize = 40;

/// A user name: 2 to [`USER_NAME_MAX`] ASCII letters, digits, dots, dashes or underscores,
/// trimmed. The one rule for the admin page, the command line and the first run.
pub fn parse_user_name(value: &str) -> Result<String, String> {
    let v = value.trim();
    let ok = (2..=USER_NAME_MAX).contains(&v.len())
        && v.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '-' | '_'));
    if ok {
        Ok(v.to_string())
    } else {
        Err(format!("2 to {USER_NAME_MAX} letters, digits, dots, dashes or underscores"))
    }
}

/// Days an API token lives unless its maker chooses otherwise: a quarter, so that a forgotten
/// script credential stops by itself (common practice; no published figure is followed).
pub const TOKEN_DAYS_DEFAULT: u32 = 90;
/// The longest life a token can be given: a year.
pub const TOKEN_DAYS_MAX: u32 = 365;

/// A token's life in whole days, 1 to [`TOKEN_DAYS_MAX`].
pub fn check_token_days(days: u32) -> Result<u32, String> {
    if (1..=TOKEN_DAYS_MAX).contains(&days) { Ok(days) } else { Err(token_days_rule()) }
}

fn token_days_rule() -> String {
    format!("a whole number of days from 1 to {TOKEN_DAYS_MAX} (empty: {TOKEN_DAYS_DEFAULT})")
}

/// A token's life as typed in a form: empty means [`TOKEN_DAYS_DEFAULT`].
pub fn parse_token_days(value: &str) -> Result<u32, String> {
    let v = value.trim();
    if v.is_empty() {
        return Ok(TOKEN_DAYS_DEFAULT);
    }
    v.parse::<u32>().map_err(|_| token_days_rule()).and_then(check_token_days)
}

/// The issuer of a token when it is not the token's owner (names compare as the database does,
/// ignoring ASCII case): entries booked with such a token say who booked them on whose behalf.
pub fn issued_on_behalf<'a>(issuer: &'a str, owner: &str) -> Option<&'a str> {
    (!issuer.eq_ignore_ascii_case(owner)).then_some(issuer)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_tokens_life_is_one_day_to_a_year() {
        let rule = Err("a whole number of days from 1 to 365 (empty: 90)".to_string());
        assert_eq!(parse_token_days(""), Ok(90));
        assert_eq!(parse_token_days(" 30 "), Ok(30));
        assert_eq!(parse_token_days("1"), Ok(1));
        assert_eq!(parse_token_days("365"), Ok(365));
        assert_eq!(parse_token_days("366"), rule);
        assert_eq!(parse_token_days("0"), rule);
        assert_eq!(parse_token_days("-5"), rule);
        assert_eq!(parse_token_days("7.5"), rule);
        assert_eq!(check_token_days(400), rule);
    }

    #[test]
    fn a_token_made_by_someone_else_is_on_their_behalf() {
        assert_eq!(issued_on_behalf("t-admin", "t-controller"), Some("t-admin"));
        assert_eq!(issued_on_behalf("command-line", "t-controller"), Some("command-line"));
        assert_eq!(issued_on_behalf("T-Controller", "t-controller"), None);
    }

    #[test]
    fn names_follow_one_rule() {
        assert_eq!(parse_user_name(" lead.2 "), Ok("lead.2".to_string()));
        assert_eq!(parse_user_name(&"a".repeat(40)), Ok("a".repeat(40)));
        let rule = Err("2 to 40 letters, digits, dots, dashes or underscores".to_string());
        assert_eq!(parse_user_name(&"a".repeat(41)), rule);
        assert_eq!(parse_user_name(&"a".repeat(199)), rule);
        assert_eq!(parse_user_name("a"), rule);
        assert_eq!(parse_user_name("lead lead"), rule);
    }
}
